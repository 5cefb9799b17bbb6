"""One big JSON Lines file read as byte ranges in parallel, with the same result as one reader.

A range starts where a batch would start if every line were a record: at a line whose
index is a multiple of batch_rows.  Each range is read from that assumed state (lines,
rows and batches before it).  The assumption holds while every line before is a record;
the first range that meets anything else (a blank or malformed line, a warning) is read
again from its start to the end of the file, in order, so the result is always the one
reader's.
"""

from __future__ import annotations

import io
import os
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from typing import Any

from driftline.core.fileref import FileRef
from driftline.core.files import FileIssue, FileResult, file_result
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.observe.thinning import Thinner, concat_blocks
from driftline.sources.encoding import file_encoding
from driftline.sources.jsonfile import read_jsonl

SPLIT_MIN_BYTES = 48 * 2**20  # smaller files are one task: a range must outweigh its set-up
_SCAN_CHUNK = 16 * 2**20


@dataclass(frozen=True, slots=True)
class Span:
    """Bytes [start, end) of a file; end None means to the end.  lines/rows/batches come before it."""

    ref: FileRef
    start: int
    end: int | None
    lines: int
    rows: int
    batches: int


@dataclass(frozen=True, slots=True)
class SpanResult:
    span: Span
    observations: tuple[Observation, ...]
    issues: tuple[FileIssue, ...]
    lines: int  # lines the span held
    clean: bool  # every line a record and nothing reported: the next span's assumption holds
    block: int = 1  # batches per observation (thinning)


def can_split(ref: FileRef, opts: ReadOptions) -> bool:
    return ref.compression is None and not opts.exact and ref.size >= SPLIT_MIN_BYTES and os.path.isfile(ref.path)


def plan(ref: FileRef, opts: ReadOptions, parts: int) -> list[Span]:
    """Cut a file into about `parts` spans at batch starts, in one pass over its newlines.

    Batches end as read_jsonl ends them when every line is a record: at batch_rows lines,
    or at the line whose bytes (with its newline) bring the batch to batch_bytes.

    >>> import tempfile, pathlib
    >>> from driftline.sources.discover import discover
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_bytes(b'{"a": 1}\\n' * 10)
    >>> [(s.start, s.lines, s.batches) for s in plan(discover([d]).files[0], ReadOptions(batch_rows=4), 2)]
    [(0, 0, 0), (72, 8, 2)]
    >>> [(s.start, s.lines, s.batches) for s in plan(discover([d]).files[0], ReadOptions(batch_bytes=20), 2)]
    [(0, 0, 0), (54, 6, 2)]
    """
    targets = [ref.size * i // parts for i in range(1, parts)]
    cuts: list[tuple[int, int, int]] = []  # (byte offset, lines before, batches before)
    with open(ref.path, "rb") as fh:
        for offset, line, batch in _batch_starts(fh, opts.batch_rows, opts.batch_bytes):
            if offset >= ref.size:
                break
            if offset >= targets[0]:
                cuts.append((offset, line, batch))
                while targets and targets[0] <= offset:
                    targets.pop(0)
                if not targets:
                    break
    starts = [(0, 0, 0), *cuts]
    spans = []
    for k, (offset, line, batch) in enumerate(starts):
        end = starts[k + 1][0] if k + 1 < len(starts) else None
        spans.append(Span(ref, offset, end, line, line, batch))
    return spans


def _batch_starts(fh: Any, rows: int, budget: int) -> Iterator[tuple[int, int, int]]:
    """(byte offset, line, batch) of each batch start after the first, if every line were a record.

    A batch ends at its rows-th line, or at the line whose bytes (with its newline) reach the
    budget: the first newline at or past start + budget - 1.  Only newlines are looked for, one
    chunk of _SCAN_CHUNK bytes at a time, so memory holds one chunk whatever the budget (a
    buffer of a whole budget, grown by copies, took the planning process to three times the
    default budget of 64 MiB).
    """
    off = 0  # file offset of chunk[0]
    at, line, batch = 0, 0, 0  # the current batch's start
    seen = 0  # newlines since `at` that end before the budget is reached
    while chunk := fh.read(_SCAN_CHUNK):
        i = 0  # where the current batch's search goes on in this chunk
        while True:
            limit = at + budget - 1 - off  # a newline here or past it ends the line that reaches the budget
            if i < limit:  # lines that end before the budget
                stop = min(len(chunk), limit)
                found = chunk.count(b"\n", i, stop)
                if seen + found < rows:
                    seen, i = seen + found, stop
                    if stop == len(chunk):
                        break  # on in the next chunk
                    continue
                end = i
                for _ in range(rows - seen):
                    end = chunk.find(b"\n", end) + 1
                n = rows
            else:  # the line that reaches the budget: it ends at the first newline from here
                nl = chunk.find(b"\n", i)
                if nl < 0:
                    break
                end, n = nl + 1, seen + 1
            at, line, batch, seen, i = off + end, line + n, batch + 1, 0, end
            yield at, line, batch
        off += len(chunk)


class _Slice(io.RawIOBase):
    def __init__(self, path: str, start: int, end: int | None) -> None:
        self._fh = open(path, "rb")  # noqa: SIM115 - closed with the stream
        self._fh.seek(start)
        self._left = None if end is None else end - start

    def readable(self) -> bool:
        return True

    def readinto(self, buf: Any) -> int:
        n = len(buf) if self._left is None else min(len(buf), self._left)
        data = self._fh.read(n)
        buf[: len(data)] = data
        if self._left is not None:
            self._left -= len(data)
        return len(data)

    def close(self) -> None:
        self._fh.close()
        super().close()


def read_span(span: Span, opts: ReadOptions) -> SpanResult:
    """Read one span from its assumed state."""
    thinner = Thinner()  # blocks aligned on the file's batch index, as one reader would make them
    issues: list[FileIssue] = []
    counter: list[int] = []
    with io.BufferedReader(_Slice(span.ref.path, span.start, span.end), buffer_size=1 << 20) as stream:
        items = read_jsonl(
            stream,
            span.ref.rel,
            opts,
            first_line_offset=span.start,
            start=(span.lines, span.rows, span.batches),
            lines_read=counter,
        )
        for item in items:
            if isinstance(item, FileIssue):
                issues.append(item)
            else:
                assert isinstance(item, Observation)  # a span is never handed on walked (no group=True)
                thinner.add(item)
    lines = counter[0] if counter else 0
    observations, block = thinner.result()
    rows = sum(o.rows for o in observations)
    return SpanResult(span, observations, tuple(issues), lines, clean=not issues and rows == lines, block=block)


def assemble(ref: FileRef, results: Sequence[SpanResult], opts: ReadOptions) -> FileResult | Span:
    """The file's result from its spans, or the span to read again (from there to the end)."""
    for k, res in enumerate(results):
        last = k == len(results) - 1
        if not res.clean and not last:
            return replace(res.span, end=None)
    observations, block = concat_blocks([(res.observations, res.block) for res in results])
    issues = results[-1].issues if results else ()
    return file_result(ref, observations, issues, span=block, encoding=file_encoding(ref.path, True, opts.encoding))
