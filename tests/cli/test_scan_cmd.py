"""`driftline scan` through the real console script: exit codes and the lines a person reads."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from conftest import write_lines

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120)


def test_scan_demo_prints_summary_and_events(demo_dir: Path):
    res = run("scan", str(demo_dir / "landing"), "--jobs", "1")
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert "15 files (2 csv, 12 jsonl, 1 parquet), 4,694 rows" in out
    assert "type-conflict     pm25: float64 → string" in out
    # One line per episode: where it starts and how far it reaches (docs/drift.md)
    assert "2 files, 122 rows, from readings/region=east/day=2026-11-29/part-0000.jsonl.gz row 90 (line 91) to " in out
    assert "unexpected end of data" in out and "line 218" in out


def test_json_to_stdout_is_data_only(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}', '{"x": "2"}'])
    res = run("scan", str(tmp_path), "--json", "-")
    assert res.returncode == 0
    report = json.loads(res.stdout)
    assert report["format"] == "driftline-report" and report["summary"]["rows"] == 2
    assert [e["kind"] for e in report["events"]] == ["type-conflict"]
    assert "Fields" in res.stderr  # the human summary moved to stderr


def test_missing_path_exits_2_without_traceback(tmp_path: Path):
    res = run("scan", str(tmp_path / "nope"))
    assert res.returncode == 2
    assert "InputPathError:" in res.stderr and "does not exist" in res.stderr
    assert "Traceback" not in res.stderr


def test_nothing_readable_exits_2(tmp_path: Path):
    (tmp_path / "bad.jsonl").write_text("{nope\n")
    res = run("scan", str(tmp_path))
    assert res.returncode == 2
    assert "nothing readable" in res.stderr and "Traceback" not in res.stderr


def test_control_characters_never_reach_the_terminal(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"evil\\u001b[31mname": 1}'])
    res = run("scan", str(tmp_path))
    assert res.returncode == 0
    assert "\x1b[31m" not in res.stdout and "evil\\x1b[31mname" in res.stdout


def test_help_teaches_examples_and_exit_codes():
    res = run("scan", "--help")
    assert res.returncode == 0
    assert "driftline scan landing/ --json report.json" in res.stdout
    assert "Exit codes: 0" in res.stdout
