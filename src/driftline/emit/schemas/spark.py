"""The recommendation as a Spark struct type in JSON: the schema Spark and Delta Lake read.

The format is Spark's ``DataType.json`` (``StructType.fromJson`` in PySpark,
``DataType.fromJson`` in Scala), which the Delta Lake protocol adopts as its "Schema
Serialization Format" (the ``schemaString`` of a ``metaData`` action)::

    {"type": "struct", "fields": [{"name": ..., "type": ..., "nullable": ..., "metadata": {...}}]}

where a type is a primitive name (``boolean``, ``byte``, ``short``, ``integer``, ``long``,
``float``, ``double``, ``decimal(p,s)``, ``string``, ``binary``, ``date``, ``timestamp``,
``timestamp_ntz``) or a nested object: ``{"type": "struct", "fields": [...]}``,
``{"type": "array", "elementType": T, "containsNull": b}``, ``{"type": "map", "keyType": K,
"valueType": V, "valueContainsNull": b}``.

Types: int8 → byte, int16/uint8 → short, int32/uint16 → integer, int64/uint32 → long,
uint64 → decimal(20,0), float16/32 → float, float64 → double, decimal(p,s) → decimal(p,s)
(p > 38: string), a zoned timestamp → timestamp (an instant, microseconds), a naive one →
timestamp_ntz, date → date, time → string (ISO 8601 text: Spark has no time of day before
4.1), duration → long, keep_as_json_text → string (the JSON text), null (only nulls seen) →
string (Delta Lake's protocol has no null type).

Each field's ``metadata`` holds ``comment`` (Spark's column comment: the cast rule and what
the scan saw, never a bound). The first field's metadata starts with ``"driftline":
"driftline-output: ..."``, so that a scan knows its own output from the first bytes
(driftline.core.marker); its keys come first in each field for that reason (JSON objects
are unordered, RFC 8259 section 4). Partition keys (``key=value`` folders) are fields after
the data's, each with ``"driftline.partition_key": true`` in its metadata (docs/recommend.md:
``partitionBy`` those names in order; Delta's ``partitionColumns``).
"""

from __future__ import annotations

from typing import Any

import orjson

from driftline.core.lattice import DType
from driftline.core.marker import remark
from driftline.recommendation.plan import FieldPlan, Recommendation, observed_note

PARTITION_KEY = "driftline.partition_key"

_SIMPLE = {
    "null": "string",  # Delta Lake has no null type: a text column of nulls, as SQL does
    "bool": "boolean",
    "int8": "byte",
    "int16": "short",
    "uint8": "short",
    "int32": "integer",
    "uint16": "integer",
    "int64": "long",
    "uint32": "long",
    "uint64": "decimal(20,0)",
    "float16": "float",
    "float32": "float",
    "float64": "double",
    "string": "string",
    "binary": "binary",
    "date32": "date",
    "date64": "date",
    "time32": "string",
    "time64": "string",
    "duration": "long",
}


def primitive(t: DType) -> str:
    """The Spark type name of a scalar target.

    >>> from driftline.core.lattice import parse_key
    >>> [primitive(parse_key(k)) for k in ("timestamp[us, UTC]", "timestamp[ms]", "decimal(6,2)")]
    ['timestamp', 'timestamp_ntz', 'decimal(6,2)']
    """
    if t.name == "decimal":
        assert t.precision is not None and t.scale is not None
        return f"decimal({t.precision},{t.scale})" if t.precision <= 38 else "string"
    if t.name == "timestamp":
        return "timestamp" if t.tz else "timestamp_ntz"
    return _SIMPLE[t.name]


def _note(t: DType) -> str | None:
    if t.name == "null":
        return "only nulls were seen: a string column of nulls (Delta Lake has no null type)"
    if t.name in ("time32", "time64"):
        return f"{t.key()} as string: ISO 8601 time of day text"
    if t.name == "duration":
        return f"{t.key()} as long: a count of its unit"
    if t.name == "uint64":
        return "uint64 as decimal(20,0): Spark has no unsigned integers"
    if t.name == "decimal" and (t.precision or 0) > 38:
        return f"{t.key()} as string: Spark decimals hold at most 38 digits"
    if t.name == "timestamp" and t.unit == "ns":
        return f"{t.key()} as microseconds: Spark timestamps stop at microseconds"
    return None


def spark_type(plan: FieldPlan) -> Any:
    """The Spark type of a plan: a name, or a nested object."""
    t = plan.target
    if plan.rule == "keep_as_json_text":
        return "string"
    if t.name == "struct":
        return {"type": "struct", "fields": [_field(c) for c in plan.children]}
    if t.name == "list":
        item = plan.children[0]
        return {"type": "array", "elementType": spark_type(item), "containsNull": item.nullable}
    if t.name == "map":
        key, value = plan.children
        return {
            "type": "map",
            "keyType": spark_type(key),
            "valueType": spark_type(value),
            "valueContainsNull": value.nullable,
        }
    return primitive(t)


def _comment(plan: FieldPlan) -> str:
    note = None if plan.rule == "keep_as_json_text" else _note(plan.target)
    return "; ".join(p for p in (f"{plan.rule}: {plan.does}", note, observed_note(plan)) if p)


def _field(plan: FieldPlan, metadata: dict[str, Any] | None = None) -> dict[str, Any]:
    meta = {**(metadata or {}), "comment": _comment(plan)}
    return {"metadata": meta, "name": plan.name, "type": spark_type(plan), "nullable": plan.nullable}


def spark_schema(rec: Recommendation) -> dict[str, Any]:
    """The Spark struct type of one row, partition keys last.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "day=2026-11-27").mkdir()
    >>> _ = (d / "day=2026-11-27" / "a.jsonl").write_text('{"x": 1}\\n{"x": null}\\n')
    >>> [(f["name"], f["type"], f["nullable"]) for f in spark_schema(driftline.scan(d).recommend())["fields"]]
    [('x', 'long', True), ('day', 'date', False)]
    """
    mark = {"driftline": remark(f"Spark schema of {rec.root}, as recommended by driftline")}
    fields = [_field(p, mark if i == 0 else None) for i, p in enumerate(rec.fields)]
    names = {p.name for p in rec.fields}
    for col in rec.partitions:
        if col.name in names:  # the files hold it too: that field is the partition column
            for f in fields:
                if f["name"] == col.name:
                    f["metadata"][PARTITION_KEY] = True
            continue
        meta = {**(mark if not fields else {}), PARTITION_KEY: True}
        meta["comment"] = f"partition key: the {col.name}=value folder of each file"
        fields.append({"metadata": meta, "name": col.name, "type": primitive(col.type), "nullable": False})
    return {"type": "struct", "fields": fields}


def partition_names(schema: dict[str, Any]) -> list[str]:
    """The partition columns of a spark_schema document, in order: what partitionBy takes."""
    return [f["name"] for f in schema["fields"] if f["metadata"].get(PARTITION_KEY)]


def dumps(schema: dict[str, Any]) -> bytes:
    return orjson.dumps(schema, option=orjson.OPT_INDENT_2) + b"\n"
