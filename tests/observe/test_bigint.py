"""Integer literals beyond int64 are a type of their own, never a float64 that rounds them.

RFC 8259 section 6 sets no limit on an integer's digits (int = zero / ( digit1-9 *DIGIT )).
Python's json module keeps every integer exact, so it is the reference for the values;
pyarrow's unify_schemas for the joins; pyarrow's casts for the loss the recommender counts.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pytest

import driftline
from driftline.core import jsonnum
from driftline.core.lattice import from_arrow, join, parse_key
from driftline.core.stats import type_sample
from driftline.recommendation.apply import Tally, apply
from driftline.recommendation.raw import raw_batches
from driftline.results.report import dumps

# 20- to 40-digit identifiers, negative ones, the edges of int64 and uint64.
IDS = [10 ** (d - 1) + d for d in range(20, 41)] + [-(10**24) - 7, 2**63, 2**64 - 1, 2**64, -(2**63) - 1]


def _write(path: Path, records: list[dict]) -> None:
    path.write_text("".join(json.dumps(r) + "\n" for r in records))


def test_json_number_literals_keep_every_digit(tmp_path: Path):
    _write(tmp_path / "a.jsonl", [{"id": v} for v in IDS])
    raw = (tmp_path / "a.jsonl").read_bytes()
    reference = [json.loads(line)["id"] for line in raw.splitlines()]  # source: Python's json, exact ints
    st = driftline.scan(tmp_path).fields["id"].stats
    assert (st.minimum, st.maximum) == (min(reference), max(reference))
    expected: dict[str, int] = {}
    for v in reference:
        # source: pyarrow's integer ranges (int64, uint64); past them the literal's digit count
        key = "int64" if -(2**63) <= v < 2**63 else "uint64" if 0 <= v < 2**64 else f"decimal({len(str(abs(v)))},0)"
        expected[key] = expected.get(key, 0) + 1
    assert st.types == dict(sorted(expected.items()))
    assert "float64" not in st.types
    # Every integer past 2**53 is counted as one float64 would not keep (RFC 7493 section 2.2).
    assert st.unsafe_ints == sum(abs(v) > 2**53 - 1 for v in reference)
    assert st.samples[type_sample("decimal(30,0)")][0].value == str(10**29 + 30)


def test_fast_path_and_exact_walk_agree_on_big_integers(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    recs = [{"id": IDS[i % len(IDS)] if i % 3 else i, "k": 10**29 + i, "x": i * 0.5} for i in range(1200)]
    _write(tmp_path / "a.jsonl", recs)
    fast = driftline.scan(tmp_path, batch_rows=400)
    monkeypatch.setenv("DRIFTLINE_EXACT", "1")
    exact = driftline.scan(tmp_path, batch_rows=400)
    assert fast == exact
    assert fast.fields["k"].stats.types == {"decimal(30,0)": 1200}
    assert fast.fields["k"].stats.maximum == 10**29 + 1199


def test_a_json_document_keeps_big_integers(tmp_path: Path):
    (tmp_path / "a.json").write_text(json.dumps([{"id": v} for v in IDS]))
    st = driftline.scan(tmp_path).fields["id"].stats
    assert st.maximum == max(IDS) and "float64" not in st.types


def test_report_round_trip_keeps_the_digits(tmp_path: Path):
    data = tmp_path / "data"
    data.mkdir()
    _write(data / "a.jsonl", [{"id": v} for v in IDS])
    p = driftline.scan(data)
    text = dumps(p)
    back = json.loads(text)  # source: Python's json reads the report's numbers exactly
    assert back["fields"]["id"]["maximum"] == max(IDS) and back["fields"]["id"]["minimum"] == min(IDS)
    assert b"e+" not in text
    (tmp_path / "r.json").write_bytes(text)
    assert driftline.load_report(tmp_path / "r.json") == p


@pytest.mark.parametrize(
    ("a", "b"),
    [(pa.int64(), pa.decimal128(30, 0)), (pa.uint64(), pa.decimal128(25, 0)), (pa.int64(), pa.decimal256(40, 0))],
)
def test_the_lattice_joins_int64_and_big_integers_as_pyarrow_does(a: pa.DataType, b: pa.DataType):
    # source: pyarrow.unify_schemas(promote_options="permissive")
    unified = pa.unify_schemas([pa.schema([("x", a)]), pa.schema([("x", b)])], promote_options="permissive")
    assert join(from_arrow(a), from_arrow(b)) == from_arrow(unified.field("x").type)
    assert join(from_arrow(a), parse_key(f"decimal({b.precision},0)")).key() == f"decimal({b.precision},0)"


def test_recommender_keeps_big_integers_as_a_decimal(tmp_path: Path):
    _write(tmp_path / "a.jsonl", [{"id": i} for i in range(5)] + [{"id": 10**29 + i} for i in range(5)])
    plan = driftline.scan(tmp_path).recommend().field("id")
    assert plan.target.key() == "decimal(30,0)" and plan.effects == ()
    tally = Tally()
    out = [apply(b.batch, driftline.scan(tmp_path).recommend(), tally=tally) for b in raw_batches(tmp_path)]
    # source: pyarrow's cast into decimal128(30, 0) keeps the Python ints exactly
    assert pa.concat_arrays([o.column("id") for o in out]).to_pylist() == [*range(5), *(10**29 + i for i in range(5))]
    assert tally.counts == {}


def test_float64_beside_big_integers_comes_with_a_counted_loss(tmp_path: Path):
    values = [1.5, 2.25, *IDS]
    _write(tmp_path / "a.jsonl", [{"v": v} for v in values])
    rec = driftline.scan(tmp_path).recommend()
    plan = rec.field("v")
    beyond = sum(type(v) is int and abs(v) > 2**53 - 1 for v in values)
    assert plan.target.key() == "float64"
    assert [(e.cause, e.count, e.exact) for e in plan.effects] == [("unsafe_int", beyond, True)]
    assert {a.target for a in plan.alternatives} == {"decimal(58,18)", "string"}
    tally = Tally()
    for b in raw_batches(tmp_path):
        apply(b.batch, rec, tally=tally)
    # source: pyarrow's cast to float64 and back: the values that really changed
    assert tally.get("v", "unsafe_int") == beyond
    # source: Python's float(int) rounds to the nearest binary64 (IEEE 754), as the cast does
    changed = sum(int(float(v)) != v for v in IDS if abs(v) > 2**53 - 1)
    assert tally.get("v", "unsafe_int:changed") == changed > 0


def test_csv_integers_past_int64_are_their_own_type(tmp_path: Path):
    ids = [10**29 + i for i in range(20)]
    (tmp_path / "a.csv").write_text("id,x\n" + "".join(f"{v},{i}.5\n" for i, v in enumerate(ids)))
    p = driftline.scan(tmp_path)
    st = p.fields["id"].stats
    assert st.types == {"decimal(30,0)": 20} and st.classes == {"decimal": 20}
    assert p.fields["x"].stats.types == {"float64": 20}  # a point makes a float, as before
    plan = p.recommend().field("id")
    assert plan.target.key() == "decimal(30,0)" and plan.effects == ()
    # source: pyarrow's string → decimal128(30, 0) cast reads the same integers
    cast = pc.cast(pa.array([str(v) for v in ids]), pa.decimal128(30, 0)).to_pylist()
    assert [int(v) for v in cast] == ids


def test_cli_scan_shows_the_type_and_leaves_inputs_alone(tmp_path: Path):
    data = tmp_path / "data"
    data.mkdir()
    _write(data / "a.jsonl", [{"id": 10**29 + i} for i in range(3)])
    before = hashlib.sha256((data / "a.jsonl").read_bytes()).hexdigest()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path), COLUMNS="200")
    res = subprocess.run(
        [sys.executable, "-m", "driftline.cli", "scan", str(data), "--json", str(tmp_path / "r.json")],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert res.returncode == 0, res.stderr
    assert "decimal(30,0)" in res.stdout and "float64" not in res.stdout and "e+29" not in res.stdout
    report = jsonnum.loads((tmp_path / "r.json").read_bytes())
    assert report["fields"]["id"]["types"] == {"decimal(30,0)": 3}
    # source: RFC 8259 section 6: the example is the JSON number itself, all 30 digits kept.
    assert report["fields"]["id"]["samples"]["type:decimal(30,0)"][0]["value"] == 10**29
    assert hashlib.sha256((data / "a.jsonl").read_bytes()).hexdigest() == before
