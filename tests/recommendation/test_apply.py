"""The loss the recommendation predicts from the profile alone equals the loss of really
casting the data: apply() with pyarrow.compute, batch by batch, on the demo and on the
orders fixture, gives exactly the target Arrow schema and exactly the predicted counts."""

from __future__ import annotations

import json
from pathlib import Path

import pyarrow as pa
import pytest

import driftline
from _orders import EXPECTED, make_orders
from driftline.recommendation import Recommendation
from driftline.recommendation.apply import SchemaMismatch, Tally, apply
from driftline.recommendation.raw import raw_batches


@pytest.fixture(scope="module")
def orders(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_orders(tmp_path_factory.mktemp("orders"))


def _cast_all(root: Path, rec: Recommendation, batch_rows: int) -> tuple[pa.Table, Tally, int]:
    tally, schema, outs = Tally(), rec.arrow_schema(), []
    for raw in raw_batches(root, batch_rows=batch_rows):
        out = apply(raw.batch, rec, tally=tally)
        assert out.schema.equals(schema, check_metadata=True)  # exactly the target schema, every batch
        outs.append(out)
    return pa.Table.from_batches(outs, schema=schema), tally, len(outs)


def _assert_counts_equal(rec: Recommendation, tally: Tally) -> int:
    """Every exact predicted effect equals its measured count; returns how many were compared."""
    compared = 0
    for plan in rec.walk():
        measured = {k: v for k, v in tally.counts.get(plan.path, {}).items() if k != "nulled" and ":" not in k}
        predicted = {e.cause: e.count for e in plan.effects if e.exact and e.count}
        assert measured == predicted, plan.path
        assert tally.get(plan.path, "nulled") == plan.nulled, plan.path
        compared += len(predicted)
    return compared


@pytest.mark.parametrize(("scan_rows", "apply_rows"), [(65_536, 65_536), (64, 37)])
def test_demo_predicted_loss_equals_casting(demo_dir: Path, scan_rows: int, apply_rows: int):
    landing = demo_dir / "landing"
    profile = driftline.scan(landing, batch_rows=scan_rows)
    rec = profile.recommend()
    table, tally, batches = _cast_all(landing, rec, apply_rows)
    assert table.num_rows == rec.rows == profile.rows
    assert _assert_counts_equal(rec, tally) == 3  # pm25 null tokens, tags wrapped, ts assumed zone
    pm25 = rec.plan("pm25")
    assert (pm25.rule, pm25.target.key(), pm25.inputs["string"], pm25.nulled) == ("parse_float", "float64", 122, 6)
    assert [(e.file, e.row, e.value) for e in pm25.effect("null_token").examples][:1] == [
        ("readings/region=east/day=2026-11-29/part-0000.jsonl.gz", 185, '"n/a"')
    ]
    seen = profile.fields["pm25"]
    assert table.column("pm25").null_count == 6 + seen.stats.nulls + seen.absent
    assert batches >= (len(profile.files) if apply_rows > 1000 else 120)


def test_demo_counts_hold_under_other_options(demo_dir: Path):
    landing = demo_dir / "landing"
    rec = driftline.scan(landing).recommend(
        prefer_decimal=True, timestamp_zone="+01:00", timestamp_unit="ms", null_tokens="always"
    )
    assert rec.plan("battery_voltage").target.key() == "decimal(3,2)"
    # The Parquet file's typed timestamp[us, UTC] keeps its finer unit: none is truncated.
    assert rec.plan("ts").target.key() == "timestamp[us, +01:00]"
    assert rec.plan("ts").inputs["timestamp[us, UTC]"] > 0
    _, tally, _ = _cast_all(landing, rec, 500)
    _assert_counts_equal(rec, tally)


def test_orders_fixture_predicted_loss_equals_casting(orders: Path):
    rec = driftline.scan(orders).recommend()
    for path, (rule, target, effects) in EXPECTED.items():
        plan = rec.plan(path)
        assert (plan.rule, plan.target.key(), {e.cause: e.count for e in plan.effects}) == (rule, target, effects)
        assert plan.exact
    table, tally, _ = _cast_all(orders, rec, 7)
    assert _assert_counts_equal(rec, tally) == 13
    # 2**53+1 and -(2**53+3) change as float64; 2**53+2 is a binary64 value and survives.
    assert tally.get("big", "unsafe_int:changed") == 2
    # Files in path order: source=batch (6 rows), source=till (8), then source=web.
    assert table.column("big").to_pylist()[14:17] == [9007199254740992.0, 9007199254740994.0, -9007199254740996.0]


def test_apply_refuses_data_the_profile_did_not_see(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"n": 1}\n')
    rec = driftline.scan(tmp_path).recommend()
    (tmp_path / "a.jsonl").write_text(json.dumps({"n": {"deep": 1}}) + "\n")
    [raw] = list(raw_batches(tmp_path))
    with pytest.raises(SchemaMismatch, match="n: a struct value where the schema has int64"):
        apply(raw.batch, rec)
    (tmp_path / "a.jsonl").write_text('{"m": 1}\n')
    [raw] = list(raw_batches(tmp_path))
    with pytest.raises(SchemaMismatch, match="n: 1 null where the schema says not null"):
        apply(raw.batch, rec)
