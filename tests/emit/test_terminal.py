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
    assert lines[2] == "drift: 8 breaking, 6 widening, 0 info"
    assert text.index("drift: 8 breaking") < text.index("Fields")
    assert "Drift events (14): 8 breaking, 6 widening, 0 info" in lines
    assert lines.index("breaking (8), in scan order") < lines.index("widening (6), in scan order")
    assert "info (" not in text  # no heading for a level without events
    listed = [m.groups() for m in re.finditer(r"^\s*(\d+)  (\S+)\s+(\S+):", text, re.M)]
    assert [(int(n), kind) for n, kind, _ in listed] == [
        (1, "type-conflict"),
        (2, "type-conflict"),
        (3, "textclass-changed"),
        (4, "field-gone"),
        (5, "textclass-changed"),
        (6, "nulls-begin"),
        (7, "nulls-begin"),
        (8, "nulls-begin"),
        (9, "nested-new"),
        (10, "type-widened"),
        (11, "field-new"),
        (12, "field-new"),
        (13, "field-new"),
        (14, "field-new"),
    ]
    # The manifest's injected changes that widen (demo/make_demo.py notes: pm10 "arrives as a
    # float ... (int before)", charge_cycles and ingested_at newly written) are listed after every
    # breaking one.
    paths = [p for _, _, p in listed]
    assert paths.index("pm10") > 7 and paths.index("battery.charge_cycles") > 7 and paths.index("ingested_at") > 7


def test_level_counts_are_of_every_event_not_only_the_listed(tmp_path: Path):
    # 40 partitions of one series, each with a field of its own: f01..f39 arrive after the
    # first file (field-new, widening) and f00..f38 are gone after their one file (field-gone,
    # breaking): 78 events, 10 listed; the counts are of all 78.
    for i in range(40):
        write_lines(tmp_path / f"p={i:02d}" / "a.jsonl", [f'{{"id": 1, "f{i:02d}": 1}}'])
    cut = driftline.scan(tmp_path, max_events=10)
    assert cut.event_total == 78 and len(cut.events) == 10
    assert cut.event_counts == {"field-new": 39, "field-gone": 39}
    assert cut.level_counts == {"breaking": 39, "widening": 39, "info": 0}
    lines = events_block(cut.events, cut.level_counts).plain.splitlines()
    assert lines[0] == "Drift events (78): 39 breaking, 39 widening, 0 info"
    # The 10 listed are the first in scan order: in each of files 1..5 one field arrives and
    # the one before it is gone; breaking ones first, each group in scan order.
    assert [e.kind for e in cut.events] == ["field-new", "field-gone"] * 5
    assert lines[1] == "breaking (39), in scan order"
    assert [ln.split()[1:3] for ln in lines if ln[:3].strip().isdigit()] == [
        *(["field-gone", f"f{i:02d}:"] for i in range(5)),
        *(["field-new", f"f{i:02d}:"] for i in range(1, 6)),
    ]
    # one line per episode: the heading, the breaking header, its five episodes, then widening
    assert lines[7] == "widening (39), in scan order"


def test_types_by_format_lists_the_fields_whose_formats_differ(demo_profile, tmp_path: Path):
    text = _text(demo_profile)
    block = text[text.index("types by format") : text.index("Drift events")].splitlines()
    # demo/make_demo.py: the west CSV writes ts as local "YYYY-MM-DD HH:MM:SS", the feed as
    # RFC 3339 strings, the nightly Parquet as timestamp[us, UTC]; pm10 is a float in later
    # south rows of the feed only; pm25 a string from firmware 2.4.0 only; tags a bare string
    # in the feed for a few hours and a ';'-joined cell in the CSV.
    assert block[1:] == [
        "  pm10: csv int64 · jsonl float64, int64 · parquet int64",
        "  pm25: csv float64 · jsonl float64, string · parquet float64",
        "  tags: csv string · jsonl list, string · parquet list",
        "  ts: csv timestamp[us] · jsonl string · parquet timestamp[us, UTC]",
        "",
    ]
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}'])
    assert "types by format" not in _text(driftline.scan(tmp_path))
