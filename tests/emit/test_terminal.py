"""The terminal summary: drift events grouped by level, breaking first, counted on the first screen."""

from __future__ import annotations

import re
from pathlib import Path

from rich.console import Console

import driftline
from conftest import write_lines
from driftline.emit.terminal import events_block, render


def _text(profile) -> str:
    console = Console(record=True, width=200)
    render(profile, console)
    return console.export_text()


def test_demo_events_grouped_by_level_with_counts(demo_profile):
    text = _text(demo_profile)
    lines = text.splitlines()
    # The overview (the first screen, before the field table) counts each level.
    assert lines[2] == "drift: 17 events, 11 breaking, 6 widening, 0 info"
    assert text.index("drift: 17 events, 11 breaking") < text.index("Fields")
    # The breaking list is on the first screen: after the overview, before the field table.
    assert text.index("breaking (11), by field") < text.index("widening (6)") < text.index("Fields")
    assert "Drift events (17)" not in text  # the overview's drift line counts them, just above
    assert lines.index("breaking (11), by field") < lines.index("widening (6), by field")
    assert "info (" not in text  # no heading for a level without events
    listed = [m.groups() for m in re.finditer(r"^\s*(\d+)  (\S+)\s+(\S+):", text, re.M)]
    assert [(int(n), kind, path) for n, kind, path in listed] == [
        # Within a level, grouped by field: the fields in the order they first drift, each
        # field's events in scan order. region=west compared with the other three regions
        # (demo/make_demo.py: the CSV export has no battery struct, tags as one string, local
        # timestamps, blank cells); the walk's nulls-begin of temp_c and tags counted the same
        # places: told once.
        # Each keeps its number in the JSON report's events (scan order), as the HTML does.
        (1, "type-conflict", "tags"),
        (14, "partition-type", "tags"),
        (17, "partition-nulls", "tags"),
        (2, "type-conflict", "pm25"),
        (3, "textclass-changed", "pm25"),
        (5, "field-gone", "temp_c"),
        (16, "partition-nulls", "temp_c"),
        (7, "textclass-changed", "ts"),
        (15, "partition-type", "ts"),
        (8, "nulls-begin", "humidity"),
        (13, "partition-lacks", "battery"),
        (4, "nested-new", "battery.charge_cycles"),
        (6, "type-widened", "pm10"),
        (9, "field-new", "ingested_at"),
        (10, "field-new", "battery_level"),
        (11, "field-new", "battery_voltage"),
        (12, "field-new", "site_note"),
    ]
    for n, kind, path in listed:  # the number names that event of the report
        assert (demo_profile.events[int(n) - 1].kind, demo_profile.events[int(n) - 1].path) == (kind, path)
    # The manifest's injected changes that widen (demo/make_demo.py notes: pm10 "arrives as a
    # float ... (int before)", charge_cycles and ingested_at newly written) are listed after every
    # breaking one.
    paths = [p for _, _, p in listed]
    assert paths.index("pm10") > 10 and paths.index("battery.charge_cycles") > 10 and paths.index("ingested_at") > 10
    # A partition kind's line names the values; the reach is short (--events-detail: positions).
    assert "13  partition-lacks   battery: struct → –; at region=west, 2 files, 599 rows, still going\n" in text


def test_level_counts_are_of_every_event_not_only_the_listed(tmp_path: Path):
    # 40 partitions of one series, each with a field of its own: f01..f39 arrive after the
    # first file (field-new, widening) and f00..f38 are gone after their one file (field-gone,
    # breaking): 78 events, all in the Profile; the terminal lists 10 of them (--max-events)
    # and its counts are of all 78.
    for i in range(40):
        write_lines(tmp_path / f"p={i:02d}" / "a.jsonl", [f'{{"id": 1, "f{i:02d}": 1}}'])
    full = driftline.scan(tmp_path)
    assert driftline.scan(tmp_path, max_events=10).events == full.events  # the keyword leaves the Profile whole
    assert full.event_total == len(full.events) == 78
    assert full.event_counts == {"field-new": 39, "field-gone": 39}
    assert full.level_counts == {"breaking": 39, "widening": 39, "info": 0}
    lines = events_block(full.events, full.level_counts, 10).plain.splitlines()
    assert lines[0] == "Drift events (78): 39 breaking, 39 widening, 0 info"
    # The 10 listed are the first in the terminal's order, breaking first: f00..f09 gone,
    # each after its one file, in scan order; no widening one makes the cut.
    assert lines[1] == "breaking (39), by field"
    assert [ln.split()[1:3] for ln in lines if ln[:3].strip().isdigit()] == [
        ["field-gone", f"f{i:02d}:"] for i in range(10)
    ]
    assert len(lines) == 12 and "widening (39), by field" not in lines
    # 45 listed: every breaking one (39), then the first 6 widening ones
    assert (
        sum(1 for ln in events_block(full.events, full.level_counts, 45).plain.splitlines() if "field-new" in ln) == 6
    )
    console = Console(record=True, width=200)
    render(full, console, max_events=10)
    text = console.export_text()
    assert "… 68 more events not listed here (--max-events 10); the JSON report (--json) lists them all" in text


def test_shapes_are_said_once_before_the_fields(tmp_path: Path):
    # tests/fixtures/drift/shapes-partition/make.py: three event folders, ten payloads each,
    # sharing action and installation {id, created_at}.
    from _drift_cases import CASES

    text = _text(driftline.scan(CASES / "shapes-partition" / "input"))
    lines = text.splitlines()
    at = lines.index(
        "shapes: partition key event explains which fields the records hold (3 values, 4 fields shared, 9 explained)"
    )
    assert lines[at + 1 : at + 4] == [
        "  event=issue    10 rows: issue, issue.number, issue.title, labels",
        "  event=push     10 rows: commits, ref",
        "  event=release  10 rows: release, release.draft, release.tag",
    ]
    assert text.index("shapes: ") < text.index("Fields")
    assert "field-new" not in text and "field-gone" not in text


def test_shapes_block_is_bounded(tmp_path: Path):
    # 20 kinds of record, each with a field of its own: one line for the discriminator, 12 for
    # values, one saying how many more.
    names = [f"k{chr(97 + i)}" for i in range(20)]  # ka .. kt: labels, not numbers
    write_lines(tmp_path / "a.jsonl", [f'{{"kind": "{n}", "{n}_only": 1}}' for n in names])
    text = _text(driftline.scan(tmp_path))
    lines = text.splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("shapes: field kind"))
    assert (
        lines[at]
        == "shapes: field kind explains which fields the records hold (20 values, 1 field shared, 20 explained)"
    )
    assert lines[at + 1] == "  kind=ka  1 rows: ka_only"
    assert lines[at + 12] == "  kind=kl  1 rows: kl_only"
    assert lines[at + 13] == "  … 8 more values in the JSON report (--json)"
    assert lines[at + 14] == ""
