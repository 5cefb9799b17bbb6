"""The Arrow schema: an IPC schema message that pyarrow.ipc.read_schema reads back equal,
and the text form. source: Arrow columnar format, IPC "Schema message"; pyarrow 26.0.1."""

from __future__ import annotations

from pathlib import Path

import orjson
import pyarrow as pa
import pytest

import driftline
from _orders import make_orders
from driftline.emit.schemas.arrow_schema import ipc_bytes, read_ipc, schema_text


@pytest.fixture(scope="module")
def recs(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> list:
    orders = make_orders(tmp_path_factory.mktemp("orders"))
    return [driftline.scan(demo_dir / "landing").recommend(), driftline.scan(orders).recommend()]


def test_ipc_round_trip_is_equal_with_metadata(recs, tmp_path: Path):
    for rec in recs:
        data = ipc_bytes(rec)
        path = tmp_path / "s.arrow-schema"
        path.write_bytes(data)
        with pa.memory_map(str(path)) as source:
            back = pa.ipc.read_schema(source)
        schema = rec.arrow_schema()
        assert back.equals(schema, check_metadata=True)
        assert read_ipc(data) == schema
        assert [f.metadata[b"driftline.rule"].decode() for f in back] == [p.rule for p in rec.fields]
        rules = orjson.loads(back.metadata[b"driftline.rules"])
        assert rules == {p.path: p.rule for p in rec.walk()}


def test_nested_fields_keep_names_and_nullability(recs):
    demo = recs[0].arrow_schema()
    assert demo.field("battery").type == pa.struct(
        [
            pa.field("charge_cycles", pa.int64()),
            pa.field("level", pa.int64(), nullable=False),
            pa.field("voltage", pa.float64(), nullable=False),
        ]
    )
    assert demo.field("tags").type == pa.list_(pa.field("item", pa.string(), nullable=False))
    orders = recs[1].arrow_schema()
    assert orders.field("attrs").type == pa.map_(pa.string(), pa.field("value", pa.int64(), nullable=False))
    assert orders.field("balance").type == pa.decimal128(18, 4)


def test_text_form_is_what_pyarrow_prints(recs):
    text = schema_text(recs[0])
    assert text.splitlines()[0].startswith("# driftline-output: Arrow schema recommended by driftline for ")
    assert "pm25: double\n  -- field metadata --\n  driftline.rule: 'parse_float'" in text
    assert "ts: timestamp[us, tz=UTC] not null" in text
