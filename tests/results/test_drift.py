"""Drift events on data with changes injected at known rows.

The demo generator records each injected change (field, first file, row, line) in its
manifest, checked independently by tests/scripts/test_make_demo.py; the scan must name every one.
"""

from __future__ import annotations

from pathlib import Path

import driftline
from conftest import write_lines
from driftline.results.drift import EVENT_KINDS


def test_every_injected_change_is_named_with_field_file_and_row(demo_profile, demo_manifest):
    events = {(e.kind, e.path, e.file): e for e in demo_profile.events}
    for change in demo_manifest["changes"]:
        if change["change"] == "malformed-line":
            continue
        key = (change["change"], change["field"], change["file"])
        assert key in events, f"no {key} among {sorted(events)}"
        event = events[key]
        assert event.row == change["row"], change
        assert event.line == change["line"], change


def test_malformed_line_is_an_error_with_line_and_offset(demo_profile, demo_manifest):
    (bad,) = [c for c in demo_manifest["changes"] if c["change"] == "malformed-line"]
    issues = [i for i in demo_profile.issues if i.file == bad["file"] and i.severity == "error"]
    assert [(i.kind, i.line) for i in issues] == [("malformed-json", bad["line"])]
    # The offset points into the bad line: at or after its first byte.
    assert issues[0].byte_offset is not None and issues[0].byte_offset >= bad["byte_offset"]


def test_each_event_kind_is_documented(demo_profile):
    assert {e.kind for e in demo_profile.events} <= set(EVENT_KINDS)


def _kinds(profile):
    return [(e.kind, e.path, e.before, e.after, e.file, e.row, e.line) for e in profile.events]


def test_exact_events_across_batches(tmp_path: Path):
    # Batches of 2 rows: row 2 starts batch 1, row 4 starts batch 2. s.y arrives in the
    # same batch as its struct s, so it is part of s's arrival, not an event of its own.
    write_lines(
        tmp_path / "a.jsonl",
        [
            '{"id": 1, "v": 1}',
            '{"id": 2, "v": 2}',
            '{"id": 3, "v": 2.5, "s": {"x": 1}}',
            '{"id": 4, "v": null, "s": {"x": 1, "y": "a"}}',
            '{"id": "5", "v": 3, "s": {"x": 2}}',
            '{"id": 6, "v": 4, "s": {"x": 2}}',
        ],
    )
    profile = driftline.scan(tmp_path, batch_rows=2)
    assert _kinds(profile) == [
        ("field-new", "s", None, "struct", "a.jsonl", 2, 3),
        ("type-widened", "v", "int64", "float64", "a.jsonl", 2, 3),
        ("nulls-begin", "v", None, "null", "a.jsonl", 3, 4),
        ("nested-gone", "s.y", "string", None, "a.jsonl", 4, 5),
        ("type-conflict", "id", "int64", "string", "a.jsonl", 4, 5),
    ]


def test_field_gone_is_found_per_series_of_partitions(tmp_path: Path):
    # temp stops in region=b while region=c still sends it: gone within region=b.
    for region, day, rec in [
        ("b", "1", '{"k": 1, "temp": 1.5}'),
        ("b", "2", '{"k": 1}'),
        ("c", "1", '{"k": 1, "temp": 2.5}'),
        ("c", "2", '{"k": 1, "temp": 3.5}'),
    ]:
        write_lines(tmp_path / f"region={region}" / f"day={day}" / "p.jsonl", [rec])
    profile = driftline.scan(tmp_path)
    gone = [(e.kind, e.path, e.file, e.count) for e in profile.events if e.kind == "field-gone"]
    assert gone == [("field-gone", "temp", "region=b/day=2/p.jsonl", 1)]


def test_list_element_change_and_timestamp_format_change(tmp_path: Path):
    write_lines(
        tmp_path / "t.jsonl",
        [
            '{"tags": [1, 2], "ts": "1985-04-12T23:20:50.52Z"}',
            '{"tags": ["a"], "ts": "1985-04-12 23:20:50"}',
        ],
    )
    profile = driftline.scan(tmp_path)
    kinds = [(e.kind, e.path, e.before, e.after, e.row) for e in profile.events]
    # source: RFC 3339 section 5.8 (first example); the second value has a space and no offset
    assert kinds == [
        ("element-changed", "tags[]", "int64", "union<int64 | string>", 1),
        ("textclass-changed", "ts", "timestamp_rfc3339", "timestamp_local", 1),
    ]


def test_events_do_not_depend_on_parallelism(demo_dir):
    serial = driftline.scan(demo_dir / "landing", jobs=1)
    parallel = driftline.scan(demo_dir / "landing", jobs=2)
    assert serial.events == parallel.events
    assert serial == parallel


def test_a_member_of_a_union_widens(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}', '{"x": "a"}', '{"x": 2.5}'])
    kinds = [(e.kind, e.before, e.after, e.row) for e in driftline.scan(tmp_path).events]
    assert kinds == [
        ("type-conflict", "int64", "string", 1),
        ("type-widened", "union<int64 | string>", "union<float64 | string>", 2),
    ]


def test_a_type_the_field_already_holds_is_no_drift(tmp_path: Path):
    # float64 holds int64 (the widening join): an integer after floats changes nothing
    write_lines(tmp_path / "a.jsonl", ['{"x": 1.5, "l": [1.5]}', '{"x": 2, "l": [2]}'])
    assert driftline.scan(tmp_path).events == ()
