"""observe.jsonbatch: which rows of a batch are walked exactly, and which Arrow types.

Whether the fast path's reports equal the exact walk's is test_fastpath_differential.py's
job; these tests pin the work done (counted, never timed) and compare with the walk.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import pytest

from driftline.observe.fast import jsonbatch
from driftline.observe.records import observe_records


@pytest.fixture
def walked(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[int]]:
    """The rows of every exact walk jsonbatch makes."""
    rows: list[int] = []
    real = jsonbatch._walk

    def counting(records: list[Any], at: list[int], where: jsonbatch.Where, samples_only: bool = False) -> Any:
        rows.extend(at)
        return real(records, at, where, samples_only)

    monkeypatch.setattr(jsonbatch, "_walk", counting)
    yield rows


# -- observe_json_lines: rows set aside ------------------------------------------------


def _observe(lines: list[bytes], hint: jsonbatch.Hint | None = None) -> tuple[Any, jsonbatch.Hint]:
    got = jsonbatch.observe_json_lines(lines, file="f.jsonl", batch=0, row_start=0, first_line=1, hint=hint)
    assert got is not None
    return got


def _exact(lines: list[bytes]) -> Any:
    return observe_records(
        [json.loads(x) for x in lines], file="f.jsonl", batch=0, row_start=0, lines=list(range(1, len(lines) + 1))
    ).fields


def test_a_kind_change_within_the_batch_is_typed_by_arrow(walked: list[int], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(jsonbatch, "ARROW_ASIDE_MIN", 10)
    recs = [{"id": i, "temp": i + 0.5 if i < 60 else f"{i}.5", "tags": ["a"] if i % 25 else "a"} for i in range(100)]
    lines = [json.dumps(r).encode() for r in recs]
    obs, hint = _observe(lines)
    assert obs.fields == _exact(lines)
    assert obs.fields["temp"].types == {"float64": 60, "string": 40}
    # Walked: the four rows whose tags is a string, and the example rows of each part; not
    # the forty rows whose temp is a string.
    assert {0, 25, 50, 75} <= set(walked)
    assert len(set(walked) & set(range(60, 100))) <= 10
    assert ('"tags"', "string") in hint.patterns and ('"temp"', "string") in hint.patterns


def test_few_rows_set_aside_are_walked(walked: list[int]) -> None:
    recs = [{"id": i, "tags": ["a"] if i % 25 else "a"} for i in range(100)]
    lines = [json.dumps(r).encode() for r in recs]
    obs, hint = _observe(lines)
    assert obs.fields == _exact(lines)
    assert {0, 25, 50, 75} <= set(walked)
    assert hint.patterns == (('"tags"', "string"),)
    walked.clear()
    obs, _ = _observe(lines, hint)  # the next batch sets them aside up front
    assert obs.fields == _exact(lines) and {0, 25, 50, 75} <= set(walked)


def test_remembered_rows_of_the_rarer_kind_and_a_shared_row(walked: list[int], monkeypatch: pytest.MonkeyPatch) -> None:
    # Rows found by two patterns are walked, and the large group is typed without them.
    monkeypatch.setattr(jsonbatch, "ARROW_ASIDE_MIN", 5)
    recs = [{"v": str(i) if i >= 20 else i, "t": "s" if i in (3, 30) else [i]} for i in range(40)]
    lines = [json.dumps(r).encode() for r in recs]
    hint = jsonbatch.Hint(None, (('"t"', "string"), ('"v"', "string")))
    obs, _ = _observe(lines, hint)
    assert obs.fields == _exact(lines)
    assert {3, 30} <= set(walked)
