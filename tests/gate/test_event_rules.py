"""Each drift event kind has the policy key that judges the same change in `check`."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

import driftline
from _drift_cases import CASES
from conftest import write_lines
from driftline.gate.policy import RULES, rule_of_event
from driftline.results.drift import EVENT_KINDS
from driftline.results.levels import LEVELS

ROWS = [
    '{"id": 1, "v": 1, "c": "12", "l": [1]}',
    '{"id": 2, "v": 2, "c": "13", "l": [2]}',
    '{"id": 3, "v": 2.5, "c": "14.5", "l": [2.5], "s": {"x": 1}}',
    '{"id": 4, "v": null, "c": "15", "l": [3], "s": {"x": 2}}',
    '{"id": "5", "v": 3, "c": "abc", "l": ["x"], "s": {"x": 3, "y": true}}',
    '{"id": 6, "v": 4, "c": "16", "l": [4], "s": {"x": 4, "y": false}}',
]


def test_every_kind_and_level_has_a_policy_key():
    for kind in EVENT_KINDS:
        for level in LEVELS:
            assert rule_of_event(kind, level) in RULES, (kind, level)
            assert rule_of_event(kind, level, required=False) in RULES, (kind, level)


def test_check_against_the_first_file_reports_the_changes_the_scan_reports(tmp_path: Path):
    # The scan's baseline is its first file (no events for it); check's baseline here is the
    # report of that same file. Every event then has a verdict line of its policy key on its
    # field, except a nested-new inside a struct the baseline lacks (check names the struct).
    write_lines(tmp_path / "base" / "a.jsonl", ROWS[:2])
    write_lines(tmp_path / "all" / "a.jsonl", ROWS[:2])
    write_lines(tmp_path / "all" / "b.jsonl", ROWS[2:])
    report = tmp_path / "base.json"
    driftline.scan(tmp_path / "base").write_json(report)
    scanned = driftline.scan(tmp_path / "all", batch_rows=2)
    from_events = {(e.path, rule_of_event(e.kind, e.level)) for e in scanned.events}
    verdict = driftline.check(tmp_path / "all", baseline=report, batch_rows=2)
    from_check = {(x.field, x.rule) for x in (*verdict.violations, *verdict.warnings, *verdict.allowed)}
    assert from_events == {
        ("s", "new_field"),
        ("s.y", "new_field"),
        ("v", "widening"),
        ("l[]", "widening"),
        ("c", "content_class"),
        ("v", "unexpected_nulls"),
        ("id", "type_change"),
        ("l[]", "type_change"),
    }
    assert from_events - from_check == {("s.y", "new_field")}
    # check also measures what no event kind reports: the rise of v's null share.
    assert from_check - from_events == {("v", "null_share_rise")}


@pytest.mark.parametrize("case", ["partition-lacks-field", "series-never-had", "partition-nulls", "partition-type"])
def test_check_reports_the_partition_kinds_under_their_policy_keys(case: str, tmp_path: Path):
    # The golden case's first file is check's baseline, as the scan's first file is the walk's;
    # every partition episode of the scan has a verdict line of its policy key on its field.
    folder = CASES / case / "input"
    first = sorted(folder.rglob("*.jsonl"))[0]
    base = tmp_path / "base" / first.relative_to(folder)
    base.parent.mkdir(parents=True)
    shutil.copyfile(first, base)
    report = tmp_path / "base.json"
    driftline.scan(tmp_path / "base").write_json(report)
    scanned = driftline.scan(folder)
    from_events = {(e.path, rule_of_event(e.kind, e.level)) for e in scanned.events}
    assert {e.kind for e in scanned.events} <= {"partition-lacks", "partition-type", "partition-nulls"}
    verdict = driftline.check(folder, baseline=report)
    from_check = {(x.field, x.rule) for x in (*verdict.violations, *verdict.warnings, *verdict.allowed)}
    assert from_events and from_events <= from_check
    # check also measures what no event kind reports: the null share rising where a field lacks or is null.
    assert {rule for _, rule in from_check - from_events} <= {"null_share_rise"}
