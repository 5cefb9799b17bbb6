"""scripts/bench end to end on tiny data: every row and every peer lands in the results JSON.

No timing is asserted here: the targets are reported by the benchmark, never tested.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import ROOT

BENCH = ROOT / "scripts" / "bench"
DATASETS = ["clean-json", "drift-json", "csv", "parquet"]
PEERS = ["pyarrow", "polars", "duckdb"]


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> dict:
    tmp = tmp_path_factory.mktemp("bench")
    out = tmp / "results.json"
    proc = subprocess.run(
        [
            sys.executable,
            str(BENCH),
            "--quick",
            "--scale",
            "0.01",
            "--jobs",
            "2",
            "--data-dir",
            str(tmp / "data"),
            "--out",
            str(out),
        ],
        capture_output=True,
        text=True,
        timeout=240,
    )
    assert proc.returncode == 0, proc.stderr
    return {"json": json.loads(out.read_text()), "stdout": proc.stdout}


def test_every_tool_on_every_data_set(results: dict) -> None:
    rows = results["json"]["rows"]
    got = sorted((r["dataset"], r["tool"], r["jobs"]) for r in rows)
    want = sorted(
        [(d, "driftline", 2) for d in DATASETS]
        + [(d, "driftline", 1) for d in DATASETS]
        + [(d, p, None) for d in DATASETS for p in PEERS]
    )
    assert got == want
    assert results["json"]["runs"] == 1 and results["json"]["scale"] == 0.01


def test_driftline_succeeds_and_peers_report_their_outcome(results: dict) -> None:
    rows = results["json"]["rows"]
    for r in rows:
        if r["tool"] == "driftline":
            assert r["ok"], r
            assert r["seconds"] > 0 and r["peak_rss_mb"] > 0
        assert r["ok"] or r["error"], r  # a failing peer says why
    # source: pyarrow 26.0.1 read_json raises "changed from array to string" at the first type
    # conflict (REFERENCES section 2: 1 then "a" raises "changed from number to string")
    failing = {(r["dataset"], r["tool"]) for r in rows if not r["ok"]}
    assert ("drift-json", "pyarrow") in failing
    assert ("clean-json", "pyarrow") not in failing


def test_table_and_targets(results: dict) -> None:
    lines = results["stdout"].splitlines()
    assert lines[0].startswith("| data set | MB | driftline (jobs 2) | driftline (jobs 1) | pyarrow |")
    assert [ln.split("|")[1].strip() for ln in lines[2:6]] == DATASETS
    assert "fails (ArrowInvalid)" in lines[3]
    names = [t["target"] for t in results["json"]["targets"]]
    assert len(names) == 8 and names[0] == "drift-json / pyarrow clean-json <= 1.5"


def test_dask_engine_line(tmp_path: Path) -> None:
    out = tmp_path / "engines.json"
    proc = subprocess.run(
        [
            sys.executable,
            str(BENCH),
            "--dask",
            "--quick",
            "--scale",
            "0.01",
            "--jobs",
            "2",
            "--data-dir",
            str(tmp_path / "data"),
            "--out",
            str(out),
        ],
        capture_output=True,
        text=True,
        timeout=240,
    )
    assert proc.returncode == 0, proc.stderr
    rows = json.loads(out.read_text())["engines"]
    assert [(r["tool"], r["dataset"], r["jobs"], r["ok"]) for r in rows] == [
        ("driftline", "parquet", 2, True),
        ("driftline-dask", "parquet", 2, True),
    ]
    assert "--engine dask, 2 local workers" in proc.stdout


def test_against_a_revision_interleaves_both_versions(tmp_path: Path) -> None:
    # HEAD's src/ (extracted with git archive) against the working tree, pyarrow as the yardstick
    out = tmp_path / "against.json"
    proc = subprocess.run(
        [
            sys.executable,
            str(BENCH),
            "--against",
            "HEAD",
            "--quick",
            "--scale",
            "0.01",
            "--jobs",
            "2",
            "--data-dir",
            str(tmp_path / "data"),
            "--out",
            str(out),
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(out.read_text())["against"]
    assert got["revision"] == "HEAD"
    rows = sorted((r["dataset"], r["tool"], r["jobs"], r["version"], r["ok"]) for r in got["rows"])
    want = sorted(
        [(d, "pyarrow", None, "pyarrow", True) for d in DATASETS]
        + [(d, "driftline", j, v, True) for d in DATASETS for j in (1, 2) for v in ("HEAD", "working tree")]
    )
    assert rows == want
    # the drifting file's yardstick is pyarrow's read of the clean one, which succeeds
    lines = proc.stdout.splitlines()
    assert lines[0] == "| data set | jobs | HEAD | working tree | faster | HEAD / pyarrow | working tree / pyarrow |"
    assert [ln.split("|")[1].strip() for ln in lines[2:10]] == [d for d in DATASETS for _ in (1, 2)]


def test_discovery_line(tmp_path: Path) -> None:
    out = tmp_path / "discovery.json"
    proc = subprocess.run(
        [
            sys.executable,
            str(BENCH),
            "--discovery",
            "--quick",
            "--scale",
            "0.01",
            "--data-dir",
            str(tmp_path / "data"),
            "--out",
            str(out),
        ],
        capture_output=True,
        text=True,
        timeout=240,
    )
    assert proc.returncode == 0, proc.stderr
    rows = json.loads(out.read_text())["discovery"]
    assert [(r["tool"], r["dataset"], r["jobs"], r["ok"]) for r in rows] == [
        ("driftline-datasets", "parquet", 1, True),
        ("driftline-peeks", "parquet", 1, True),
        ("driftline", "parquet", 1, True),
    ]
    lines = proc.stdout.splitlines()
    assert lines[0].startswith("| 20 Parquet files | seconds | CPU seconds | of the scan (wall) |")
    assert lines[-1].startswith("- discovery / scan <= 0.1: measured ")


def test_startup_rows_and_their_targets(results: dict) -> None:
    # The start-up rows close the default run: whole processes, with the ratios the issue sets.
    startup = results["json"]["startup"]
    assert [r["command"] for r in startup["rows"]] == [
        "python -c 'import pyarrow'",
        "driftline --version",
        "driftline scan --help",
        "pyarrow reads the demo's 15 files",  # the demo's 15 data files (tests/scripts/test_make_demo.py)
        "driftline scan demo -q",
        "driftline scan demo (summary)",
    ]
    assert all(r["ok"] and r["seconds"] > 0 for r in startup["rows"]), startup["rows"]
    assert [(t["target"], t["limit"]) for t in startup["targets"]] == [
        ("driftline --version / import pyarrow <= 2", 2.0),
        ("driftline scan --help / import pyarrow <= 2", 2.0),
        ("driftline scan demo -q / pyarrow reading its files <= 1.5", 1.5),
    ]
    assert "| driftline --version |" in results["stdout"]


def test_profile_stages(tmp_path: Path) -> None:
    # --profile: per JSON and CSV data set, each stage's CPU seconds beside pyarrow's read, in a pool too
    out = tmp_path / "profile.json"
    proc = subprocess.run(
        [
            sys.executable,
            str(BENCH),
            "--profile",
            "--quick",
            "--scale",
            "0.01",
            "--jobs",
            "2",
            "--data-dir",
            str(tmp_path / "data"),
            "--out",
            str(out),
        ],
        capture_output=True,
        text=True,
        timeout=300,
        env={**os.environ, "DRIFTLINE_TEST_ALWAYS_POOL": "1"},
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(out.read_text())["profile"]
    assert [g["dataset"] for g in got] == ["clean-json", "drift-json", "csv"]
    stages = ["parse", "read", "dialect", "classify", "exactness", "walk", "columnar", "merge", "other", "outside"]
    for g in got:
        assert g["driftline"]["ok"] and g["pyarrow"]["ok"], g
        assert [s["stage"] for s in g["stages"]] == stages
        assert all(s["cpu_seconds"] >= 0 for s in g["stages"])
        cpu = {s["stage"]: s["cpu_seconds"] for s in g["stages"]}
        # the stages account for the whole scan's CPU time (outside: what no stage holds)
        assert sum(cpu.values()) == pytest.approx(max(g["driftline"]["cpu_seconds"], sum(cpu.values())), abs=0.01)
        assert cpu["parse"] > 0 and cpu["classify"] > 0  # every set has strings, every scan parses
    assert "| classify strings (content classes) |" in proc.stdout
    assert "| pyarrow reading the clean file (the floor) |" in proc.stdout
