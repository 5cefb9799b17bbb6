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


def _bench(folder: Path, *args: str, env: dict[str, str] | None = None) -> tuple[dict, str]:
    """scripts/bench with args, one run each (--quick), its data under folder: the results JSON and stdout."""
    out = folder / "results.json"
    proc = subprocess.run(
        [sys.executable, str(BENCH), *args, "--quick", "--data-dir", str(folder / "data"), "--out", str(out)],
        capture_output=True,
        text=True,
        timeout=600,
        env=env,
    )
    assert proc.returncode == 0, proc.stderr
    return json.loads(out.read_text()), proc.stdout


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> dict:
    tmp = tmp_path_factory.mktemp("bench")
    got, stdout = _bench(tmp, "--scale", "0.01", "--jobs", "2")
    return {"json": got, "stdout": stdout}


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


def test_every_target_is_met_or_has_figures_and_a_reason(results: dict) -> None:
    # The default run ends with every target: the side-by-side ones, start-up, the data-heavy
    # Parquet set and the small JSON files; a missed one carries its stage figures and its reason.
    got = results["json"]["issue_targets"]
    assert [t["target"] for t in got][-3:] == [
        "driftline scan demo -q / pyarrow reading its files <= 1.5",
        "parquet-heavy / read_table <= 1.2 (jobs 2)",
        "small-json / duckdb <= 2 (jobs 2)",
    ]
    assert len(got) == 8 + 4 + 2
    for t in got:
        assert t["met"] is not None, t
        if t["met"] is False:
            assert t["figures"] and t["reason"], t
    drift = got[0]
    assert drift["figures"].startswith("CPU s: parse ")  # the stages of the same run's --profile rows
    lines = results["stdout"].splitlines()
    head = lines.index("| target | measured | met | stage figures | why it cannot go lower on this design |")
    assert len(lines) - head - 2 == len(got)  # the table is the run's last lines, a row a target


def test_dask_engine_line(tmp_path: Path) -> None:
    got, stdout = _bench(tmp_path, "--dask", "--scale", "0.01", "--jobs", "2")
    rows = got["engines"]
    assert [(r["tool"], r["dataset"], r["jobs"], r["ok"]) for r in rows] == [
        ("driftline", "parquet", 2, True),
        ("driftline-dask", "parquet", 2, True),
    ]
    assert "--engine dask, 2 local workers" in stdout


def test_against_a_revision_interleaves_both_versions(tmp_path: Path) -> None:
    # HEAD's src/ (extracted with git archive) against the working tree, pyarrow as the yardstick
    got, stdout = _bench(tmp_path, "--against", "HEAD", "--scale", "0.01", "--jobs", "2")
    got = got["against"]
    assert got["revision"] == "HEAD"
    rows = sorted((r["dataset"], r["tool"], r["jobs"], r["version"], r["ok"]) for r in got["rows"])
    want = sorted(
        [(d, "pyarrow", None, "pyarrow", True) for d in DATASETS]
        + [(d, "driftline", j, v, True) for d in DATASETS for j in (1, 2) for v in ("HEAD", "working tree")]
    )
    assert rows == want
    # the drifting file's yardstick is pyarrow's read of the clean one, which succeeds
    lines = stdout.splitlines()
    assert lines[0] == "| data set | jobs | HEAD | working tree | faster | HEAD / pyarrow | working tree / pyarrow |"
    assert [ln.split("|")[1].strip() for ln in lines[2:10]] == [d for d in DATASETS for _ in (1, 2)]


def test_discovery_line(tmp_path: Path) -> None:
    got, stdout = _bench(tmp_path, "--discovery", "--scale", "0.01")
    rows = got["discovery"]
    assert [(r["tool"], r["dataset"], r["jobs"], r["ok"]) for r in rows] == [
        ("driftline-datasets", "parquet", 1, True),
        ("driftline-peeks", "parquet", 1, True),
        ("driftline", "parquet", 1, True),
    ]
    lines = stdout.splitlines()
    assert lines[0].startswith("| 20 Parquet files | seconds | CPU seconds | of the scan (wall) |")
    assert lines[-1].startswith("- discovery / scan <= 0.1: measured ")


def test_startup_rows_and_their_targets(results: dict) -> None:
    # The start-up rows close the default run: whole processes, with the ratios the issue sets.
    startup = results["json"]["startup"]
    assert [r["command"] for r in startup["rows"]] == [
        "python -c 'import pyarrow'",
        "driftline --version",
        "driftline scan --help",
        "driftline schema --help",
        "pyarrow reads the demo's 15 files",  # the demo's 15 data files (tests/scripts/test_make_demo.py)
        "imports a scan of the demo needs (python -c)",  # the floor the demo's target meets first
        "driftline scan demo -q",
        "driftline scan demo (summary)",
    ]
    assert all(r["ok"] and r["seconds"] > 0 for r in startup["rows"]), startup["rows"]
    assert [(t["target"], t["limit"]) for t in startup["targets"]] == [
        ("driftline --version / import pyarrow <= 2", 2.0),
        ("driftline scan --help / import pyarrow <= 2", 2.0),
        ("driftline schema --help / import pyarrow <= 2", 2.0),
        ("driftline scan demo -q / pyarrow reading its files <= 1.5", 1.5),
    ]
    assert "| driftline --version |" in results["stdout"]


def test_small_json_line(tmp_path: Path) -> None:
    # 20 small nested JSON files (the floor of the scale): DuckDB, driftline jobs 1 and 2, in turn
    got, stdout = _bench(tmp_path, "--small-json", "--scale", "0.01", "--jobs", "2")
    got = got["small_json"]
    assert got["files"] == 20
    rows = got["rows"]
    assert [(r["tool"], r["jobs"], r["version"], r["ok"]) for r in rows] == [
        ("duckdb", None, "duckdb", True),
        ("driftline", 1, "working tree", True),
        ("driftline", 2, "working tree", True),
    ]
    # both read every record: DuckDB's DESCRIBE lists the top-level columns the files hold, and
    # driftline's rows are the records Python's json module finds (one per element or line)
    folder = tmp_path / "data" / "scale-0.01" / "small-json"
    records = [rec for f in sorted(folder.iterdir()) for rec in _records(f)]
    assert rows[1]["result"][2] == rows[2]["result"][2] == len(records)
    assert rows[0]["result"] == len({k for rec in records for k in rec})  # source: DuckDB DESCRIBE, a row a column
    lines = stdout.splitlines()
    assert lines[0].startswith("| 20 small nested JSON files (")
    assert lines[-1].startswith("- small-json / duckdb <= 2: measured ")


def _records(path: Path) -> list[dict]:
    """The records of a file as Python's json module reads them: a JSON array, or one per line."""
    text = path.read_text(encoding="utf-8")
    return [json.loads(x) for x in text.splitlines()] if path.suffix == ".jsonl" else json.loads(text)


def test_scaling_rows_and_their_targets(tmp_path: Path) -> None:
    # steps are multiples of --scale; each row carries its cost per MB and peak RSS against the
    # first step's, and the targets are checked at the last step (reported, never asserted)
    got, stdout = _bench(tmp_path, "--scaling", "1,2", "--scale", "0.01", "--jobs", "1")
    scaling = got["scaling"]
    assert scaling["base_scale"] == 0.01
    assert [(r["dataset"], r["step"], r["scale"], r["ok"]) for r in scaling["rows"]] == [
        (d, s, s * 0.01, True) for d in DATASETS for s in (1.0, 2.0)
    ]
    firsts = [r for r in scaling["rows"] if r["step"] == 1.0]
    assert all(r["per_unit_vs_first"] == 1.0 and r["rss_vs_first"] == 1.0 for r in firsts)
    assert [t["target"] for t in scaling["targets"]][:3] == [
        "clean-json: wall per unit at 2x / at 1x <= 1.25",
        "clean-json: CPU per unit at 2x / at 1x <= 1.25",
        "clean-json: peak RSS at 2x / at 1x <= 1.25",
    ]
    assert "| data set | step | scale | MB |" in stdout


def test_files_scaling_rows_and_the_discovery_share(tmp_path: Path) -> None:
    got, stdout = _bench(tmp_path, "--files-scaling", "20,40", "--jobs", "1")
    files = got["files_scaling"]
    assert [(r["format"], r["files"], r["ok"]) for r in files["rows"]] == [
        ("jsonl", 20, True),
        ("jsonl", 40, True),
        ("parquet", 20, True),
        ("parquet", 40, True),
    ]
    # the scan read every file, and its discovery is a part of it, timed in the same process
    assert [r["result"]["files"] for r in files["rows"]] == [20, 40, 20, 40]
    assert all(0 < r["discovery_seconds"] < r["seconds"] for r in files["rows"])
    assert [t["target"] for t in files["targets"]][-2:] == [
        "jsonl: discovery / scan at 40 files < 0.05",
        "parquet: discovery / scan at 40 files < 0.05",
    ]
    assert "| format | files | seconds |" in stdout


def test_profile_stages(tmp_path: Path) -> None:
    # --profile: per JSON and CSV data set, each stage's CPU seconds beside pyarrow's read, in a pool too
    got, stdout = _bench(
        tmp_path, "--profile", "--scale", "0.01", "--jobs", "2", env={**os.environ, "DRIFTLINE_TEST_ALWAYS_POOL": "1"}
    )
    got = got["profile"]
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
    assert "| classify strings (content classes) |" in stdout
    assert "| pyarrow reading the clean file (the floor) |" in stdout
