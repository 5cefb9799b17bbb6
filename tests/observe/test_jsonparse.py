"""observe.jsonparse: how many Arrow parses a batch takes, and that the tables hold what
pyarrow's own reading of the lines holds (with its timestamps read as strings).

Counted, never timed: timing lives in scripts/bench.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import pyarrow as pa
import pyarrow.json as pj
import pytest

from driftline.observe import jsonparse


@pytest.fixture
def reads(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[tuple[int, bool]]]:
    """Every Arrow parse jsonparse makes: (bytes, with an explicit schema)."""
    seen: list[tuple[int, bool]] = []
    real = jsonparse._read

    def counting(data: bytes, schema: pa.Schema | None) -> pa.Table:
        seen.append((len(data), schema is not None))
        return real(data, schema)

    monkeypatch.setattr(jsonparse, "_read", counting)
    yield seen


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


def test_timestamps_in_the_first_lines_one_full_parse(
    reads: list[tuple[int, bool]], monkeypatch: pytest.MonkeyPatch
) -> None:
    # pyarrow's JSON reader types RFC 3339 strings as timestamps (pyarrow 26.0.1); the probe
    # of the first lines declares them strings, so the batch itself is parsed once.
    monkeypatch.setattr(jsonparse, "PROBE_BYTES", 200)
    data = _data(_stamped(50))
    table, why = jsonparse.parse_lines(data, None)
    assert why == "" and table is not None
    assert table.schema.field("ts").type == pa.string()
    assert table.to_pylist() == _reference(data)
    assert [full for size, full in reads if size == len(data)] == [True]  # one parse of the batch
    assert len(reads) == 2  # the probe, then the batch


def test_no_timestamps_no_hint_from_the_probe(reads: list[tuple[int, bool]], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(jsonparse, "PROBE_BYTES", 100)
    data = _data([{"id": i, "s": "x"} for i in range(50)])
    table, _ = jsonparse.parse_lines(data, None)
    assert table is not None and table.to_pylist() == _reference(data)
    assert [full for size, full in reads if size == len(data)] == [False]


def test_the_probe_leaves_what_the_first_lines_cannot_settle_to_inference(monkeypatch: pytest.MonkeyPatch) -> None:
    # Null in the first lines, an empty list there, an integer that later holds 2.5 and a
    # struct that gains a key: the table is pyarrow's own reading all the same.
    monkeypatch.setattr(jsonparse, "PROBE_BYTES", 150)
    head = [{"ts": "2026-01-01T00:00:00Z", "n": None, "l": [], "i": 1, "s": {"a": 1}} for _ in range(5)]
    tail = [
        {"ts": "2026-01-02T00:00:00Z", "n": "x", "l": ["y"], "i": 2.5, "s": {"a": 2, "b": "2026-01-03"}}
        for _ in range(40)
    ]
    data = _data(head + tail)
    table, why = jsonparse.parse_lines(data, None)
    assert why == "" and table is not None
    assert table.to_pylist() == _reference(data)
    assert table.schema.field("s").type.field("b").type == pa.string()  # a date, read again as text


def test_a_hinted_field_that_changed_kind_is_inferred_again(reads: list[tuple[int, bool]]) -> None:
    hint = pa.schema([("id", pa.int64()), ("v", pa.float64()), ("ts", pa.string())])
    data = _data([{"id": i, "v": str(i), "ts": "2026-01-01T00:00:00Z"} for i in range(20)])
    table, why = jsonparse.parse_lines(data, hint)
    assert why == "" and table is not None
    assert table.schema.field("v").type == pa.string() and table.schema.field("ts").type == pa.string()
    assert table.to_pylist() == _reference(data)
    assert reads == [(len(data), True), (len(data), True)]  # the hint, then the hint without v


def test_a_field_of_two_kinds_in_the_batch_is_reported(reads: list[tuple[int, bool]]) -> None:
    hint = pa.schema([("v", pa.float64())])
    data = _data([{"v": 1.5}, {"v": "x"}, {"v": 2.5}])
    table, why = jsonparse.parse_lines(data, hint)
    assert table is None
    assert jsonparse.conflict_field(why) == "v"
    assert len(reads) == 2  # the hint, then v inferred: two kinds in this batch
