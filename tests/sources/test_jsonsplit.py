"""Where a big JSON Lines file is cut into spans: each batch start found from newlines alone,
against the rule read_jsonl ends batches by, and in memory bounded by one chunk."""

from __future__ import annotations

import io
import random

import pytest

from driftline.sources import jsonsplit


def _by_the_rule(data: bytes, rows: int, budget: int) -> list[tuple[int, int, int]]:
    """Batch starts as read_jsonl makes them when every line is a record: a batch ends at its
    rows-th line, or at the line whose bytes with its newline bring it to budget bytes; the
    rest after the last newline belongs to the last batch (DEVELOPERS.md, "Adding a format": a batch
    ends at batch_rows or batch_bytes, whichever comes first)."""
    out = []
    start, lines, size, line, batch = 0, 0, 0, 0, 0
    for k, byte in enumerate(data):
        size += 1
        if byte == 0x0A:
            lines += 1
            if lines == rows or size >= budget:
                line, batch = line + lines, batch + 1
                start, lines, size = k + 1, 0, 0
                out.append((start, line, batch))
    return out


class _Reads(io.BytesIO):
    """A file that remembers the largest read asked of it."""

    largest = 0

    def read(self, n: int | None = -1) -> bytes:
        _Reads.largest = max(_Reads.largest, n if n is not None and n >= 0 else len(self.getbuffer()))
        return super().read(n)


@pytest.mark.parametrize("chunk", [1, 3, 7, 64, 1 << 20])
def test_batch_starts_follow_the_rule_across_chunk_boundaries(monkeypatch: pytest.MonkeyPatch, chunk: int):
    rng = random.Random(20)
    lines = [b"x" * rng.choice((0, 1, 2, 5, 9, 30)) + b"\n" for _ in range(300)]
    for tail in (b"", b'{"last": 1}'):  # a last line without its newline is the last batch's
        data = b"".join(lines) + tail
        monkeypatch.setattr(jsonsplit, "_SCAN_CHUNK", chunk)
        for rows, budget in ((1, 1), (4, 10**6), (10**6, 20), (7, 40), (3, 9), (50, 100)):
            got = list(jsonsplit._batch_starts(io.BytesIO(data), rows, budget))
            assert got == _by_the_rule(data, rows, budget), (chunk, rows, budget)


def test_planning_reads_one_chunk_at_a_time_whatever_the_budget(monkeypatch: pytest.MonkeyPatch):
    # The planner once read a whole budget (64 MiB by default) and grew it by copies: on a 260 MB
    # file the planning process peaked at 447 MB where a scan in one process peaks at 234 MB
    # (scripts/bench --scaling).  It now looks at one chunk at a time, whatever the budget.
    monkeypatch.setattr(jsonsplit, "_SCAN_CHUNK", 256)
    data = b"".join(b'{"a": %d}\n' % k for k in range(2000))
    _Reads.largest = 0
    got = list(jsonsplit._batch_starts(_Reads(data), 10**6, 5000))
    assert _Reads.largest == 256
    assert got == _by_the_rule(data, 10**6, 5000) and len(got) == len(data) // 5000
