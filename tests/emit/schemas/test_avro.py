"""The Avro schema: accepted by the Apache avro package, union rules of the specification,
and records that round-trip through fastavro after the cast rules.

source: Apache Avro specification 1.12.0 (Schema Declaration: Unions; Names; Logical Types);
avro 1.12.2 avro.schema.parse as the oracle (fastavro accepts duplicate branches, so it
cannot be one); REFERENCES.md section 8.
"""

from __future__ import annotations

import io
import json
import re
from pathlib import Path
from typing import Any

import avro.errors
import avro.schema
import fastavro
import pyarrow as pa
import pytest

import driftline
from _orders import make_orders
from driftline.emit.schemas.avro import avro_datum, avro_name, avro_schema
from driftline.recommendation.apply import apply
from driftline.recommendation.raw import raw_batches

NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


@pytest.fixture(scope="module")
def sources(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    return [demo_dir / "landing", make_orders(tmp_path_factory.mktemp("orders"))]


def _unions(t: Any) -> list[list[Any]]:
    """Every union in a type, walking records, arrays and maps."""
    if isinstance(t, list):
        return [t, *(u for branch in t for u in _unions(branch))]
    if not isinstance(t, dict):
        return []
    if t["type"] == "record":
        return [u for f in t["fields"] for u in _unions(f["type"])]
    return _unions(t.get("items")) + _unions(t.get("values"))


def _branch_type(b: Any) -> str:
    return b if isinstance(b, str) else b["type"]


def test_the_oracle_enforces_the_union_rules():
    # "Unions may not contain more than one schema with the same type" and "may not
    # immediately contain other unions": the Apache parser rejects both.
    def record(t: Any) -> dict[str, Any]:
        return {"type": "record", "name": "r", "fields": [{"name": "a", "type": t}]}

    with pytest.raises(avro.errors.SchemaParseException):
        avro.schema.parse(json.dumps(record(["long", "long"])))
    with pytest.raises(avro.errors.SchemaParseException):
        avro.schema.parse(json.dumps(record(["null", ["long"]])))
    fastavro.parse_schema(record(["long", "long"]))


def test_schema_parses_and_follows_the_union_rules(sources):
    for root in sources:
        rec = driftline.scan(root).recommend()
        schema = avro_schema(rec, name="orders")
        avro.schema.parse(json.dumps(schema))
        unions = _unions(schema)
        assert unions
        for union in unions:
            kinds = [_branch_type(b) for b in union]
            assert union[0] == "null" and len(union) == 2 and len(set(kinds)) == 2
            assert not any(isinstance(b, list) for b in union)
        nullable = {p.name for p in rec.fields if p.nullable}
        for f in schema["fields"]:
            assert NAME.fullmatch(f["name"])
            assert ("default" in f and f["default"] is None) == (f["x-driftline"]["name"] in nullable)


def test_records_round_trip_through_fastavro_after_the_rules(sources):
    for root in sources:
        rec = driftline.scan(root).recommend()
        schema = avro_schema(rec, name="records")
        table = pa.Table.from_batches([apply(b.batch, rec) for b in raw_batches(root)])
        data = [avro_datum(rec, row) for row in table.to_pylist()]
        buf = io.BytesIO()
        fastavro.writer(buf, fastavro.parse_schema(schema), data)
        buf.seek(0)
        back = list(fastavro.reader(buf))
        assert len(back) == rec.rows and back == data


def test_logical_types_and_names(tmp_path: Path):
    (tmp_path / "a.csv").write_text(
        "pm2.5,2nd,when,day,price\n1.5,x,2026-01-02T03:04:05Z,2026-01-02,12345678901234.5678\n"
    )
    rec = driftline.scan(tmp_path).recommend()
    fields = {f["x-driftline"]["name"]: f for f in avro_schema(rec)["fields"]}
    assert (fields["pm2.5"]["name"], fields["2nd"]["name"]) == ("pm2_5", "_2nd")
    assert fields["when"]["type"] == {"type": "long", "logicalType": "timestamp-micros"}
    assert fields["day"]["type"] == {"type": "int", "logicalType": "date"}
    assert fields["price"]["type"] == {"type": "bytes", "logicalType": "decimal", "precision": 18, "scale": 4}
    assert avro_name("a b-c") == "a_b_c"
