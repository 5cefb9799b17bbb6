"""observe.jsonbatch: how many Arrow parses and exact walks a batch takes, and that the
tables it builds hold what pyarrow's own reading of the lines holds.

Whether the fast path's reports equal the exact walk's is test_fastpath_differential.py's
job; these tests pin the work done (counted, never timed) and the shapes Arrow returns.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import pyarrow as pa
import pyarrow.json as pj
import pytest

from driftline.observe import jsonbatch
from driftline.observe.records import observe_records


@pytest.fixture
def reads(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[tuple[int, bool]]]:
    """Every Arrow parse jsonbatch makes: (bytes, with an explicit schema)."""
    seen: list[tuple[int, bool]] = []
    real = jsonbatch._read

    def counting(data: bytes, schema: pa.Schema | None) -> pa.Table:
        seen.append((len(data), schema is not None))
        return real(data, schema)

    monkeypatch.setattr(jsonbatch, "_read", counting)
    yield seen


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


def _data(records: list[dict[str, Any]]) -> bytes:
    return "".join(json.dumps(r) + "\n" for r in records).encode()


def _as_text(t: pa.DataType) -> pa.DataType:
    if pa.types.is_timestamp(t):
        return pa.string()
    if pa.types.is_struct(t):
        return pa.struct([f.with_type(_as_text(f.type)) for f in t])
    if pa.types.is_list(t):
        return pa.list_(_as_text(t.value_type))
    return t


def _reference(data: bytes) -> list[dict[str, Any]]:
    """pyarrow's inference over all the lines, with its timestamps (at any depth) read as strings."""
    inferred = pj.read_json(pa.BufferReader(data)).schema
    po = pj.ParseOptions(explicit_schema=pa.schema([f.with_type(_as_text(f.type)) for f in inferred]))
    return pj.read_json(pa.BufferReader(data), parse_options=po).to_pylist()


def _stamped(n: int) -> list[dict[str, Any]]:
    return [{"id": i, "ts": f"2026-01-01T00:00:{i % 60:02d}Z", "v": i * 0.5} for i in range(n)]


# -- parse_lines ---------------------------------------------------------------------


def test_timestamps_in_the_first_lines_one_full_parse(reads: list[tuple[int, bool]], monkeypatch:
                                                      pytest.MonkeyPatch) -> None:
    # pyarrow's JSON reader types RFC 3339 strings as timestamps (pyarrow 26.0.1); the probe
    # of the first lines declares them strings, so the batch itself is parsed once.
    monkeypatch.setattr(jsonbatch, "PROBE_BYTES", 200)
    data = _data(_stamped(50))
    table, why = jsonbatch.parse_lines(data, None)
    assert why == "" and table is not None
    assert table.schema.field("ts").type == pa.string()
    assert table.to_pylist() == _reference(data)
    assert [full for size, full in reads if size == len(data)] == [True]  # one parse of the batch
    assert len(reads) == 2  # the probe, then the batch


def test_no_timestamps_no_hint_from_the_probe(reads: list[tuple[int, bool]], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(jsonbatch, "PROBE_BYTES", 100)
    data = _data([{"id": i, "s": "x"} for i in range(50)])
    table, _ = jsonbatch.parse_lines(data, None)
    assert table is not None and table.to_pylist() == _reference(data)
    assert [full for size, full in reads if size == len(data)] == [False]


def test_the_probe_leaves_what_the_first_lines_cannot_settle_to_inference(monkeypatch: pytest.MonkeyPatch) -> None:
    # Null in the first lines, an empty list there, an integer that later holds 2.5 and a
    # struct that gains a key: the table is pyarrow's own reading all the same.
    monkeypatch.setattr(jsonbatch, "PROBE_BYTES", 150)
    head = [{"ts": "2026-01-01T00:00:00Z", "n": None, "l": [], "i": 1, "s": {"a": 1}} for _ in range(5)]
    tail = [{"ts": "2026-01-02T00:00:00Z", "n": "x", "l": ["y"], "i": 2.5, "s": {"a": 2, "b": "2026-01-03"}}
            for _ in range(40)]
    data = _data(head + tail)
    table, why = jsonbatch.parse_lines(data, None)
    assert why == "" and table is not None
    assert table.to_pylist() == _reference(data)
    assert table.schema.field("s").type.field("b").type == pa.string()  # a date, read again as text


def test_a_hinted_field_that_changed_kind_is_inferred_again(reads: list[tuple[int, bool]]) -> None:
    hint = pa.schema([("id", pa.int64()), ("v", pa.float64()), ("ts", pa.string())])
    data = _data([{"id": i, "v": str(i), "ts": "2026-01-01T00:00:00Z"} for i in range(20)])
    table, why = jsonbatch.parse_lines(data, hint)
    assert why == "" and table is not None
    assert table.schema.field("v").type == pa.string() and table.schema.field("ts").type == pa.string()
    assert table.to_pylist() == _reference(data)
    assert reads == [(len(data), True), (len(data), True)]  # the hint, then the hint without v


def test_a_field_of_two_kinds_in_the_batch_is_reported(reads: list[tuple[int, bool]]) -> None:
    hint = pa.schema([("v", pa.float64())])
    data = _data([{"v": 1.5}, {"v": "x"}, {"v": 2.5}])
    table, why = jsonbatch.parse_lines(data, hint)
    assert table is None
    assert jsonbatch.conflict_field(why) == "v"
    assert len(reads) == 2  # the hint, then v inferred: two kinds in this batch


# -- observe_json_lines: rows set aside ------------------------------------------------


def _observe(lines: list[bytes], hint: jsonbatch.Hint | None = None) -> tuple[Any, jsonbatch.Hint]:
    got = jsonbatch.observe_json_lines(lines, file="f.jsonl", batch=0, row_start=0, first_line=1, hint=hint)
    assert got is not None
    return got


def _exact(lines: list[bytes]) -> Any:
    return observe_records([json.loads(x) for x in lines], file="f.jsonl", batch=0, row_start=0,
                           lines=list(range(1, len(lines) + 1))).fields


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


def test_remembered_rows_of_the_rarer_kind_and_a_shared_row(walked: list[int], monkeypatch:
                                                            pytest.MonkeyPatch) -> None:
    # Rows found by two patterns are walked, and the large group is typed without them.
    monkeypatch.setattr(jsonbatch, "ARROW_ASIDE_MIN", 5)
    recs = [{"v": str(i) if i >= 20 else i, "t": "s" if i in (3, 30) else [i]} for i in range(40)]
    lines = [json.dumps(r).encode() for r in recs]
    hint = jsonbatch.Hint(None, (('"t"', "string"), ('"v"', "string")))
    obs, _ = _observe(lines, hint)
    assert obs.fields == _exact(lines)
    assert {3, 30} <= set(walked)
