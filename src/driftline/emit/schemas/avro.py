"""The recommendation as an Avro schema (Apache Avro specification 1.12).

* A nullable field is ``["null", T]`` with ``"default": null``: "null" first satisfies the
  default rule of Avro up to 1.11 (the default matches the first branch) and of 1.12
  (it matches some branch).
* No union holds two branches of one type, and no union sits directly in a union: T is
  never a union (the recommender gives one type per field).
* Names must match ``[A-Za-z_][A-Za-z0-9_]*``: other field names are rewritten (``pm2.5``
  becomes ``pm2_5``, a clash gets ``_2``) and every field keeps its own name and path in
  ``"x-driftline"`` (extra attributes are metadata in Avro).

avro_datum() turns a row of apply()'s output (``to_pylist``) into an Avro datum of this
schema: the same values, under the Avro names.
"""

from __future__ import annotations

import decimal
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.lattice import DType
from driftline.core.marker import remark
from driftline.recommendation.plan import FieldPlan, Recommendation, observed_note

_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_TIMESTAMP = {"s": "millis", "ms": "millis", "us": "micros", "ns": "nanos"}


def avro_name(name: str) -> str:
    """A valid Avro name for a field or record name.

    >>> avro_name("pm2.5"), avro_name("2nd"), avro_name("ok")
    ('pm2_5', '_2nd', 'ok')
    """
    out = re.sub(r"[^A-Za-z0-9_]", "_", name) or "_"
    return out if _NAME.fullmatch(out) else "_" + out


@dataclass
class _Names:
    """Avro names for every field path and record, unique where Avro needs them unique."""

    fields: dict[str, str] = field(default_factory=dict)
    records: set[str] = field(default_factory=set)

    def record(self, wanted: str) -> str:
        name, i = avro_name(wanted), 2
        base = name
        while name in self.records:
            name, i = f"{base}_{i}", i + 1
        self.records.add(name)
        return name

    def children(self, plans: tuple[FieldPlan, ...]) -> list[str]:
        taken: set[str] = set()
        out = []
        for p in plans:
            name, i = avro_name(p.name), 2
            base = name
            while name in taken:
                name, i = f"{base}_{i}", i + 1
            taken.add(name)
            self.fields[p.path] = name
            out.append(name)
        return out


def _logical(t: DType) -> Any:
    n = t.name
    if n == "decimal" or n == "uint64":  # uint64 does not fit a long; decimal(20,0) holds it
        p, s = (t.precision, t.scale) if n == "decimal" else (20, 0)
        return {"type": "bytes", "logicalType": "decimal", "precision": p, "scale": s}
    if n in ("date32", "date64"):
        return {"type": "int", "logicalType": "date"}
    if n == "timestamp":
        assert t.unit is not None
        local = "" if t.tz else "local-"
        return {"type": "long", "logicalType": f"{local}timestamp-{_TIMESTAMP[t.unit]}"}
    if n == "time32":
        return {"type": "int", "logicalType": "time-millis"}
    if n == "time64":  # Avro has no nanosecond time: time64[ns] is a plain long of nanoseconds
        return {"type": "long", "logicalType": "time-micros"} if t.unit == "us" else "long"
    return {
        "null": "null",
        "bool": "boolean",
        "int8": "int",
        "int16": "int",
        "int32": "int",
        "uint8": "int",
        "uint16": "int",
        "int64": "long",
        "uint32": "long",
        "float16": "float",
        "float32": "float",
        "float64": "double",
        "string": "string",
        "binary": "bytes",
        "duration": "long",
    }[n]


_UNIT_NAMES = {"s": "seconds", "ms": "milliseconds", "us": "microseconds", "ns": "nanoseconds"}


def stand_in(t: DType) -> str | None:
    """What a plain Avro type stands in for, when Avro has no logical type of t's meaning.

    >>> from driftline.core.lattice import parse_key
    >>> print(stand_in(parse_key("duration[s]")))
    duration[s] as a long count of seconds (Avro's duration logical type counts months, days and milliseconds)
    """
    if t.name == "duration":
        assert t.unit is not None
        return (
            f"{t.key()} as a long count of {_UNIT_NAMES[t.unit]} "
            "(Avro's duration logical type counts months, days and milliseconds)"
        )
    if t.name == "time64" and t.unit == "ns":
        return "time64[ns] as a long count of nanoseconds since midnight (Avro times stop at microseconds)"
    return None


def _type(plan: FieldPlan, names: _Names, record: str) -> Any:
    t = plan.target
    if plan.rule == "keep_as_json_text" or t.name not in ("struct", "list", "map"):
        base = _logical(t)
    elif t.name == "struct":
        own = names.record(f"{record}_{plan.name}")
        base = {"type": "record", "name": own, "fields": _fields(plan.children, names, own)}
    elif t.name == "list":
        base = {"type": "array", "items": _type(plan.children[0], names, f"{record}_{plan.name}")}
    else:
        key, value = plan.children
        if key.target.name == "string":
            base = {"type": "map", "values": _type(value, names, f"{record}_{plan.name}")}
        else:  # Avro map keys are strings: other keys make an array of key/value records
            entry = names.record(f"{record}_{plan.name}_entry")
            base = {
                "type": "array",
                "items": {"type": "record", "name": entry, "fields": _fields((key, value), names, entry)},
            }
    return ["null", base] if plan.nullable and t.name != "null" else base


def _fields(plans: tuple[FieldPlan, ...], names: _Names, record: str) -> list[dict[str, Any]]:
    out = []
    for name, p in zip(names.children(plans), plans, strict=True):
        f: dict[str, Any] = {"name": name, "type": _type(p, names, record)}
        if p.nullable:
            f["default"] = None
        note = None if p.rule == "keep_as_json_text" else stand_in(p.target)
        seen = observed_note(p)
        f["doc"] = f"{p.rule}: {p.does}" + (f"; {note}" if note else "") + (f"; {seen}" if seen else "")
        f["x-driftline"] = {"path": p.path, "name": p.name, "arrow": p.target.key(), "rule": p.rule}
        out.append(f)
    return out


def avro_schema(rec: Recommendation, *, name: str = "record", namespace: str | None = None) -> dict[str, Any]:
    """The Avro record schema of one row.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{}\\n')
    >>> avro_schema(driftline.scan(d).recommend())["fields"][0]["type"]
    ['null', 'long']
    """
    return _schema(rec, name, namespace)[0]


def _schema(rec: Recommendation, name: str, namespace: str | None) -> tuple[dict[str, Any], _Names]:
    names = _Names()
    top = names.record(name)
    # "doc" first, so that a scan knows its own output from the first bytes (driftline.core.marker).
    out: dict[str, Any] = {
        "doc": remark(f"records of {rec.root}, as recommended by driftline"),
        "type": "record",
        "name": top,
    }
    if namespace:
        out["namespace"] = namespace
    out["fields"] = _fields(rec.fields, names, top)
    return out, names


def _datum(plan: FieldPlan, value: Any, names: _Names) -> Any:
    if value is None:
        return None
    t = plan.target
    if plan.rule == "keep_as_json_text":
        return value
    if t.name == "struct":
        return {names.fields[c.path]: _datum(c, value.get(c.name), names) for c in plan.children}
    if t.name == "list":
        return [_datum(plan.children[0], v, names) for v in value]
    if t.name == "map":
        key, val = plan.children
        pairs = value.items() if isinstance(value, Mapping) else value
        if key.target.name == "string":
            return {k: _datum(val, v, names) for k, v in pairs}
        return [
            {names.fields[key.path]: _datum(key, k, names), names.fields[val.path]: _datum(val, v, names)}
            for k, v in pairs
        ]
    if t.name == "uint64":
        return decimal.Decimal(value)
    return value


def avro_datum(rec: Recommendation, row: Mapping[str, Any]) -> dict[str, Any]:
    """One row of apply()'s output (as_py / to_pylist) as a datum of avro_schema(rec)."""
    _, names = _schema(rec, "record", None)
    return {names.fields[p.path]: _datum(p, row.get(p.name), names) for p in rec.fields}


def _longs(arr: pa.Array) -> pa.Array:
    """Values Avro writes as a plain long (nanosecond times, durations) as int64, at any depth."""
    t = arr.type
    if (
        pa.types.is_timestamp(t)
        and t.unit == "ns"
        or pa.types.is_time64(t)
        and t.unit == "ns"
        or pa.types.is_duration(t)
    ):
        return arr.cast(pa.int64())
    if pa.types.is_struct(t) and t.num_fields:
        kids = [_longs(arr.field(i)) for i in range(t.num_fields)]
        return pa.StructArray.from_arrays(
            kids,
            fields=[t.field(i).with_type(k.type) for i, k in enumerate(kids)],
            mask=pc.is_null(arr) if arr.null_count else None,
        )
    if pa.types.is_list(t):
        items = _longs(arr.values)
        return pa.ListArray.from_arrays(
            arr.offsets,
            items,
            type=pa.list_(t.value_field.with_type(items.type)),
            mask=pc.is_null(arr) if arr.null_count else None,
        )
    return arr


def avro_records(rec: Recommendation, table: pa.Table) -> list[dict[str, Any]]:
    """apply()'s output as datums of avro_schema(rec); nanosecond values as their long.

    (fastavro and the Apache package convert no nanosecond logical type.)
    """
    cols = {n: _longs(c.combine_chunks()) for n, c in zip(table.column_names, table.columns, strict=True)}
    return [avro_datum(rec, row) for row in pa.table(cols).to_pylist()]


def dumps(schema: dict[str, Any]) -> bytes:
    return orjson.dumps(schema, option=orjson.OPT_INDENT_2) + b"\n"
