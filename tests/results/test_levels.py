"""Drift levels: every kind has one, each level on a worked example, the report carries them.

The level says what a change does to a reader built on the schema seen before it
(results/levels.py; the table and its reasons are in docs/drift.md).
"""

from __future__ import annotations

import json
from pathlib import Path

import pyarrow as pa
import pytest

import driftline
from conftest import write_lines
from driftline.core.lattice import parse_key, to_arrow
from driftline.results.drift import EVENT_KINDS
from driftline.results.levels import LEVELS, level_of


def test_every_kind_has_a_level():
    # Each kind with the before/after texts the walk gives it (drift.py): a kind added to
    # EVENT_KINDS without a level in levels.py fails here with the KeyError it raises.
    texts = {"type-widened": ("int64", "float64"), "element-changed": ("int64", "float64")}
    for kind in EVENT_KINDS:
        before, after = texts.get(kind, ("integer", "text") if kind == "textclass-changed" else (None, "int64"))
        assert level_of(kind, before, after) in LEVELS, kind


def test_a_kind_without_a_level_is_refused():
    with pytest.raises(KeyError, match="'field-renamed' has no level"):
        level_of("field-renamed", None, "int64")


def test_levels_are_listed_most_urgent_first():
    assert list(LEVELS) == ["breaking", "widening", "info"]


def _levels(profile):
    return [(e.kind, e.level, e.path, e.before, e.after, e.row) for e in profile.events]


WORKED = [
    '{"id": 1, "v": 1, "c": "12", "t": "2026-03-01T10:00:00Z", "l": [1]}',
    '{"id": 2, "v": 2, "c": "13", "t": "2026-03-01T11:00:00Z", "l": [2]}',
    '{"id": 3, "v": 2.5, "c": "14.5", "t": "2026-03-01 12:00:00+01:00", "l": [2.5], "s": {"x": 1}}',
    '{"id": 4, "v": null, "c": "15", "t": "2026-03-01T13:00:00Z", "l": [3], "s": {"x": 2}}',
    '{"id": "5", "v": 3, "c": "abc", "t": "2026-03-01T14:00:00Z", "l": ["x"], "s": {"x": 3, "y": true}}',
    '{"id": 6, "v": 4, "c": "16", "t": "2026-03-01T15:00:00Z", "l": [4], "s": {"x": 4, "y": false}}',
]


def test_each_level_on_a_worked_example(tmp_path: Path):
    # Batches of 2 rows: row 2 starts batch 1, row 4 batch 2.
    write_lines(tmp_path / "a.jsonl", WORKED)
    profile = driftline.scan(tmp_path, batch_rows=2)
    assert _levels(profile) == [
        ("field-new", "widening", "s", None, "struct", 2),  # old rows read as null in the grown schema
        ("type-widened", "widening", "v", "int64", "float64", 2),
        ("element-changed", "widening", "l[]", "int64", "float64", 2),
        # "14.5" after integer-like strings: a reader parsing int64 from the text needs float64
        ("textclass-changed", "widening", "c", "integer", "decimal", 2),
        # a zoned timestamp spelled with a space: the same logical type, timestamp[us, UTC]
        ("textclass-changed", "info", "t", "timestamp_rfc3339", "timestamp_offset", 2),
        ("nulls-begin", "breaking", "v", None, "null", 3),
        ("nested-new", "widening", "s.y", None, "bool", 4),
        ("type-conflict", "breaking", "id", "int64", "string", 4),
        ("element-changed", "breaking", "l[]", "float64", "union<float64 | string>", 4),
        # digits turning into labels: no number type holds "abc"
        ("textclass-changed", "breaking", "c", "decimal, integer", "text", 4),
    ]
    assert profile.level_counts == {"breaking": 4, "widening": 5, "info": 1}
    # The notebook table of events has the same column.
    assert profile.to_arrow().events.column("level").to_pylist() == [e.level for e in profile.events]


def test_gone_fields_break_a_reader(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"a": 1, "s": {"x": 1, "y": 1}}'] * 2 + ['{"s": {"y": 2}}'] * 2)
    profile = driftline.scan(tmp_path, batch_rows=2)
    assert _levels(profile) == [
        ("field-gone", "breaking", "a", "int64", None, 2),
        ("nested-gone", "breaking", "s.x", "int64", None, 2),
    ]
    assert profile.level_counts == {"breaking": 2, "widening": 0, "info": 0}


@pytest.mark.parametrize(
    ("before", "after", "level"),
    [
        ("int32", "int64", "widening"),
        ("int64", "float64", "widening"),
        ("timestamp[ms]", "timestamp[us]", "widening"),
        ("int64", "string", "breaking"),
        ("bool", "int64", "breaking"),
        ("date32", "timestamp[us, UTC]", "breaking"),
    ],
)
def test_element_levels_agree_with_arrows_permissive_unify(before: str, after: str, level: str):
    # source: pyarrow.unify_schemas(promote_options="permissive") promotes a list's elements
    # within a kind and refuses two kinds: what it merges widens, what it refuses breaks.
    old = pa.schema([pa.field("l", pa.list_(to_arrow(parse_key(before))))])
    new = pa.schema([pa.field("l", pa.list_(to_arrow(parse_key(after))))])
    try:
        pa.unify_schemas([old, new], promote_options="permissive")
        arrow = "widening"
    except (pa.ArrowTypeError, pa.ArrowInvalid):
        arrow = "breaking"
    joined = after if level == "widening" else f"union<{before} | {after}>"
    assert level_of("element-changed", before, joined) == level == arrow


def test_a_member_of_a_union_widening_in_list_elements_is_widening():
    # The same rule as type-widened at the top level (test_drift.test_a_member_of_a_union_widens).
    assert level_of("element-changed", "union<int64 | string>", "union<float64 | string>") == "widening"
    assert level_of("element-changed", "union<int64 | string>", "union<bool | int64 | string>") == "breaking"


def test_the_report_writes_each_events_level_and_loads_back(tmp_path: Path):
    data = tmp_path / "data"
    write_lines(data / "a.jsonl", WORKED)
    profile = driftline.scan(data, batch_rows=2)
    out = tmp_path / "r.json"
    profile.write_json(out)
    report = json.loads(out.read_text())
    assert [e["level"] for e in report["events"]] == [e.level for e in profile.events]
    assert list(report["events"][0])[:3] == ["kind", "level", "path"]
    back = driftline.load_report(out)  # validated against docs/report.schema.json on load
    assert back == profile and [e.level for e in back.events] == [e.level for e in profile.events]
    assert back.level_counts == {"breaking": 4, "widening": 5, "info": 1}
