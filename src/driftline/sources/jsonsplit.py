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
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

from driftline.observe.observation import Observation
from driftline.sources.base import FileIssue, FileResult, ReadOptions
from driftline.sources.discover import FileRef
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


def can_split(ref: FileRef, opts: ReadOptions) -> bool:
    return (ref.format == "jsonl" and ref.compression is None and not opts.exact and ref.size >= SPLIT_MIN_BYTES
            and os.path.isfile(ref.path))


def plan(ref: FileRef, opts: ReadOptions, parts: int) -> list[Span]:
    """Cut a file into about `parts` spans at batch starts, in one pass over its newlines.

    >>> import tempfile, pathlib
    >>> from driftline.sources.discover import discover
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_bytes(b'{"a": 1}\\n' * 10)
    >>> [(s.start, s.lines) for s in plan(discover([d]).files[0], ReadOptions(batch_rows=4), 2)]
    [(0, 0), (72, 8)]
    """
    size, step = ref.size, opts.batch_rows
    targets = [size * i // parts for i in range(1, parts)]
    cuts: list[tuple[int, int]] = []  # (byte offset, line index) of each cut
    seen, base = 0, 0  # newlines before the chunk; its offset
    want: int | None = None  # line index the next cut waits for
    with open(ref.path, "rb") as fh:
        while chunk := fh.read(_SCAN_CHUNK):
            pos = 0
            while True:
                if want is None:
                    if not targets or targets[0] >= base + len(chunk):
                        break
                    at = targets.pop(0) - base
                    line = seen + chunk.count(b"\n", pos, max(at, pos))
                    # the first batch start after the line holding the target byte
                    want = (line // step + 1) * step
                    seen, pos = line, max(at, pos)
                # walk newline by newline to line `want`
                while seen < want:
                    nl = chunk.find(b"\n", pos)
                    if nl < 0:
                        break
                    seen += 1
                    pos = nl + 1
                if seen < want:
                    break
                if not cuts or base + pos > cuts[-1][0]:
                    cuts.append((base + pos, want))
                want = None
            if want is None and not targets:
                break  # every cut is placed: the rest of the file need not be read
            seen += chunk.count(b"\n", pos)
            base += len(chunk)
    starts = [(0, 0), *[(o, li) for o, li in cuts if o < size]]
    spans = []
    for k, (offset, line) in enumerate(starts):
        end = starts[k + 1][0] if k + 1 < len(starts) else None
        spans.append(Span(ref, offset, end, line, line, line // step))
    return spans


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
    observations: list[Observation] = []
    issues: list[FileIssue] = []
    counter: list[int] = []
    with io.BufferedReader(_Slice(span.ref.path, span.start, span.end), buffer_size=1 << 20) as stream:
        items = read_jsonl(stream, span.ref.rel, opts, first_line_offset=span.start,
                           start=(span.lines, span.rows, span.batches), lines_read=counter)
        for item in items:
            (issues if isinstance(item, FileIssue) else observations).append(item)
    lines = counter[0] if counter else 0
    rows = sum(o.rows for o in observations)
    return SpanResult(span, tuple(observations), tuple(issues), lines, clean=not issues and rows == lines)


def assemble(ref: FileRef, results: Sequence[SpanResult], opts: ReadOptions) -> FileResult | Span:
    """The file's result from its spans, or the span to read again (from there to the end)."""
    observations: list[Observation] = []
    for k, res in enumerate(results):
        last = k == len(results) - 1
        if not res.clean and not last:
            return replace(res.span, end=None)
        observations.extend(res.observations)
    issues = results[-1].issues if results else ()
    return FileResult(rel=ref.rel, format=ref.format, compression=ref.compression, partitions=ref.partitions,
                      size=ref.size, mtime_ns=ref.mtime_ns, rows=sum(o.rows for o in observations),
                      observations=tuple(observations), issues=issues, declared=None, complete=True,
                      encoding=file_encoding(ref.path, ref.format, opts.encoding))
