"""The terminal's first screen, pinned: at 80 columns the demo's overview and every breaking
event fit the first 24 lines (an 80x24 terminal), each episode on one line or wrapped with its
continuation indented; at 200 columns one line per episode. And the exit options of scan and diff.

The expected text is the demo's (scripts/make_demo.py: its manifest lists the injected changes),
with the root and the duration fixed, since they depend on where and how fast the scan ran.
"""

from __future__ import annotations

import dataclasses
import re
import subprocess
import sys
from pathlib import Path

from rich.console import Console

from conftest import write_lines
from driftline.emit.terminal import render

FIRST_SCREEN_80 = [
    "driftline scan demo/landing",
    "15 files (2 csv, 12 jsonl, 1 parquet), 4,694 rows, 111.7 KiB, 17 fields, 2",
    "skipped, 1 file error, 0.25 s",
    "drift: 17 events, 11 breaking, 6 widening, 0 info",
    "partitions: region (string, 4 values), day (date32, 4 values)",
    "",
    "breaking (11), by field",
    " 1  type-conflict     tags: list → string; 3 files, 516 rows, still going",
    "14  partition-type    tags: list → string; at region=west, 2 files, 510 rows,",
    "                      still going",
    "17  partition-nulls   tags: – → null; at region=west, 2 files, 89 rows, still",
    "                      going",
    " 2  type-conflict     pm25: float64 → string; 2 files, 122 rows, ended",
    " 3  textclass-changed pm25: decimal → null_token; 2 files, 6 rows, ended",
    " 5  field-gone        temp_c: float64 → –; 1 file, 344 rows, still going",
    "16  partition-nulls   temp_c: – → null; at region=west, 2 files, 14 rows, still",
    "                      going",
    " 7  textclass-changed ts: timestamp_rfc3339 → timestamp_local; 4 files, 1,117",
    "                      rows, still going",
    "15  partition-type    ts: timestamp[us, UTC] → timestamp[us]; at region=west, 2",
    "                      files, 599 rows, still going",
    " 8  nulls-begin       humidity: – → null; 4 files, 83 rows, still going",
    "13  partition-lacks   battery: struct → –; at region=west, 2 files, 599 rows,",
    "                      still going",
]

EVENTS_200 = [
    "breaking (11), by field",
    " 1  type-conflict     tags: list → string; 3 files, 516 rows, still going",
    "14  partition-type    tags: list → string; at region=west, 2 files, 510 rows, still going",
    "17  partition-nulls   tags: – → null; at region=west, 2 files, 89 rows, still going",
    " 2  type-conflict     pm25: float64 → string; 2 files, 122 rows, ended",
    " 3  textclass-changed pm25: decimal → null_token; 2 files, 6 rows, ended",
    " 5  field-gone        temp_c: float64 → –; 1 file, 344 rows, still going",
    "16  partition-nulls   temp_c: – → null; at region=west, 2 files, 14 rows, still going",
    " 7  textclass-changed ts: timestamp_rfc3339 → timestamp_local; 4 files, 1,117 rows, still going",
    "15  partition-type    ts: timestamp[us, UTC] → timestamp[us]; at region=west, 2 files, 599 rows, still going",
    " 8  nulls-begin       humidity: – → null; 4 files, 83 rows, still going",
    "13  partition-lacks   battery: struct → –; at region=west, 2 files, 599 rows, still going",
    "widening (6), by field",
    " 4  nested-new        battery.charge_cycles: – → int64; 3 files, 896 rows, ended",
    " 6  type-widened      pm10: int64 → float64; 3 files, 773 rows, ended",
    " 9  field-new         ingested_at: – → timestamp[us, UTC]; 1 file, 135 rows, ended",
    "10  field-new         battery_level: – → int64; 2 files, 599 rows, still going",
    "11  field-new         battery_voltage: – → float64; 2 files, 599 rows, still going",
    "12  field-new         site_note: – → string; 2 files, 599 rows, still going",
]


def _lines(profile, width: int, **look: bool) -> list[str]:
    console = Console(record=True, width=width)
    render(dataclasses.replace(profile, root="demo/landing", duration_s=0.25), console, **look)
    return [line.rstrip() for line in console.export_text().splitlines()]


def test_first_24_lines_at_80_columns_hold_every_breaking_event(demo_profile):
    lines = _lines(demo_profile, 80)
    assert lines[:24] == FIRST_SCREEN_80
    # every breaking event (the demo has 11: demo_profile.level_counts) starts a line of the first screen
    numbered = [ln for ln in lines[:24] if re.match(r" ?\d+  ", ln)]
    assert len(numbered) == demo_profile.level_counts["breaking"] == 11
    assert lines[24] == "widening (6), by field"
    # nothing wraps back to column 0, and no line is wider than the terminal
    events = lines[6:24]
    assert all(ln.startswith((" ", "1")) or ln.startswith("breaking") for ln in events)
    assert max(map(len, lines)) <= 80


def test_one_line_per_episode_at_200_columns(demo_profile):
    lines = _lines(demo_profile, 200)
    assert lines[5:24] == EVENTS_200
    assert lines[2] == "drift: 17 events, 11 breaking, 6 widening, 0 info"


def test_field_table_at_80_columns_keeps_every_path_and_one_line_rows(demo_profile):
    lines = _lines(demo_profile, 80)
    table = lines[lines.index("Fields (string content: --full-table)") :]
    for path in demo_profile.fields:  # never cut: each path starts its own row in full
        assert any(ln.startswith(f" {path} ") for ln in table), path
    assert "…" not in "\n".join(table[: len(demo_profile.fields) + 4])
    # one line per field: the rows right under the header rule are the fields, in order
    rows = table[4 : 4 + len(demo_profile.fields)]
    assert [ln.split()[0] for ln in rows] == list(demo_profile.fields)
    assert table[4 + len(demo_profile.fields)].strip() == ""
    # ts holds three types: as many as fit, then how many more
    assert rows[-1].split("  ")[0:1] == [" ts"] and "string 84.4% +2" in rows[-1]
    for width in (80, 100, 119):
        assert max(map(len, _lines(demo_profile, width))) <= width
    assert "string content" not in table[2]  # the column is left out under 120 columns
    full = _lines(demo_profile, 80, full_table=True)
    header = next(ln for ln in full if ln.startswith("┃"))
    assert header.count("┃") == 7  # six columns, string content among them


def test_events_detail_gives_the_positions_indented(demo_profile):
    lines = _lines(demo_profile, 80, events_detail=True)
    at = lines.index("breaking (11), by field")
    assert lines[at + 1 : at + 4] == [
        " 1  type-conflict     tags: list → string, 3 files, 516 rows, from",
        "                      readings/region=east/day=2026-11-28/part-0000.jsonl.gz row",
        "                      98 (line 99) to",
    ]


EXE = [sys.executable, "-m", "driftline.cli"]


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120)


def test_scan_fail_at_a_level(tmp_path: Path):
    # x: int64 then float64 (type-widened: widening); no breaking change, no file error
    write_lines(tmp_path / "a" / "1.jsonl", ['{"x": 1}'])
    write_lines(tmp_path / "a" / "2.jsonl", ['{"x": 1.5}'])
    assert _run("scan", str(tmp_path / "a"), "--fail-at", "breaking").returncode == 0
    assert _run("scan", str(tmp_path / "a"), "--fail-at", "widening").returncode == 1
    assert _run("scan", str(tmp_path / "a"), "--fail-at", "info").returncode == 1
    assert _run("scan", str(tmp_path / "a")).returncode == 0
    # a file error fails at any level, even without drift
    write_lines(tmp_path / "b" / "1.jsonl", ['{"x": 1}', "{nope"])
    assert _run("scan", str(tmp_path / "b"), "--fail-at", "breaking").returncode == 1
    bad = _run("scan", str(tmp_path / "a"), "--fail-at", "urgent")
    assert bad.returncode == 2 and "breaking, widening, info" in bad.stderr


def test_diff_fail_on_change(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}'])
    write_lines(tmp_path / "b.jsonl", ['{"x": 1}'])
    write_lines(tmp_path / "c.jsonl", ['{"x": "one"}'])
    same = _run("diff", str(tmp_path / "a.jsonl"), str(tmp_path / "b.jsonl"), "--fail-on-change")
    assert same.returncode == 0, same.stderr
    assert _run("diff", str(tmp_path / "a.jsonl"), str(tmp_path / "c.jsonl")).returncode == 0
    assert _run("diff", str(tmp_path / "a.jsonl"), str(tmp_path / "c.jsonl"), "--fail-on-change").returncode == 1


def test_no_color_and_color(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}'])
    plain = _run("scan", str(tmp_path), "--no-color")
    coloured = _run("scan", str(tmp_path), "--color")
    assert "\x1b[" not in plain.stdout and "\x1b[1m" in coloured.stdout  # ANSI SGR bold: ECMA-48 section 8.3.117


def test_the_readme_shows_this_first_screen():
    # The README's example output is the pinned first screen above, so it cannot fall behind.
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    start = readme.index("```\ndriftline scan demo/landing\n") + 4
    shown = readme[start : readme.index("\n```", start)].splitlines()
    assert shown == FIRST_SCREEN_80
