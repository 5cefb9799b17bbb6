"""Baselines: what was agreed about each field path, from whichever file records it.

A baseline comes from
  * a JSON Schema 2020-12 file (as `driftline schema --to json-schema` writes): only the
    standard keywords type / properties / required / items / format / minimum / maximum /
    maxLength are read, plus an optional per-property annotation
    ``"x-driftline": {"arrow": "<type key>", "rule": "<cast rule name>", "classes": [...],
    "null_share": 0.0}`` (the content classes and null share the scan saw);
  * a saved scan report (`driftline scan --json`): read as the JSON Schema that `driftline
    schema --to json-schema` writes from it, so that both kinds go through one comparison
    and give one verdict on one change;
  * a cast-rules file (`driftline schema --rules`, docs/rules.schema.json): each path's
    target type, nullability, presence, rule and the content classes the rule parses.

Every source becomes the same Baseline: path → Expected, with paths spelled as the scan
spells them ('a.b', 'a[]', 'm{key}', backtick-quoted odd names).

>>> b = baseline_from_json_schema({"type": "object", "required": ["id"],
...     "properties": {"id": {"type": "integer"}, "tag": {"type": ["string", "null"]}}})
>>> b.fields["id"].type.key(), b.fields["id"].required, b.fields["tag"].nullable
('int64', True, True)
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from driftline.core import paths
from driftline.core.documents import read_json_document
from driftline.core.lattice import UNKNOWN, DType, join_all, parse_key
from driftline.core.validation import check_document, check_json_schema, damaged
from driftline.emit.schemas.rules_json import RULES_FORMAT, RULES_VERSION, upgrade_rules_v1
from driftline.errors import ReportVersionError, UnreadableFileError
from driftline.results.profile import Profile

if TYPE_CHECKING:
    from driftline.recommendation.plan import Recommendation

# String content classes a JSON Schema format allows (observe/textclass.py names them).
FORMAT_CLASSES: dict[str, frozenset[str]] = {
    "date-time": frozenset({"timestamp_rfc3339"}),  # RFC 3339 section 5.6 date-time
    "date": frozenset({"date"}),  # RFC 3339 full-date
}
# Classes that hold no value: CSV empty cells and null tokens are nulls, not content.
NULL_CLASSES = frozenset({"empty", "null_token"})

_JSON_TYPES: dict[str, DType] = {
    "integer": DType("int64"),
    "number": DType("float64"),
    "string": DType("string"),
    "boolean": DType("bool"),
    "array": DType("list", item=UNKNOWN),
    "object": DType("struct"),
}


@dataclass(frozen=True, slots=True)
class Expected:
    """What the baseline says about one field path. None means 'says nothing'.

    type        the agreed type (nested kinds compare by kind; their children are paths too)
    nullable    null values allowed
    required    present wherever its container (the row, the parent struct) is
    open        a struct whose children the baseline does not list: any child is fine
    classes     content classes allowed for string values (from a format, or observed)
    rule        the cast rule the pipeline applies to raw values (x-driftline annotation)
    accept      the content classes a parse_* rule parses (a rules file says; else judged by type)
    null_share  share of null or absent values when the baseline was made (reports only)
    """

    path: str
    type: DType | None = None
    nullable: bool = True
    required: bool = False
    open: bool = False
    classes: frozenset[str] | None = None
    minimum: float | None = None
    maximum: float | None = None
    max_length: int | None = None
    rule: str | None = None
    accept: frozenset[str] | None = None
    null_share: float | None = None


@dataclass(frozen=True)
class Baseline:
    """Expected fields by path, and where they came from ('json-schema' | 'report' | 'rules')."""

    kind: str
    source: str
    fields: Mapping[str, Expected] = field(default_factory=dict)

    @property
    def has_rules(self) -> bool:
        return any(e.rule is not None for e in self.fields.values())

    @property
    def has_shares(self) -> bool:
        return any(e.null_share is not None for e in self.fields.values())

    @property
    def has_ranges(self) -> bool:
        return any(
            e.minimum is not None or e.maximum is not None or e.max_length is not None for e in self.fields.values()
        )


# -- JSON Schema ------------------------------------------------------------------------


class _SchemaError(Exception):
    def __init__(self, pointer: str, message: str) -> None:
        super().__init__(f"at {pointer or '/'}: {message}")


def _pointer_part(name: str) -> str:
    # RFC 6901 section 3: '~' is written '~0' and '/' is written '~1'.
    return name.replace("~", "~0").replace("/", "~1")


def _types_of(node: Mapping[str, Any], ptr: str) -> tuple[list[str], bool]:
    raw = node.get("type")
    if raw is None:
        return [], True
    names = [raw] if isinstance(raw, str) else raw
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        raise _SchemaError(ptr + "/type", f"'type' must be a string or a list of strings, not {raw!r}")
    unknown = [n for n in names if n != "null" and n not in _JSON_TYPES]
    if unknown:
        raise _SchemaError(
            ptr + "/type", f"unknown JSON Schema type {unknown[0]!r}; allowed: {', '.join([*_JSON_TYPES, 'null'])}"
        )
    return [n for n in names if n != "null"], "null" in names


def _number(node: Mapping[str, Any], key: str, ptr: str) -> float | None:
    value = node.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise _SchemaError(f"{ptr}/{key}", f"{key!r} must be a number, not {value!r}")
    return value


@dataclass(frozen=True, slots=True)
class _Note:
    """What the x-driftline annotation of one schema node says."""

    arrow: DType | None = None
    rule: str | None = None
    classes: frozenset[str] | None = None
    null_share: float | None = None


def _note(node: Mapping[str, Any], ptr: str) -> _Note:
    arrow, rule = _annotation(node, ptr)
    note = node.get("x-driftline")
    if not isinstance(note, Mapping):
        return _Note(arrow, rule)
    classes, share = note.get("classes"), note.get("null_share")
    if classes is not None and not (isinstance(classes, list) and all(isinstance(c, str) for c in classes)):
        raise _SchemaError(
            ptr + "/x-driftline/classes", f"'classes' must be a list of content classes, not {classes!r}"
        )
    if share is not None and (isinstance(share, bool) or not isinstance(share, int | float) or not 0 <= share <= 1):
        raise _SchemaError(ptr + "/x-driftline/null_share", f"'null_share' must be from 0 to 1, not {share!r}")
    return _Note(arrow, rule, frozenset(classes) if classes is not None else None, share)


def _format_classes(fmt: object) -> frozenset[str] | None:
    return FORMAT_CLASSES.get(fmt) if isinstance(fmt, str) else None


def _length(node: Mapping[str, Any], ptr: str) -> int | None:
    value = node.get("maxLength")
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise _SchemaError(ptr + "/maxLength", f"'maxLength' must be a non-negative integer, not {value!r}")
    return value


def _annotation(node: Mapping[str, Any], ptr: str) -> tuple[DType | None, str | None]:
    note = node.get("x-driftline")
    if note is None:
        return None, None
    if not isinstance(note, Mapping):
        raise _SchemaError(ptr + "/x-driftline", "'x-driftline' must be an object with 'arrow' and 'rule'")
    arrow, rule = note.get("arrow"), note.get("rule")
    dtype = None
    if arrow is not None:
        if not isinstance(arrow, str):
            raise _SchemaError(ptr + "/x-driftline/arrow", f"'arrow' must be a type key string, not {arrow!r}")
        try:
            dtype = parse_key(arrow)
        except ValueError as exc:
            raise _SchemaError(ptr + "/x-driftline/arrow", str(exc)) from None
    if rule is not None and not isinstance(rule, str):
        raise _SchemaError(ptr + "/x-driftline/rule", f"'rule' must be a rule name string, not {rule!r}")
    return dtype, rule


def _walk_schema(node: Any, path: str | None, ptr: str, required: bool, out: dict[str, Expected]) -> None:
    if isinstance(node, bool):  # `true` allows anything, `false` nothing: neither says a type
        node = {}
    if not isinstance(node, Mapping):
        raise _SchemaError(ptr, f"a schema must be an object or a boolean, not {type(node).__name__}")
    names, nullable = _types_of(node, ptr)
    note = _note(node, ptr)
    arrow, rule = note.arrow, note.rule
    json_type = join_all(_JSON_TYPES[n] for n in names) if names else None
    dtype = arrow.with_nullable(False) if arrow is not None else json_type
    fmt = node.get("format")
    props = node.get("properties")
    if props is not None and not isinstance(props, Mapping):
        raise _SchemaError(ptr + "/properties", "'properties' must be an object")
    if path is not None:
        out[path] = Expected(
            path=path,
            type=dtype,
            nullable=nullable or not names,
            required=required,
            open=props is None and arrow is None and (dtype is None or dtype.name == "struct"),
            # The classes the scan saw, when the annotation says; else those the format allows.
            classes=note.classes
            if note.classes is not None
            else FORMAT_CLASSES.get(fmt)
            if isinstance(fmt, str)
            else None,
            minimum=_number(node, "minimum", ptr),
            maximum=_number(node, "maximum", ptr),
            max_length=_length(node, ptr),
            rule=rule,
            null_share=note.null_share,
        )
    if props is not None:
        req = node.get("required", [])
        if not isinstance(req, list) or not all(isinstance(r, str) for r in req):
            raise _SchemaError(ptr + "/required", "'required' must be a list of property names")
        for name, child in props.items():
            _walk_schema(child, paths.child(path, name), f"{ptr}/properties/{_pointer_part(name)}", name in req, out)
    items = node.get("items")
    if items is not None and path is not None:
        # Every list element is there when its list is: an element is never 'absent'.
        _walk_schema(items, paths.element(path), ptr + "/items", True, out)
    values = node.get("additionalProperties")
    if arrow is not None and arrow.name == "map" and isinstance(values, Mapping | bool) and path is not None:
        # A map's values, as an object's: whether they may be null is said here, not in the type key.
        _walk_schema(values, paths.map_part(path, "value"), ptr + "/additionalProperties", True, out)
    if arrow is not None and path is not None:
        _expand_arrow(path, arrow, out)


def _expand_arrow(path: str, t: DType, out: dict[str, Expected]) -> None:
    """Children named by an annotated nested type that the schema keywords did not list."""
    children: list[tuple[str, DType, bool]] = []
    if t.name == "struct":
        children = [(paths.child(path, n), c, not c.nullable) for n, c in t.fields]
    elif t.name == "list" and t.item is not None:
        children = [(paths.element(path), t.item, True)]
    elif t.name == "map":
        children = [(paths.map_part(path, part), c, True) for part, c in t.fields]
    for cpath, ctype, req in children:
        if cpath not in out:
            out[cpath] = Expected(cpath, ctype.with_nullable(False), ctype.nullable, req)
        _expand_arrow(cpath, ctype, out)


def baseline_from_json_schema(doc: Any, *, source: str = "schema") -> Baseline:
    """A Baseline from a parsed JSON Schema whose root describes one record (an object)."""
    if not isinstance(doc, Mapping):
        raise UnreadableFileError(f'{source} is not a JSON Schema: the document (at "") is not an object')
    out: dict[str, Expected] = {}
    try:
        _walk_schema(doc, None, "", True, out)
    except _SchemaError as exc:
        raise UnreadableFileError(f"{source}: {exc}") from None
    if doc.get("properties") is None:
        raise UnreadableFileError(
            f"{source} at /properties: the root schema has no 'properties'; a baseline describes record fields"
        )
    return Baseline("json-schema", source, out)


# -- saved scan report -------------------------------------------------------------------


def baseline_from_profile(profile: Profile, *, source: str = "report") -> Baseline:
    """What a profile observed, as a baseline: the JSON Schema `driftline schema --to json-schema`
    writes from it (default recommendation options), read back as any JSON Schema baseline is.

    One reading for both kinds: a change gets the same verdict and rule against a saved
    report as against the schema written from that report (tests/gate/test_one_comparison.py).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": null}\\n{}\\n')
    >>> e = baseline_from_profile(driftline.scan(d)).fields["x"]
    >>> e.type.key(), e.nullable, e.required, round(e.null_share, 4), e.rule
    ('int64', True, False, 0.6667, 'identity')
    """
    from driftline.emit.schemas.json_schema import json_schema
    from driftline.recommendation import recommend

    doc = json_schema(recommend(profile), mode="permissive")
    return replace(baseline_from_json_schema(doc, source=source), kind="report")


# -- a recommendation (what a cast-rules file records) -------------------------------------


def baseline_from_recommendation(rec: Recommendation, *, source: str = "recommendation") -> Baseline:
    """Each planned field path with its target type, nullability, presence and cast rule.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"t": "2026-11-29T10:00:00Z"}\\n')
    >>> e = baseline_from_recommendation(driftline.scan(d).recommend()).fields["t"]
    >>> e.type.key(), e.rule, e.required, e.nullable
    ('timestamp[us, UTC]', 'parse_timestamp', True, False)
    """
    out: dict[str, Expected] = {}
    for plan in rec.walk():
        t = plan.target
        accept = plan.params.get("accept")
        out[plan.path] = Expected(
            plan.path,
            t.with_nullable(False) if t.name != "null" else t,
            t.nullable,
            plan.required,
            open=False,
            rule=plan.rule,
            accept=frozenset(accept) if accept is not None else None,
        )
    return Baseline("rules", source, out)


def baseline_from_rules(doc: Mapping[str, Any], *, source: str = "rules") -> Baseline:
    """A Baseline from a cast-rules document (docs/rules.schema.json, `driftline schema --rules`).

    >>> doc = {"format": "driftline-rules", "version": 1, "fields": [{"path": "n", "target": "int64",
    ...        "nullable": False, "required": True, "rule": "parse_integer", "params": {"accept": ["integer"]}}]}
    >>> e = baseline_from_rules(doc).fields["n"]
    >>> e.type.key(), e.rule, e.accept, e.required
    ('int64', 'parse_integer', frozenset({'integer'}), True)
    """
    entries = doc.get("fields")
    if not isinstance(entries, list):
        raise UnreadableFileError(f"{source}: 'fields' must be a list of field entries")
    out: dict[str, Expected] = {}
    for i, fd in enumerate(entries):
        where = f"{source} at /fields/{i}"
        try:
            path, rule = fd["path"], fd["rule"]
            nullable, required = bool(fd["nullable"]), bool(fd["required"])
            accept = (fd.get("params") or {}).get("accept")
        except KeyError as exc:
            raise UnreadableFileError(f"{where} lacks the key {exc}") from None
        except (TypeError, ValueError, AttributeError) as exc:
            raise UnreadableFileError(f"{where}: {exc}") from None
        try:
            target = parse_key(fd["target"])
        except KeyError:
            raise UnreadableFileError(f"{where} lacks the key 'target'") from None
        except (TypeError, ValueError) as exc:
            raise UnreadableFileError(f"{where}/target: {exc}") from None
        if (
            not isinstance(path, str)
            or not isinstance(rule, str)
            or accept is not None
            and not (isinstance(accept, list) and all(isinstance(a, str) for a in accept))
        ):
            raise UnreadableFileError(f"{where}: 'path' and 'rule' must be strings, 'params.accept' a list of classes")
        out[path] = Expected(
            path,
            target.with_nullable(False) if target.name != "null" else target,
            nullable or target.name == "null",
            required,
            open=False,
            rule=rule,
            accept=frozenset(accept) if accept is not None else None,
        )
    return Baseline("rules", source, out)


# -- loading -----------------------------------------------------------------------------


def load_baseline(path: str | Path) -> Baseline:
    """Read a baseline file; its kind is told from its content.

    A JSON Schema (it has "$schema", "properties" or "type"), a scan report
    ("format": "driftline-report") or a cast-rules file ("format": "driftline-rules").
    Its source is the path as given, plain (messages quote it).
    """
    return replace(_loaded(path, repr(str(path))), source=str(path))


def _loaded(path: str | Path, source: str) -> Baseline:
    doc = read_json_document(path, "baseline", UnreadableFileError)
    if isinstance(doc, Mapping) and doc.get("format") == "driftline-report":
        from driftline.results.report import from_dict

        return baseline_from_profile(from_dict(doc, source=source), source=source)
    if isinstance(doc, Mapping) and doc.get("format") == RULES_FORMAT:
        if doc.get("version") == 1 and isinstance(doc, dict):
            doc = upgrade_rules_v1(doc)
        if doc.get("version") != RULES_VERSION:
            raise ReportVersionError(
                f"baseline {source} has rules version {doc.get('version')!r} (at /version); "
                f"this driftline reads versions 1 and {RULES_VERSION}; write the rules again with "
                "driftline schema --rules"
            )
        check_document(doc, "rules", "baseline", source)
        return baseline_from_rules(doc, source=source)
    if isinstance(doc, Mapping) and any(k in doc for k in ("$schema", "properties", "type")):
        try:
            base = baseline_from_json_schema(doc, source=source)
        except (TypeError, ValueError, KeyError, AttributeError) as exc:
            check_json_schema(doc, "baseline", source)  # the meta-schema names the place, when it can
            raise damaged(
                "baseline", source, "", "a JSON Schema driftline can read", f"{type(exc).__name__}: {exc}"
            ) from None
        check_json_schema(doc, "baseline", source)
        return base
    kind = doc.get("format") if isinstance(doc, Mapping) else None
    raise ReportVersionError(
        f"baseline {source} is neither a JSON Schema nor a driftline scan report"
        + (f" (its format is {kind!r})" if kind else "")
        + "; give a file that `driftline schema --to json-schema`, `driftline schema --rules` or "
        "`driftline scan --json` wrote"
    )
