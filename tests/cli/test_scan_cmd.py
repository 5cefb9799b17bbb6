"""`driftline scan` through the real console script: exit codes and the lines a person reads."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

from conftest import write_lines

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120)


def test_scan_demo_prints_summary_and_events(demo_dir: Path):
    res = run("scan", str(demo_dir / "landing"), "--jobs", "1", "--events-detail")
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert "15 files (2 csv, 12 jsonl, 1 parquet), 4,694 rows" in out
    assert "type-conflict     pm25: float64 → string" in out
    # --events-detail: where each episode starts and how far it reaches (docs/drift.md), wrapped
    # at 80 columns with the continuation lines indented.
    said = " ".join(out.split())
    assert "2 files, 122 rows, from readings/region=east/day=2026-11-29/part-0000.jsonl.gz row 90 (line 91) to " in said
    events = out.split("breaking (11), by field\n")[1].split("\n\n")[0].splitlines()
    assert len(events) > 17 and all(re.match(r" ?\d+  |widening |\s{22}\S", ln) for ln in events)
    assert "unexpected end of data" in out and "line 218" in out


def test_json_to_stdout_is_data_only(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}', '{"x": "2"}'])
    res = run("scan", str(tmp_path), "--json", "-")
    assert res.returncode == 0
    report = json.loads(res.stdout)
    assert report["format"] == "driftline-report" and report["summary"]["rows"] == 2
    assert [e["kind"] for e in report["events"]] == ["type-conflict"]
    assert "Fields" in res.stderr  # the human summary moved to stderr


def test_max_events_limits_the_terminal_list_only(tmp_path: Path):
    # file i holds field f<i>: f1..f4 arrive (widening), f0..f3 are gone after their file (breaking)
    data = tmp_path / "data"
    for i in range(5):
        write_lines(data / f"{i}.jsonl", [f'{{"id": {i}, "f{i}": 1}}'])
    out = tmp_path / "report.json"
    res = run("scan", str(data), "--max-events", "3", "--json", str(out))
    assert res.returncode == 0, res.stderr
    listed = [ln.split()[1:3] for ln in res.stdout.splitlines() if re.match(r"\d+  ", ln)]
    assert listed == [["field-gone", "f0:"], ["field-gone", "f1:"], ["field-gone", "f2:"]]  # breaking first
    assert "drift: 8 events, 4 breaking, 4 widening, 0 info" in res.stdout
    said = " ".join(res.stdout.split())  # the console wraps at 80 columns
    assert "… 5 more events not listed here (--max-events 3); the JSON report (--json) lists them all" in said
    report = json.loads(out.read_text())
    assert report["summary"]["events"] == len(report["events"]) == 8 and "summarised" not in report["summary"]
    assert sorted((e["kind"], e["path"]) for e in report["events"]) == [
        *(("field-gone", f"f{i}") for i in range(4)),
        *(("field-new", f"f{i}") for i in range(1, 5)),
    ]


def test_missing_path_exits_2_without_traceback(tmp_path: Path):
    res = run("scan", str(tmp_path / "nope"))
    assert res.returncode == 2
    assert res.stderr.startswith("error: ") and "does not exist" in res.stderr
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
