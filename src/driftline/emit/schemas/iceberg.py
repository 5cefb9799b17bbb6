"""The recommendation as an Apache Iceberg table schema, with field ids and a partition spec.

Built with pyiceberg's schema model (the optional extra ``iceberg``), so that what is written
is what an Iceberg catalog accepts; the JSON is the table spec's (Iceberg table spec,
"Schemas", "Partition Specs", and "Appendix C: JSON serialization"):

    {"doc": "driftline-output: ...", "format-version": 2, "last-column-id": N,
     "schema": {"type": "struct", "schema-id": 0, "fields": [...]},
     "partition-spec": {"spec-id": 0, "fields": [{"source-id", "field-id", "name", "transform"}]},
     "last-partition-id": 1000 + k - 1}

Field ids are those a new table gets (pyiceberg's ``assign_fresh_schema_ids``: the top-level
fields first, 1..n, then each nested struct, list and map's ids). Each ``key=value``
folder key is a partition column with an ``identity`` transform (field ids from 1000, as the
spec numbers partition fields); its column is added to the schema after the data's fields
unless a field of that name is there already. Types (Iceberg table spec, "Primitive Types"):

    bool → boolean; int8/16/32, uint8/16 → int; int64, uint32 → long; uint64 → decimal(20, 0);
    float16/32 → float; float64 → double; decimal(p, s) → decimal(p, s) (p > 38: string);
    string → string; binary → binary; date → date; time32/time64 → time (microseconds);
    timestamp[s|ms|us] → timestamp / timestamptz (microseconds, zoned ones as UTC instants);
    timestamp[ns] → timestamp_ns / timestamptz_ns (format version 3); duration → long;
    null → unknown (format version 3); keep_as_json_text → string (the JSON text).

A field's ``doc`` holds its cast rule and what the scan saw (never a bound). Every target
Iceberg holds less exactly says so in the doc (a nanosecond time, a zone other than UTC).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Iterator
from typing import TYPE_CHECKING, Any

import orjson

from driftline.core.lattice import DType
from driftline.core.marker import remark
from driftline.errors import OptionError
from driftline.recommendation.plan import FieldPlan, Recommendation, observed_note

if TYPE_CHECKING:
    from pyiceberg.partitioning import PartitionSpec
    from pyiceberg.schema import Schema
    from pyiceberg.types import IcebergType

PARTITION_ID_START = 1000  # source: Iceberg table spec, "Partition Specs" (field ids from 1000)


def _pyiceberg() -> Any:
    try:
        import pyiceberg.types as types
    except ImportError:
        raise OptionError("--to iceberg needs the pyiceberg package: pip install 'driftline[iceberg]'") from None
    return types


def _note(t: DType) -> str | None:
    """What Iceberg keeps less exactly than the target, or None."""
    if t.name == "time64" and t.unit == "ns":
        return "time64[ns] as time: Iceberg times are microseconds"
    if t.name == "timestamp" and t.tz not in (None, "UTC", "+00:00", "Z"):
        return f"{t.key()} as timestamptz: Iceberg keeps the UTC instant, not the zone {t.tz}"
    if t.name == "duration":
        return f"{t.key()} as long: Iceberg has no duration type"
    if t.name == "uint64":
        return "uint64 as decimal(20, 0): Iceberg has no unsigned integers"
    if t.name == "decimal" and (t.precision or 0) > 38:
        return f"{t.key()} as string: Iceberg decimals hold at most 38 digits"
    return None


def _primitive(t: DType) -> IcebergType:
    it = _pyiceberg()
    n = t.name
    if n == "decimal":
        assert t.precision is not None and t.scale is not None
        return it.DecimalType(t.precision, t.scale) if t.precision <= 38 else it.StringType()
    if n == "timestamp":
        nano = t.unit == "ns"
        if t.tz:
            return it.TimestamptzNanoType() if nano else it.TimestamptzType()
        return it.TimestampNanoType() if nano else it.TimestampType()
    simple: dict[str, Callable[[], IcebergType]] = {
        "null": it.UnknownType,
        "bool": it.BooleanType,
        "int8": it.IntegerType,
        "int16": it.IntegerType,
        "int32": it.IntegerType,
        "uint8": it.IntegerType,
        "uint16": it.IntegerType,
        "int64": it.LongType,
        "uint32": it.LongType,
        "uint64": lambda: it.DecimalType(20, 0),
        "float16": it.FloatType,
        "float32": it.FloatType,
        "float64": it.DoubleType,
        "string": it.StringType,
        "binary": it.BinaryType,
        "date32": it.DateType,
        "date64": it.DateType,
        "time32": it.TimeType,
        "time64": it.TimeType,
        "duration": it.LongType,
    }
    return simple[n]()


def _type(plan: FieldPlan, ids: Iterator[int]) -> IcebergType:
    it = _pyiceberg()
    t = plan.target
    if plan.rule == "keep_as_json_text":
        return it.StringType()
    if t.name == "struct":
        return it.StructType(*(_field(c, ids) for c in plan.children))
    if t.name == "list":
        item = plan.children[0]
        return it.ListType(next(ids), _type(item, ids), element_required=not item.nullable)
    if t.name == "map":
        key, value = plan.children
        return it.MapType(next(ids), _type(key, ids), next(ids), _type(value, ids), value_required=not value.nullable)
    return _primitive(t)


def _doc(plan: FieldPlan) -> str:
    parts = [f"{plan.rule}: {plan.does}"]
    note = None if plan.rule == "keep_as_json_text" else _note(plan.target)
    seen = observed_note(plan)
    return "; ".join(parts + [p for p in (note, seen) if p])


def _field(plan: FieldPlan, ids: Iterator[int]) -> Any:
    it = _pyiceberg()
    own = next(ids)
    # Iceberg's unknown type is always optional (table spec, "Primitive Types").
    required = not plan.nullable and plan.target.name != "null"
    return it.NestedField(own, plan.name, _type(plan, ids), required=required, doc=_doc(plan))


def iceberg_schema(rec: Recommendation) -> tuple[Schema, PartitionSpec]:
    """The Iceberg schema (fresh field ids) and the identity partition spec of the partition keys.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "day=2026-11-27").mkdir()
    >>> _ = (d / "day=2026-11-27" / "a.jsonl").write_text('{"x": 1, "tags": ["a"]}\\n')
    >>> schema, spec = iceberg_schema(driftline.scan(d).recommend())
    >>> [(f.field_id, f.name, str(f.field_type), f.required) for f in schema.fields]
    [(1, 'tags', 'list<string>', True), (2, 'x', 'long', True), (3, 'day', 'date', True)]
    >>> [(p.source_id, p.field_id, p.name, str(p.transform)) for p in spec.fields]
    [(3, 1000, 'day', 'identity')]
    """
    it = _pyiceberg()
    from pyiceberg.partitioning import PartitionField, PartitionSpec
    from pyiceberg.schema import Schema, assign_fresh_schema_ids
    from pyiceberg.transforms import IdentityTransform

    ids = itertools.count(1)
    fields = [_field(p, ids) for p in rec.fields]
    names = {p.name for p in rec.fields}
    for col in rec.partitions:
        if col.name not in names:  # every file of a partition holds a value: the column is required
            doc = f"partition key: the {col.name}=value folder of each file"
            fields.append(it.NestedField(next(ids), col.name, _primitive(col.type), required=True, doc=doc))
    schema = assign_fresh_schema_ids(Schema(*fields, schema_id=0))
    spec_fields = [
        PartitionField(
            source_id=schema.find_field(col.name).field_id,
            field_id=PARTITION_ID_START + i,
            transform=IdentityTransform(),
            name=col.name,
        )
        for i, col in enumerate(rec.partitions)
    ]
    return schema, PartitionSpec(*spec_fields, spec_id=0)


def iceberg_document(rec: Recommendation) -> dict[str, Any]:
    """The file `--to iceberg` writes, as a dict (see the module docstring)."""
    it = _pyiceberg()
    from pyiceberg.schema import index_by_id

    schema, spec = iceberg_schema(rec)
    schema_json = orjson.loads(schema.model_dump_json())
    spec_json = orjson.loads(spec.model_dump_json())
    # Nanosecond timestamps and the unknown type came with format version 3 (table spec, "Version 3").
    v3 = (it.TimestampNanoType, it.TimestamptzNanoType, it.UnknownType)
    version = 3 if any(isinstance(f.field_type, v3) for f in index_by_id(schema).values()) else 2
    return {
        # First, so that a scan knows its own output from the first bytes (driftline.core.marker).
        "doc": remark(f"Apache Iceberg table schema of {rec.root}, as recommended by driftline"),
        "format-version": version,
        "last-column-id": schema.highest_field_id,
        "schema": schema_json,
        "partition-spec": spec_json,
        "last-partition-id": max((f.field_id for f in spec.fields), default=PARTITION_ID_START - 1),
    }


def dumps(doc: dict[str, Any]) -> bytes:
    return orjson.dumps(doc, option=orjson.OPT_INDENT_2) + b"\n"
