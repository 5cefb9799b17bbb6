"""The recommendation as JSON Schema 2020-12: plain standard keywords plus one annotation.

Keywords used: type, properties, required, items, additionalProperties (a map's values),
format, minimum, maximum, description, and with bounds_from_sample maxLength;
each property (and each ``items``) carries ``"x-driftline": {"arrow": "<type key>",
"rule": "<rule name>"}`` and, when the scan saw them, ``"classes"`` (the content classes
of its strings) and ``"null_share"`` (the share of null or absent values), which `check`
reads as a saved report's. Two modes:

* ``permissive``: describes the data as it arrives (JSON records; CSV cells read by their
  content class; Parquet values as JSON), so every scanned record validates: a field's
  ``type`` lists the target's JSON type and every form the rule reads.
* ``strict``: describes the records after the cast rules (apply(), as JSON): only the
  target's JSON type.

A contract, not a snapshot: no length or range taken from the sample is a keyword a
validator enforces. The observed figures (longest string, smallest and largest number,
null share) are written in ``description``. ``bounds_from_sample=True`` (`driftline schema
--bounds-from-sample`) opts into tight bounds: ``maxLength`` the longest string seen (or
the target's text bound in strict mode), ``minimum``/``maximum`` the smallest and largest
number seen; the next longer id or larger reading then fails.

JSON Schema counts 1.0 as an integer and gives integers no width (§6.1.1), so integer
types carry the range of their type (not of the sample) as minimum/maximum and floats are
"number". ``format: date-time`` is given only when every value is RFC 3339 (in permissive
mode: every string the scan saw, no leap second, which the format checker rejects).
"""

from __future__ import annotations

import re
from typing import Any, Literal

import orjson

from driftline.core import paths
from driftline.core.lattice import DType, parse_key
from driftline.core.marker import remark
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.core.words import count
from driftline.recommendation.plan import FieldPlan, Recommendation, observed_note

META_SCHEMA = "https://json-schema.org/draft/2020-12/schema"
Mode = Literal["permissive", "strict"]

_INT_RANGES = {
    "int8": (-(2**7), 2**7 - 1),
    "int16": (-(2**15), 2**15 - 1),
    "int32": (-(2**31), 2**31 - 1),
    "int64": (-(2**63), 2**63 - 1),
    "uint8": (0, 2**8 - 1),
    "uint16": (0, 2**16 - 1),
    "uint32": (0, 2**32 - 1),
    "uint64": (0, 2**64 - 1),
}
_UNIT_NAMES = {"s": "seconds", "ms": "milliseconds", "us": "microseconds", "ns": "nanoseconds"}
_ORDER = ("object", "array", "string", "number", "integer", "boolean", "null")
_TEMPORAL = ("date32", "date64", "timestamp", "time32", "time64")


def json_type(t: DType) -> str:
    """The JSON type of values of t, as JSON data (temporal values are ISO 8601 text)."""
    n = t.name
    if n in _INT_RANGES or n == "duration":
        return "integer"
    if n.startswith("float") or n == "decimal":
        return "number"
    return {"bool": "boolean", "null": "null", "list": "array", "struct": "object", "map": "object"}.get(n, "string")


def _kind_type(key: str) -> str:
    return {"struct": "object", "list": "array", "map": "object", "string": "string"}.get(key) or json_type(
        parse_key(key)
    )


def _cell_types(classes: dict[str, int]) -> set[str]:
    # A CSV cell as the scan reads it (observe.TEXT_CLASS_TYPE): blanks and tokens are null.
    out = set()
    for cls in classes:
        kind = TEXT_CLASS_TYPE[cls]
        out.add("null" if kind is None else json_type(parse_key(kind)))
    return out


_YEAR = re.compile(r"(?!0000)[0-9]{4}-")  # RFC 3339 years; the format checkers reject 0000


def _format(plan: FieldPlan, mode: Mode) -> str | None:
    t = plan.target
    wanted = "date-time" if t.name == "timestamp" and t.tz else "date" if t.name in ("date32", "date64") else None
    typed = [k for k in plan.inputs if k not in ("string", "text")]
    if wanted and typed and not all(_YEAR.match(v) for v in plan.observed.get("range", ("",))):
        return None  # typed values beyond year 9999 (or before 0001) have no RFC 3339 form
    if wanted is None or mode == "strict":
        return wanted
    allowed = {"date-time": {"timestamp_rfc3339"}, "date": {"date"}}[wanted]
    classes = plan.observed.get("classes", {})
    strings = set(classes.get("string", {}))
    cells = {c for c in classes.get("text", {}) if TEXT_CLASS_TYPE[c] is not None}
    if not strings <= allowed or not cells <= allowed or plan.observed.get("leap_seconds"):
        return None
    for key in plan.inputs:
        if key in ("string", "text"):
            continue
        k = parse_key(key)
        ok = k.name == "timestamp" and k.tz if wanted == "date-time" else k.name in ("date32", "date64")
        if not ok:
            return None
    return wanted


def _types(plan: FieldPlan, mode: Mode) -> list[str]:
    types = {json_type(plan.target)}
    if mode == "permissive":
        for key in plan.inputs:
            if key == "text":
                types |= _cell_types(plan.observed.get("classes", {}).get("text", {}))
            else:
                types.add(_kind_type(key))
    if plan.nullable:
        types.add("null")
    if "number" in types:
        types.discard("integer")  # every integer is a number
    first = json_type(plan.target)
    return [first] * (first in types) + [t for t in _ORDER if t in types and t != first]


def _string_bound(plan: FieldPlan, mode: Mode) -> int | None:
    """The longest string a record can hold here: the target's, or the longest seen."""
    if mode == "strict":
        return plan.max_chars if plan.target.name == "string" else None
    lengths = plan.observed.get("max_length", {})
    out = 0
    for key in plan.inputs:
        if key in ("string", "text"):
            out = max(out, lengths.get(key, 0))
        elif key == "binary":
            return None  # base64 text of bytes whose length the scan keeps only in bytes
        elif key not in ("struct", "list", "map") and parse_key(key).name in _TEMPORAL:
            out = max(out, 35)  # ISO 8601 text of a date, time or timestamp with an offset
    return out


def _classes(plan: FieldPlan) -> list[str]:
    """The content classes of the strings seen (typed and CSV cells), nulls in all but spelling left out."""
    seen: set[str] = set()
    for side in plan.observed.get("classes", {}).values():
        seen |= set(side)
    return sorted(seen - {"empty", "null_token"})


def annotation(plan: FieldPlan) -> dict[str, Any]:
    """The x-driftline annotation: the target type, the rule, and what `check` compares as a report's."""
    out: dict[str, Any] = {"arrow": plan.target.key(), "rule": plan.rule}
    classes = _classes(plan)
    if classes:
        out["classes"] = classes
    share = plan.observed.get("null_share")
    if share is not None:
        out["null_share"] = share
    return out


def node(plan: FieldPlan, mode: Mode = "permissive", *, bounds_from_sample: bool = False) -> dict[str, Any]:
    """The schema of one field (its children included)."""
    types = _types(plan, mode)
    out: dict[str, Any] = {"type": types[0] if len(types) == 1 else types}
    t = plan.target
    numbers = plan.observed.get("numbers") if bounds_from_sample else None
    if numbers and ("integer" in types or "number" in types):
        out["minimum"], out["maximum"] = numbers
    elif t.name in _INT_RANGES and "integer" in types:
        out["minimum"], out["maximum"] = _INT_RANGES[t.name]
    if "string" in types:
        fmt = _format(plan, mode)
        if fmt:
            out["format"] = fmt
        bound = _string_bound(plan, mode) if bounds_from_sample else None
        if bound is not None:
            out["maxLength"] = max(bound, 0)
    if plan.rule != "keep_as_json_text":

        def kid(c: FieldPlan) -> dict[str, Any]:
            return node(c, mode, bounds_from_sample=bounds_from_sample)

        if t.name == "struct":
            out["properties"] = {c.name: kid(c) for c in plan.children}
            required = [c.name for c in plan.children if c.required]
            if required:
                out["required"] = required
        elif t.name == "list":
            out["items"] = kid(plan.children[0])
        elif t.name == "map":  # a map is an object of its entries: the value's schema (nulls included)
            out["additionalProperties"] = kid(plan.children[1])
    notes = []
    if t.name == "duration" and plan.rule != "keep_as_json_text":  # JSON has no duration of its own
        notes.append(f"{t.key()}: an integer count of {_UNIT_NAMES[t.unit or 's']}")
    seen = observed_note(plan)
    if seen:
        notes.append(seen)
    if notes:
        out["description"] = "; ".join(notes)
    out["x-driftline"] = annotation(plan)
    return out


def json_schema(
    rec: Recommendation, *, mode: Mode = "permissive", title: str | None = None, bounds_from_sample: bool = False
) -> dict[str, Any]:
    """The JSON Schema of one record (bounds_from_sample: maxLength, minimum and maximum from the sample).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"n": 1}\\n{"n": "2"}\\n')
    >>> s = json_schema(driftline.scan(d).recommend(parse_strings="always"))
    >>> s["properties"]["n"]["type"], s["properties"]["n"]["maximum"], s["properties"]["n"]["x-driftline"]["rule"]
    (['integer', 'string'], 9223372036854775807, 'parse_integer')
    >>> s["properties"]["n"]["x-driftline"]["classes"], s["properties"]["n"]["description"]
    (['integer'], 'observed (not enforced): 2 values; longest string 1 character; numbers from 1 to 1')
    """
    if mode not in ("permissive", "strict"):
        raise ValueError(f"mode must be 'permissive' or 'strict', not {mode!r}")
    # Records that are not objects (a bare JSON value) are the path '$': their schema is the
    # root's own, beside "object"; type-specific keywords never clash with "properties".
    bare = next((p for p in rec.fields if p.path == paths.ROOT), None)
    fields = [p for p in rec.fields if p is not bare]
    required = [p.name for p in fields if p.required]
    out: dict[str, Any] = {
        # First, so that a scan knows its own output from the first bytes (driftline.core.marker).
        "$comment": remark(
            f"driftline schema, {mode} mode: "
            + (
                "every record as it arrives validates"
                if mode == "permissive"
                else "records after the cast rules validate"
            )
            + f"; {count(rec.rows, 'row')} in {count(rec.files, 'file')}"
        ),
        "$schema": META_SCHEMA,
        "title": title or f"records of {rec.root}",
        "type": "object",
        "properties": {p.name: node(p, mode, bounds_from_sample=bounds_from_sample) for p in fields},
    }
    if required:
        out["required"] = required
    if bare is not None:
        extra = node(bare, mode, bounds_from_sample=bounds_from_sample)
        kinds = extra.pop("type")
        out["type"] = ["object", *(t for t in ([kinds] if isinstance(kinds, str) else kinds) if t != "object")]
        extra.pop("x-driftline")
        out.update({k: v for k, v in extra.items() if k not in out})
        out["$comment"] += f"; records that are not objects: {bare.target.key()} ({bare.rule})"
    return out


def dumps(schema: dict[str, Any]) -> bytes:
    return orjson.dumps(schema, option=orjson.OPT_INDENT_2) + b"\n"
