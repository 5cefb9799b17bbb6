"""The open table format schemas: Apache Iceberg (`--to iceberg`) and Spark / Delta Lake (`--to spark`).

Iceberg: the file loads in pyiceberg's schema model (the reference implementation of the
Iceberg table spec, "Schemas" and "Appendix C: JSON serialization"), its partition spec binds
to the schema, and pyiceberg's schema_to_pyarrow gives the schema of `--to arrow` up to the
mappings the spec's type list makes ("Primitive Types"), stated exactly in ICEBERG_TO_ARROW.

Spark: the file is Spark's DataType.json, which the Delta Lake protocol names its "Schema
Serialization Format"; it is checked against exact expected JSON written from that format's
description, and parsed by the deltalake package (delta-rs, a reader of that format).
"""

from __future__ import annotations

import datetime as dt
import decimal
import json
import subprocess
import sys
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import driftline
from _orders import make_orders
from driftline.emit.schemas.files import schema_file
from driftline.emit.schemas.spark import PARTITION_KEY, partition_names
from driftline.errors import OptionError
from driftline.recommendation import Recommendation

pyiceberg_schema = pytest.importorskip("pyiceberg.schema")
from pyiceberg.io.pyarrow import schema_to_pyarrow  # noqa: E402
from pyiceberg.partitioning import PartitionSpec  # noqa: E402
from pyiceberg.schema import Schema  # noqa: E402

deltalake = pytest.importorskip("deltalake")


def _types_fixture(root: Path) -> Path:
    """A Parquet file of every Arrow type the recommender keeps as it is, in a key=value folder."""
    landing = root / "landing"
    (landing / "batch=7").mkdir(parents=True)
    n = 3
    table = pa.table(
        {
            "i8": pa.array([1, -2, 3], pa.int8()),
            "i16": pa.array([1, 2, None], pa.int16()),
            "i32": pa.array([1, 2, 3], pa.int32()),
            "u8": pa.array([1, 2, 3], pa.uint8()),
            "u16": pa.array([1, 2, 3], pa.uint16()),
            "u32": pa.array([1, 2, 3], pa.uint32()),
            "u64": pa.array([1, 2, 2**63], pa.uint64()),
            "f32": pa.array([1.5, 2.5, None], pa.float32()),
            "f64": pa.array([1.5, 2.5, 3.5], pa.float64()),
            "dec": pa.array([decimal.Decimal("1.25")] * n, pa.decimal128(6, 2)),
            "wide": pa.array([decimal.Decimal("1.25")] * n, pa.decimal256(50, 2)),
            "s": pa.array(["a", "bb", None], pa.string()),
            "b": pa.array([b"\x00", b"\x01", b"\x02"], pa.binary()),
            "d": pa.array([dt.date(2026, 1, 1)] * n, pa.date32()),
            "t32": pa.array([dt.time(1, 2, 3)] * n, pa.time32("ms")),
            "t64": pa.array([dt.time(1, 2, 3)] * n, pa.time64("us")),
            "tns": pa.array([dt.time(1, 2, 3)] * n, pa.time64("ns")),
            "ts_s": pa.array([dt.datetime(2026, 1, 1)] * n, pa.timestamp("s")),
            "ts_ms_utc": pa.array([dt.datetime(2026, 1, 1, tzinfo=dt.UTC)] * n, pa.timestamp("ms", "UTC")),
            "ts_us": pa.array([dt.datetime(2026, 1, 1)] * n, pa.timestamp("us")),
            "ts_ns_paris": pa.array([dt.datetime(2026, 1, 1, tzinfo=dt.UTC)] * n, pa.timestamp("ns", "Europe/Paris")),
            "dur": pa.array([1, 2, 3], pa.duration("s")),
            "nothing": pa.array([None] * n, pa.null()),
        }
    )
    pq.write_table(table, landing / "batch=7" / "part-0.parquet")
    return landing


@pytest.fixture(scope="module")
def recs(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> dict[str, Recommendation]:
    roots = {
        "demo": demo_dir / "landing",
        "orders": make_orders(tmp_path_factory.mktemp("orders")),
        "types": _types_fixture(tmp_path_factory.mktemp("types")),
    }
    return {name: driftline.scan(root).recommend() for name, root in roots.items()}


# -- Iceberg -------------------------------------------------------------------------------


def ICEBERG_TO_ARROW(t: pa.DataType) -> pa.DataType:  # noqa: N802
    """The Arrow type pyiceberg gives for the Iceberg type `--to iceberg` writes for Arrow type t.

    source: Iceberg table spec, "Primitive Types" (int is 32-bit, long 64-bit, float 32-bit,
    decimal(P,S) P <= 38, time and timestamp in microseconds, timestamptz an instant in UTC,
    timestamp_ns in nanoseconds, unknown for only-null values; no unsigned, half-float or
    duration type), and pyiceberg's schema_to_pyarrow (strings, binaries and lists as Arrow's
    large variants).
    """
    if pa.types.is_struct(t):
        return pa.struct([_mapped_field(t.field(i)) for i in range(t.num_fields)])
    if pa.types.is_list(t):
        return pa.large_list(_mapped_field(t.value_field).with_name("element"))
    if pa.types.is_map(t):
        key = _mapped_field(t.key_field).with_name("key")
        return pa.map_(key, _mapped_field(t.item_field).with_name("value"))
    if pa.types.is_int8(t) or pa.types.is_int16(t) or pa.types.is_uint8(t) or pa.types.is_uint16(t):
        return pa.int32()
    if pa.types.is_uint32(t) or pa.types.is_duration(t):
        return pa.int64()
    if pa.types.is_uint64(t):
        return pa.decimal128(20, 0)
    if pa.types.is_float16(t):
        return pa.float32()
    if pa.types.is_decimal(t):
        return pa.large_string() if t.precision > 38 else pa.decimal128(t.precision, t.scale)
    if pa.types.is_string(t):
        return pa.large_string()
    if pa.types.is_binary(t):
        return pa.large_binary()
    if pa.types.is_date(t):
        return pa.date32()
    if pa.types.is_time(t):
        return pa.time64("us")
    if pa.types.is_timestamp(t):
        unit = "ns" if t.unit == "ns" else "us"
        return pa.timestamp(unit, "UTC" if t.tz else None)
    return t


def _mapped_field(f: pa.Field) -> pa.Field:
    return pa.field(f.name, ICEBERG_TO_ARROW(f.type), nullable=f.nullable)


def _partition_arrow(rec: Recommendation) -> list[pa.Field]:
    # source: Iceberg table spec, "Partition Transforms": identity keeps the source column's type.
    kinds = {"string": pa.large_string(), "int64": pa.int64(), "date32": pa.date32()}
    return [pa.field(c.name, kinds[c.type.key()], nullable=False) for c in rec.partitions]


def _load(rec: Recommendation) -> tuple[dict[str, Any], Schema, PartitionSpec]:
    doc = json.loads(schema_file(rec, "iceberg"))
    return (
        doc,
        Schema.model_validate_json(json.dumps(doc["schema"])),
        PartitionSpec.model_validate(doc["partition-spec"]),
    )


@pytest.mark.parametrize("name", ["demo", "orders", "types"])
def test_iceberg_loads_in_pyiceberg_and_converts_to_the_arrow_schema(recs, name: str) -> None:
    rec = recs[name]
    doc, schema, spec = _load(rec)
    arrow = pa.ipc.read_schema(pa.py_buffer(schema_file(rec, "arrow")))
    expected = pa.schema([_mapped_field(f) for f in arrow] + _partition_arrow(rec))
    got = schema_to_pyarrow(schema, include_field_ids=False)
    assert got.equals(expected, check_metadata=False), f"\n{got}\n!=\n{expected}"
    # Every id once, from 1 up to last-column-id (Iceberg table spec, "Schemas": unique field ids).
    ids = sorted(schema._lazy_id_to_field)
    assert ids == list(range(1, doc["last-column-id"] + 1))
    # The spec binds to the schema: each source column exists, identity keeps its type.
    spec.partition_type(schema)
    assert [(f.name, str(f.transform), schema.find_field(f.source_id).name) for f in spec.fields] == [
        (c.name, "identity", c.name) for c in rec.partitions
    ]


def test_iceberg_partition_spec_of_the_demo(recs) -> None:
    doc, schema, _ = _load(recs["demo"])
    region, day = schema.find_field("region"), schema.find_field("day")
    assert (str(region.field_type), region.required, str(day.field_type), day.required) == (
        "string",
        True,
        "date",
        True,
    )
    # source: Iceberg table spec, "Partition Specs" and Appendix C (partition field ids from 1000).
    assert doc["partition-spec"] == {
        "spec-id": 0,
        "fields": [
            {"source-id": region.field_id, "field-id": 1000, "transform": "identity", "name": "region"},
            {"source-id": day.field_id, "field-id": 1001, "transform": "identity", "name": "day"},
        ],
    }
    assert doc["last-partition-id"] == 1001 and doc["format-version"] == 2


def test_iceberg_json_of_nested_types_is_the_specs(tmp_path: Path) -> None:
    (tmp_path / "a.jsonl").write_text('{"pos": {"lat": 1.5}, "tags": ["x", null]}\n{"pos": {"lat": 2.5}, "tags": []}\n')
    doc = json.loads(schema_file(driftline.scan(tmp_path).recommend(), "iceberg"))
    strip = lambda f: {k: v for k, v in f.items() if k != "doc"}  # noqa: E731
    fields = [strip(f) for f in doc["schema"]["fields"]]
    fields[0]["type"]["fields"] = [strip(f) for f in fields[0]["type"]["fields"]]
    # source: Iceberg table spec, Appendix C "Schemas": struct {"type": "struct", "fields": [{"id",
    # "name", "required", "type"}]}, list {"type": "list", "element-id", "element-required", "element"}.
    assert fields == [
        {
            "id": 1,
            "name": "pos",
            "type": {"type": "struct", "fields": [{"id": 3, "name": "lat", "type": "double", "required": True}]},
            "required": True,
        },
        {
            "id": 2,
            "name": "tags",
            "type": {"type": "list", "element-id": 4, "element": "string", "element-required": False},
            "required": True,
        },
    ]
    assert doc["format-version"] == 2 and doc["last-column-id"] == 4


def test_iceberg_notes_what_it_keeps_less_exactly(recs) -> None:
    doc, schema, _ = _load(recs["types"])
    assert doc["format-version"] == 3  # timestamp_ns and unknown are format version 3 types
    docs = {f.name: f.doc for f in schema.fields}
    assert "time64[ns] as time: Iceberg times are microseconds" in docs["tns"]
    # The recommender widens a zoned timestamp to UTC (widen_temporal): Iceberg's timestamptz_ns.
    assert str(schema.find_field("ts_ns_paris").field_type) == "timestamptz_ns"
    assert "uint64 as decimal(20, 0)" in docs["u64"] and "as long: Iceberg has no duration type" in docs["dur"]
    assert str(schema.find_field("nothing").field_type) == "unknown" and not schema.find_field("nothing").required


def test_iceberg_without_pyiceberg_names_the_extra(recs, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "pyiceberg.types", None)  # an import of it now raises ImportError
    with pytest.raises(OptionError, match=r"pip install 'driftline\[iceberg\]'"):
        schema_file(recs["demo"], "iceberg")


# -- Spark / Delta Lake -------------------------------------------------------------------


def _spark(rec: Recommendation) -> dict[str, Any]:
    return json.loads(schema_file(rec, "spark"))


def _without_metadata(node: Any) -> Any:
    if isinstance(node, dict):
        return {k: _without_metadata(v) for k, v in node.items() if k != "metadata"}
    if isinstance(node, list):
        return [_without_metadata(v) for v in node]
    return node


def test_spark_json_of_a_nested_fixture_is_exact(recs) -> None:
    doc = _spark(recs["orders"])
    fields = {f["name"]: f for f in _without_metadata(doc)["fields"]}
    # source: Spark DataType.json / Delta protocol "Schema Serialization Format": a struct field is
    # {"name", "type", "nullable", "metadata"}; array {"type": "array", "elementType", "containsNull"};
    # map {"type": "map", "keyType", "valueType", "valueContainsNull"}; primitive names long, double,
    # decimal(p,s), string, boolean, date, timestamp.
    # Nullability as the orders fixture has it (every item has qty and sku; meta.ip is always there).
    assert fields["items"] == {
        "name": "items",
        "type": {
            "type": "array",
            "elementType": {
                "type": "struct",
                "fields": [
                    {"name": "qty", "type": "long", "nullable": False},
                    {"name": "sku", "type": "string", "nullable": False},
                ],
            },
            "containsNull": False,
        },
        "nullable": True,
    }
    assert fields["attrs"] == {
        "name": "attrs",
        "type": {"type": "map", "keyType": "string", "valueType": "long", "valueContainsNull": False},
        "nullable": True,
    }
    assert fields["meta"]["type"] == {
        "type": "struct",
        "fields": [
            {"name": "agent", "type": "string", "nullable": True},
            {"name": "ip", "type": "string", "nullable": False},
        ],
    }
    assert fields["labels"]["type"] == {"type": "array", "elementType": "string", "containsNull": False}
    assert [(fields[n]["type"]) for n in ("amount", "balance", "created", "day", "paid", "payload")] == [
        "double",
        "decimal(18,4)",
        "timestamp",
        "date",
        "boolean",
        "string",
    ]
    assert doc["type"] == "struct" and list(doc) == ["type", "fields"]
    assert all(set(f) == {"name", "type", "nullable", "metadata"} for f in doc["fields"])


def test_spark_primitive_names(recs) -> None:
    fields = {f["name"]: f["type"] for f in _spark(recs["types"])["fields"]}
    # source: Spark DataType.json type names (ByteType "byte", ShortType "short", IntegerType
    # "integer", LongType "long", FloatType "float", DoubleType "double", DecimalType
    # "decimal(p,s)", BinaryType "binary", DateType "date", TimestampType "timestamp",
    # TimestampNTZType "timestamp_ntz"); Spark has no unsigned, time-of-day (before 4.1) or
    # duration of one unit, so those are the stated stand-ins.
    assert fields == {
        "b": "binary",
        "batch": "long",
        "d": "date",
        "dec": "decimal(6,2)",
        "dur": "long",
        "f32": "float",
        "f64": "double",
        "i16": "short",
        "i32": "integer",
        "i8": "byte",
        "nothing": "string",
        "s": "string",
        "t32": "string",
        "t64": "string",
        "tns": "string",
        "ts_ms_utc": "timestamp",
        "ts_ns_paris": "timestamp",
        "ts_s": "timestamp_ntz",
        "ts_us": "timestamp_ntz",
        "u16": "integer",
        "u32": "long",
        "u64": "decimal(20,0)",
        "u8": "short",
        "wide": "string",
    }


def _nullability(t: Any, arrow: pa.DataType, where: str) -> list[str]:
    """Where the Spark type's nullability differs from the Arrow type's (`--to arrow`)."""
    if isinstance(t, str):
        return []
    if t["type"] == "struct":
        out = []
        for f, a in zip(t["fields"], arrow, strict=True):
            out += [f"{where}.{f['name']}"] * (f["nullable"] != a.nullable)
            out += _nullability(f["type"], a.type, f"{where}.{f['name']}")
        return out
    if t["type"] == "array":
        return [where + "[]"] * (t["containsNull"] != arrow.value_field.nullable) + _nullability(
            t["elementType"], arrow.value_type, where + "[]"
        )
    return [where + "{value}"] * (t["valueContainsNull"] != arrow.item_field.nullable) + _nullability(
        t["valueType"], arrow.item_type, where + "{value}"
    )


@pytest.mark.parametrize("name", ["demo", "orders", "types"])
def test_spark_nullability_is_the_arrow_schemas(recs, name: str) -> None:
    doc, arrow = _spark(recs[name]), recs[name].schema
    data = {"type": "struct", "fields": [f for f in doc["fields"] if not f["metadata"].get(PARTITION_KEY)]}
    assert [f["name"] for f in data["fields"]] == arrow.names
    assert _nullability(data, pa.struct(list(arrow)), "$") == []


@pytest.mark.parametrize("name", ["demo", "orders", "types"])
def test_spark_json_parses_in_deltalake(recs, name: str) -> None:
    text = schema_file(recs[name], "spark").decode()
    schema = deltalake.Schema.from_json(text)
    # delta-rs reads it back to the same JSON (field order, types, nullability, metadata).
    assert json.loads(schema.to_json()) == _normalised(json.loads(text))


def _normalised(node: Any) -> Any:
    return json.loads(json.dumps(node))


def test_spark_partition_columns(recs) -> None:
    doc = _spark(recs["demo"])
    # Partition keys are fields after the data's, marked in their metadata: partitionBy takes them.
    assert partition_names(doc) == ["region", "day"]
    assert [(f["name"], f["type"], f["nullable"]) for f in doc["fields"][-2:]] == [
        ("region", "string", False),
        ("day", "date", False),
    ]
    assert doc["fields"][0]["metadata"]["driftline"].startswith("driftline-output: ")


def test_the_cli_without_pyiceberg_says_which_extra(tmp_path: Path) -> None:
    (tmp_path / "a.jsonl").write_text('{"x": 1}\n')
    code = (
        "import sys; sys.modules['pyiceberg.types'] = None; from driftline.cli import main; "
        "sys.argv = ['driftline', 'schema', sys.argv[1], '--to', 'iceberg', '-q']; main()"
    )
    res = subprocess.run([sys.executable, "-c", code, str(tmp_path)], capture_output=True, text=True, timeout=120)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == "error: --to iceberg needs the pyiceberg package: pip install 'driftline[iceberg]'\n"


def test_iceberg_format_version_goes_by_types_not_names(tmp_path: Path) -> None:
    (tmp_path / "a.jsonl").write_text('{"unknown": 1, "timestamp_ns": "x"}\n')
    doc = json.loads(schema_file(driftline.scan(tmp_path).recommend(), "iceberg"))
    # source: Iceberg table spec, "Version 3": timestamp_ns and unknown are its types; these are names.
    assert doc["format-version"] == 2
    assert [(f["name"], f["type"]) for f in doc["schema"]["fields"]] == [
        ("timestamp_ns", "string"),
        ("unknown", "long"),
    ]
