"""The golden drift cases (tests/fixtures/drift/<case>/, loaded by tests/_drift_cases.py).

Each case's input is written by a script of ours that says what it injects; the expected
episodes were worked out by reading that script, not by running the scan. The scan must
give exactly those episodes, with the same totals, whatever the batch size or --jobs.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest

import driftline
from _drift_cases import DriftCase, drift_cases, mismatches, same_tree, write_input

CASES = drift_cases()


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_scan_gives_the_expected_episodes(case: DriftCase) -> None:
    profile = driftline.scan(case.input, **case.scan)
    events = [e.to_json() for e in profile.events]
    assert mismatches(case, events) == []
    assert dict(Counter(e["level"] for e in events)) == dict(case.levels)


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_episodes_do_not_depend_on_batch_size_or_jobs(case: DriftCase) -> None:
    # Episodes are counted over the whole scan, so a batch size that cuts every file into
    # one-row batches, or two worker processes, report the same values, rows and files.
    keys = ("kind", "path", "before", "after", "file", "row", "values", "rows", "files", "still_going")
    base = driftline.scan(case.input, **case.scan)
    other = driftline.scan(case.input, **{**case.scan, "batch_rows": 1, "jobs": 2})
    assert [{k: e.to_json()[k] for k in keys} for e in other.events] == [
        {k: e.to_json()[k] for k in keys} for e in base.events
    ]


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_input_is_what_the_script_writes(case: DriftCase, tmp_path: Path) -> None:
    assert same_tree(write_input(case, tmp_path), case.input) == []


def test_every_case_has_a_script_and_a_description() -> None:
    assert len(CASES) >= 1
    for case in CASES:
        assert (case.folder / "make.py").is_file(), case.name
        assert case.about.strip(), case.name
