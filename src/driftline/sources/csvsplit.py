"""One big CSV file read as byte spans in parallel, with the same result as one reader.

The header is read once, the way read_csv reads it.  After it, the planner cuts the file
where a row whose index is a multiple of batch_rows would start if every newline outside
quotes ended a row: a field that holds a line break is quoted (RFC 4180 section 2, rule 6),
so a newline is taken to be outside quotes when an even number of quote characters precede
it (common practice; a quote inside an unquoted field, which Arrow keeps as a character,
breaks it).  That is only a guess.  Each span is read by Arrow from its assumed state (line,
rows, batches) with the header's options, and proves on its own that it ended where a row
ends, whatever its quotes did: a marker row is appended to its bytes, and Arrow's lexer
(a newline outside quotes ends a row, quotes open only at a field's start) gives it back as
a row of its own exactly when the span's last newline ended a row; inside quotes the marker,
which holds no quote, becomes part of the open cell.  A span also reports what read_csv
would: a ragged row, an Arrow error, bytes that are not UTF-8, a line longer than
max_record_bytes.

The spans make the file's result only when none reported anything and each one's rows,
batches and next line are what the next one assumed (a blank line or a lone CR outside
quotes, which the planner counts as a row, breaks that chain; one before the first row,
in a preamble or the header, leaves the file to one reader at once); then each span started where
one reader's row starts, in the state one reader would be in, by induction from the header.
Otherwise, or if the file changed, the whole file is read again by one reader, so the result
is always that reader's.
"""

from __future__ import annotations

import codecs
import os
from collections.abc import Sequence
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.csv as pcsv

from driftline.core.fileref import FileRef, file_changed
from driftline.core.files import FileIssue, FileResult, file_result
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.observe.fast.strprofile import exact_requested
from driftline.sources.csvfile import CsvState, Header, Rebatch, arrow_options, head_of
from driftline.sources.encoding import file_encoding
from driftline.sources.linecount import has_lone_cr
from driftline.sources.native import hand, hand_bytes

SPLIT_MIN_BYTES = 32 * 2**20  # smaller files are one task: a span must outweigh its set-up
SPAN_MAX_BYTES = 32 * 2**20  # a span is read whole, so this bounds a worker's memory
_BLOCK = 4 * 2**20  # Arrow parses cache-sized blocks faster; a longer row makes the span fail
_SCAN_CHUNK = 16 * 2**20
_SUB = 2**20  # the planner counts a megabyte at a time
_WALK_QUOTES = 512  # quotes stepped over one by one in a block before it is counted at once
_SPLIT_QUOTES = 2**14  # quotes left between newlines in a block (of 2**20 bytes), past which the planner gives up
_LOCATE_WINDOW = 4096  # a cut is found by halving down to this many bytes, then byte by byte
# What a header may carry in a file read as spans: the preamble and header are read once, the
# way read_csv reads them, so only the dialect of the rows matters to the spans.
_HEAD_WARNINGS = ("preamble", "no-header", "row-names", "stray-quote")
_UTF8_STEP = 2**20


@dataclass(frozen=True, slots=True)
class Head:
    header: Header
    warnings: tuple[FileIssue, ...]  # what read_csv reports before the first row


@dataclass(frozen=True, slots=True)
class Span:
    """Bytes [start, end) of a file (end None: to the end), whose first row would be row
    `rows` of batch `batches`, on line `lines`."""

    ref: FileRef
    head: Head
    start: int
    end: int | None
    lines: int
    rows: int
    batches: int


@dataclass(frozen=True, slots=True)
class SpanResult:
    span: Span
    observations: tuple[Observation, ...]
    rows: int
    next_line: int  # the line a row after the span would start on
    clean: bool  # nothing reported, and the span ended where a row ends


def can_split(ref: FileRef, opts: ReadOptions) -> bool:
    return (
        ref.compression is None
        and not opts.exact
        and not exact_requested()
        and SPLIT_MIN_BYTES <= ref.size <= opts.max_decompressed_bytes
        and os.path.isfile(ref.path)
    )


def plan(ref: FileRef, opts: ReadOptions, parts: int, *, tsv: bool = False) -> list[Span]:
    """Spans at assumed batch starts; [] when the file is better read by one reader (a header
    with problems, a quoted line break on most rows, no row to cut at, or the file cannot be
    read here: one reader then reports why)."""
    try:
        return _plan(ref, opts, parts, tsv)
    except Exception:  # planning runs in the scan's own process: one reader reports the problem instead
        return []


def _plan(ref: FileRef, opts: ReadOptions, parts: int, tsv: bool) -> list[Span]:
    head = _head(ref, opts, tsv)
    if head is None:
        return []
    begin = head.header.size
    # Spans of about one batch or two balance the pool (a span costs little to start);
    # SPAN_MAX_BYTES bounds what a worker holds.
    parts = max(2 * parts, -(-(ref.size - begin) // SPAN_MAX_BYTES))
    targets = [begin + (ref.size - begin) * i // parts for i in range(1, parts)]
    cuts = _cuts(ref.path, begin, ref.size, opts.batch_rows, targets)
    if not cuts:  # None: too many quoted line breaks to plan cheaply
        return []
    starts = [(begin, head.header.lines + 1, 0), *cuts]
    return [
        Span(ref, head, offset, starts[k + 1][0] if k + 1 < len(starts) else None, line, rows, rows // opts.batch_rows)
        for k, (offset, line, rows) in enumerate(starts)
    ]


def _head(ref: FileRef, opts: ReadOptions, tsv: bool = False) -> Head | None:
    with open(ref.path, "rb") as fh:
        issues, header = head_of(fh, ref.rel, opts, tsv=tsv)
        if header is None or any(i.kind not in _HEAD_WARNINGS or i.severity != "warning" for i in issues):
            return None
        fh.seek(0)
        if has_lone_cr(fh.read(header.size)):
            # one reader's line count (linecount.LineTally) covers the preamble and header too,
            # and reports a lone CR there as cr-line-ends: no span sees those bytes again
            return None
    d = header.dialect
    if d is None or d.line_end == "CR" or d.quote != '"' or d.escape is not None or d.comment is not None:
        return None  # the planner knows RFC 4180 quoting and LF ends only: one reader takes the others
    return Head(header, tuple(issues))


def _cuts(path: str, begin: int, size: int, step: int, targets: list[int]) -> list[tuple[int, int, int]] | None:
    """(byte offset, line, rows before) of the first assumed row start after each target whose
    row index is a multiple of step.  One read of the file, a megabyte at a time; None when
    quoted line breaks are so many that counting them would cost more than the spans save."""
    cuts: list[tuple[int, int, int]] = []
    buf = bytearray(_SCAN_CHUNK)
    rows = 0
    inside = False  # after an odd number of quotes since `begin`
    want: int | None = None  # the row index the next cut waits for
    with open(path, "rb", buffering=0) as fh:
        line = 1 + fh.read(begin).count(b"\n")  # the line `base + lo` is on
        base = begin
        while (n := fh.readinto(buf)) and (targets or want is not None):
            for start in range(0, n, _SUB):
                lo, hi = start, min(start + _SUB, n)
                try:
                    ended, newlines, after = _count(buf, lo, hi, inside, cap=_SPLIT_QUOTES)
                except _TooDense:
                    return None
                while True:
                    if want is None:
                        while targets and cuts and targets[0] <= cuts[-1][0]:
                            targets.pop(0)  # behind the last cut already
                        if not targets or targets[0] >= base + hi:
                            break
                        # a target passed inside quotes (or in an earlier block) counts from here
                        at = max(targets.pop(0) - base, lo)
                        want = ((rows + _count(buf, lo, at, inside)[0]) // step + 1) * step
                    if rows + ended < want:
                        break
                    pos = _locate(buf, lo, hi, inside, want - rows)
                    line += buf.count(b"\n", lo, pos)
                    rows, inside, lo, want = want, False, pos, None
                    cuts.append((base + pos, line, rows))
                    ended, newlines, after = _count(buf, lo, hi, inside)
                rows, line, inside = rows + ended, line + newlines, after
            base += n
    return [c for c in cuts if c[0] < size]


_OTHER_BYTES = bytes(b for b in range(256) if b not in b'"\n')


class _TooDense(Exception):
    pass


def _count(buf: bytearray, lo: int, hi: int, inside: bool, cap: int | None = None) -> tuple[int, int, bool]:
    """Rows ended in buf[lo:hi] (newlines outside quotes), its newlines, and whether it ends
    inside quotes.  Quote by quote while they are few (bytes.find is memchr); where they are
    many, only quotes and newlines are kept and split at the quotes (two adjacent quotes
    change no newline's side, so they go first).  _TooDense when more than `cap` quotes are
    left apart by newlines (a quoted line break on most rows)."""
    rows = quoted = 0
    pos = lo
    for _ in range(_WALK_QUOTES):
        quote = buf.find(b'"', pos, hi)
        end = hi if quote < 0 else quote
        if inside:
            quoted += buf.count(b"\n", pos, end)
        else:
            rows += buf.count(b"\n", pos, end)
        if quote < 0:
            return rows, rows + quoted, inside
        inside, pos = not inside, quote + 1
    kept = buf[pos:hi].translate(None, _OTHER_BYTES)
    paired = kept.replace(b'""', b"")
    if cap is not None and len(paired) - paired.count(b"\n") > cap:
        raise _TooDense
    parts = paired.split(b'"')
    outside = b"".join(parts[1 if inside else 0 :: 2]).count(b"\n")
    return rows + outside, rows + quoted + kept.count(b"\n"), inside ^ (len(parts) % 2 == 0)


def _locate(buf: bytearray, lo: int, hi: int, inside: bool, k: int) -> int:
    """The position after the k-th newline outside quotes in buf[lo:hi] (there are k or more)."""
    while hi - lo > max(_LOCATE_WINDOW, 1):  # halve the range by counting
        mid = (lo + hi) // 2
        ended, _, after = _count(buf, lo, mid, inside)
        if ended >= k:
            hi = mid
        else:
            k, lo, inside = k - ended, mid, after
    pos = lo
    while True:
        newline, quote = buf.find(b"\n", pos, hi), buf.find(b'"', pos, hi)
        if quote >= 0 and (newline < 0 or quote < newline):
            inside, pos = not inside, quote + 1
            continue
        if newline < 0:
            return hi  # not reached: k newlines were counted here; a wrong cut fails its span
        pos = newline + 1
        if not inside:
            k -= 1
            if k == 0:
                return pos


def read_span(span: Span, opts: ReadOptions) -> SpanResult:
    """Read one span from its assumed state, and check that it ended where a row ends."""
    header = span.head.header
    last = span.end is None
    marker = b"" if last else _marker(header)
    data = _read(span, marker)
    size = len(data) - len(marker)
    state = CsvState(span.ref.rel, opts, line=span.lines, rows=span.rows, batch=span.batches)
    failed = SpanResult(span, (), 0, span.lines, clean=False)
    if not _utf8(data, size) or not _lines_within(data, size, opts.max_record_bytes) or has_lone_cr(data):
        return failed  # (a lone CR: one reader counts the lines, see linecount.py)
    ragged: list[pcsv.InvalidRow] = []

    def on_invalid(row: pcsv.InvalidRow) -> str:
        ragged.append(row)
        return "skip"

    observations: list[Observation] = []
    batches = Rebatch(opts.batch_rows, opts.batch_bytes)
    held: pa.RecordBatch | None = None  # Arrow's latest batch: its last row may be the marker
    try:
        reader = pcsv.open_csv(pa.BufferReader(hand_bytes(data)), **arrow_options(header, _BLOCK, hand(on_invalid)))
        while True:
            try:
                rb = reader.read_next_batch()
            except StopIteration:
                break
            if ragged:
                return failed
            if held is not None:
                observations.extend(state.observe(batch) for batch in batches.add(held))
            held = rb
    except (pa.ArrowInvalid, OSError, EOFError):
        return failed
    if ragged:
        return failed
    if not last:
        if held is None or not _is_marker_row(held):
            return failed  # the span ended inside quotes: the marker was read as part of a cell
        held = held.slice(0, held.num_rows - 1)
    if held is not None:
        observations.extend(state.observe(batch) for batch in batches.add(held))
    observations.extend(state.observe(batch) for batch in batches.rest())
    return SpanResult(span, tuple(observations), state.rows - span.rows, state.line, clean=True)


_MARKER_CELL = b"\x00driftline: end of span"


def _marker(header: Header) -> bytes:
    """A row appended after a span's bytes.  Arrow reads it as a row of its own, the first
    cell _MARKER_CELL and the others empty, exactly when the span's last newline ended a row;
    had it ended inside quotes, the marker (which holds no quote) would join that quoted cell,
    newline and all."""
    return _MARKER_CELL + header.delimiter.encode("ascii") * (len(header.names) - 1) + b"\n"


def _is_marker_row(rb: pa.RecordBatch) -> bool:
    if rb.num_rows == 0:
        return False
    row = [col[rb.num_rows - 1].as_py() for col in rb.columns]
    return row[0] == _MARKER_CELL and not any(row[1:])


def _read(span: Span, tail: bytes) -> bytearray:
    """The span's bytes followed by tail, read into one buffer (Arrow reads it in place)."""
    with open(span.ref.path, "rb", buffering=0) as fh:
        size = (span.end if span.end is not None else os.fstat(fh.fileno()).st_size) - span.start
        data = bytearray(size + len(tail))
        view = memoryview(data)
        fh.seek(span.start)
        got = 0
        while got < size and (n := fh.readinto(view[got:size])):
            got += n
        if got < size:
            raise OSError(f"{span.ref.rel}: the file ended early (it changed while being read)")
        view[size:] = tail
    return data


def _utf8(data: bytearray, size: int) -> bool:
    """data[:size] is valid UTF-8, checked a piece at a time (memory stays bounded).  LineGuard
    reports the lines that are not; a multi-byte character never holds a newline, so the span
    as a whole answers the same."""
    if data.isascii():
        return True
    decoder = codecs.getincrementaldecoder("utf-8")()
    view = memoryview(data)[:size]
    try:
        for at in range(0, size, _UTF8_STEP):
            decoder.decode(view[at : at + _UTF8_STEP])
        decoder.decode(b"", final=True)
    except UnicodeDecodeError:
        return False
    return True


def _lines_within(data: bytearray, size: int, limit: int) -> bool:
    """No line of data[:size] is longer than limit bytes (LineGuard would stop there).  Such a
    line covers a whole window of limit // 2 aligned bytes, so a newline in every window rules
    it out (a shorter line may fail this too: the file is then read by one reader)."""
    if size <= limit:
        return True
    width = max(1, limit // 2)
    return all(data.find(b"\n", at, at + width) >= 0 for at in range(0, size - width + 1, width))


def assemble(ref: FileRef, results: Sequence[SpanResult], opts: ReadOptions) -> FileResult | None:
    """The file's result from its spans when they join, else None: one reader reads it (split.assemble)."""
    if not _joined(results) or file_changed(ref) is not None:
        return None
    observations = tuple(o for res in results for o in res.observations)
    return file_result(
        ref,
        observations,
        results[0].span.head.warnings,
        dialect=results[0].span.head.header.dialect,
        encoding=file_encoding(ref.path, False, opts.encoding),
    )


def _joined(results: Sequence[SpanResult]) -> bool:
    for k, res in enumerate(results):
        if not res.clean:
            return False
        if k + 1 < len(results):
            after = results[k + 1].span
            if (res.span.end, res.span.rows + res.rows, res.next_line, res.span.batches + len(res.observations)) != (
                after.start,
                after.rows,
                after.lines,
                after.batches,
            ):
                return False
    # no row at all: one reader gives the header's columns with no values
    return bool(results) and results[-1].span.end is None and any(r.observations for r in results)
