"""scripts/bench --parquet end to end on tiny data: both Parquet sets, every variant, in the JSON and the table.

No timing is asserted here: the ratios are reported by the benchmark, never tested.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from conftest import ROOT

BENCH = ROOT / "scripts" / "bench"


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> dict:
    tmp = tmp_path_factory.mktemp("bench")
    out = tmp / "results.json"
    cmd = [sys.executable, str(BENCH), "--parquet", "--quick", "--scale", "0.01", "--jobs", "2"]
    cmd += ["--data-dir", str(tmp / "data")]
    proc = subprocess.run([*cmd, "--out", str(out)], capture_output=True, text=True, timeout=240)
    assert proc.returncode == 0, proc.stderr
    return {"json": json.loads(out.read_text()), "stdout": proc.stdout}


def test_every_variant_on_both_sets(results: dict) -> None:
    rows = results["json"]["parquet"]["rows"]
    got = sorted((r["dataset"], r["tool"], r["version"], r["jobs"] or 0) for r in rows)
    want = sorted(
        (d, t, v, j)
        for d in ("parquet", "parquet-heavy")
        for t, v, j in (
            ("pyarrow", "pyarrow", 0),
            ("pyarrow-read", "pyarrow-read", 0),
            ("driftline", "working tree", 1),
            ("driftline", "working tree", 2),
        )
    )
    assert got == want
    assert all(r["ok"] for r in rows), rows


def test_driftline_counts_the_rows_pyarrow_reads(results: dict) -> None:
    # source: pyarrow.parquet.read_table's num_rows over the same files
    rows = results["json"]["parquet"]["rows"]
    for d in ("parquet", "parquet-heavy"):
        read = next(r["result"] for r in rows if r["dataset"] == d and r["tool"] == "pyarrow-read")
        for r in rows:
            if r["dataset"] == d and r["tool"] == "driftline":
                assert r["result"][2] == read  # profile.rows, with each --jobs
    heavy = next(r["result"] for r in rows if r["dataset"] == "parquet-heavy" and r["tool"] == "pyarrow-read")
    assert heavy == 20 * 6_000  # 20 files of 600,000 rows at scale 1, 6,000 at 0.01


def test_table(results: dict) -> None:
    lines = results["stdout"].splitlines()
    assert lines[0] == "| data set | MB | jobs | footer loop | read_table | driftline | / footer loop | / read_table |"
    cells = [[c.strip() for c in ln.split("|")[1:4]] for ln in lines[2:6]]
    small, heavy = "2,000 small Parquet files", "data-heavy Parquet (20 files)"
    assert [(c[0], c[2]) for c in cells] == [(small, "1"), (small, "2"), (heavy, "1"), (heavy, "2")]
