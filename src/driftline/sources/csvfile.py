"""CSV / TSV (RFC 4180 quoting, header row, sniffed delimiter) → observations of text columns.

Cells are read as bytes and checked as UTF-8 here, so one bad cell is reported with its
row instead of failing the whole block; types are inferred later from content classes.
"""

from __future__ import annotations

import csv
import io
import re
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, BinaryIO

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv

from driftline.observe.columnar import observe_table
from driftline.observe.observation import Observation
from driftline.observe.valuebytes import value_view
from driftline.sources.base import FileIssue, ReadOptions

_SNIFF_BYTES = 64 * 1024
_BLOCK = 8 * 1024 * 1024
_MAX_CELL_ISSUES = 20  # per file; the count of further ones is reported once

Item = Observation | FileIssue


def sniff_delimiter(head: bytes, default: str = ",") -> str:
    """The delimiter of a CSV sample: one of , ; TAB |.

    >>> sniff_delimiter(b"a;b;c\\n1;2;3\\n")
    ';'
    """
    text = head.decode("utf-8", "replace")
    try:
        return csv.Sniffer().sniff(text, delimiters=",;\t|").delimiter
    except csv.Error:
        return default


def _header(head: bytes, delimiter: str) -> list[str] | None:
    text = head.decode("utf-8", "replace").lstrip("\ufeff")
    try:
        return next(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
    except (StopIteration, csv.Error):
        return None


def _unique(names: list[str]) -> list[str]:
    seen: dict[str, int] = {}
    out = []
    for name in names:
        n = seen.get(name, 0) + 1
        seen[name] = n
        out.append(name if n == 1 else f"{name}_{n}")
    return out


_BAD_BYTES = re.compile("[\udc80-\udcff]+")  # undecodable bytes, as surrogateescape shows them


class LineGuard(io.RawIOBase):
    """Passes whole lines only, valid as UTF-8, and ends the data just before a line longer
    than limit bytes.

    Memory stays bounded by the limit whatever the file holds; a CSV line cannot be skipped
    the way a JSON line can (it may sit inside a quoted field), so the read stops there.
    Undecodable bytes become U+FFFD here, each line's first one noted in bad_utf8: pyarrow
    cannot even hand a ragged row holding them to invalid_row_handler (it decodes the row's
    text strictly first), and then gives up on the whole file.
    """

    def __init__(self, inner: BinaryIO, limit: int) -> None:
        self._inner, self._limit = inner, limit
        self._step = min(1 << 20, limit)  # a line inside one read is then never over the limit
        self._carry: list[bytes] = []  # the start of a line whose newline is still to come
        self._carry_len = 0
        self._out = b""
        self._eof = False
        self.lines = 0  # newlines passed on
        self.consumed = 0  # bytes of the file passed on (before any U+FFFD)
        self.cut: tuple[int, int] | None = None  # (line, byte offset) of the over-long line
        self.bad_utf8: list[tuple[int, int]] = []  # (line, byte offset) of undecodable bytes
        self.bad_lines = 0

    def readable(self) -> bool:
        return True

    def _stop(self) -> None:
        self.cut = (self.lines + 1, self.consumed)
        self._carry, self._carry_len, self._eof = [], 0, True

    def _emit(self, data: bytes) -> None:
        first_line, offset = self.lines + 1, self.consumed
        self.lines += data.count(b"\n")
        self.consumed += len(data)
        if not data.isascii():
            try:
                data.decode("utf-8")
            except UnicodeDecodeError:
                data = self._scrub(data, first_line, offset)
        self._out = data

    def _scrub(self, data: bytes, first_line: int, offset: int) -> bytes:
        text = data.decode("utf-8", "surrogateescape")
        seen_line = 0
        for m in _BAD_BYTES.finditer(text):
            line = first_line + text.count("\n", 0, m.start())
            if line != seen_line:
                seen_line = line
                self.bad_lines += 1
                if len(self.bad_utf8) < _MAX_CELL_ISSUES:
                    self.bad_utf8.append((line, offset + len(text[: m.start()].encode("utf-8", "surrogateescape"))))
        return _BAD_BYTES.sub(lambda m: "\ufffd" * len(m.group()), text).encode("utf-8")

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        while not self._out and not self._eof:
            chunk = self._inner.read(self._step)
            if not chunk:
                self._eof = True
                self._emit(b"".join(self._carry))  # a last line without a newline
                self._carry, self._carry_len = [], 0
                break
            first = chunk.find(b"\n")
            if first < 0:
                self._carry.append(chunk)
                self._carry_len += len(chunk)
                if self._carry_len > self._limit:
                    self._stop()
                continue
            if self._carry_len + first > self._limit:
                self._stop()
                break
            last = chunk.rfind(b"\n")
            self._emit(b"".join([*self._carry, chunk[: last + 1]]))
            self._carry, self._carry_len = [chunk[last + 1 :]], len(chunk) - last - 1
        n = min(len(buf), len(self._out))
        buf[:n] = self._out[:n]
        self._out = self._out[n:]
        return n

    def take_issues(self, rel: str) -> list[FileIssue]:
        out = [FileIssue(rel, "invalid-utf8", "invalid UTF-8 on this line; read with U+FFFD", line=line, byte_offset=at)
               for line, at in self.bad_utf8]
        self.bad_utf8.clear()
        return out

    def rest_issue(self, rel: str) -> list[FileIssue]:
        more = self.bad_lines - _MAX_CELL_ISSUES
        if more <= 0:
            return []
        return [FileIssue(rel, "invalid-utf8", f"{more:,} more lines hold invalid UTF-8; read with U+FFFD")]


def _block(opts: ReadOptions) -> int:
    # pyarrow fails a row that straddles two blocks, so a block holds the longest line allowed.
    return min(max(_BLOCK, opts.max_record_bytes + 1), 2**31 - 1)


def _read_header(buffered: io.BufferedReader) -> bytes:
    """The bytes of the header record, however long: lines until its quotes are balanced.

    An RFC 4180 field holding a newline is quoted and inner quotes are doubled, so a record
    is complete exactly when it holds an even number of quote characters (common practice).
    """
    out = b""
    while line := buffered.readline():
        out += line
        if out.count(b'"') % 2 == 0:
            break
    return out


@dataclass(frozen=True, slots=True)
class Header:
    """What the header record says: how to cut the rows that follow it."""

    delimiter: str
    names: tuple[str, ...]
    lines: int  # lines it spans (at least 1)
    size: int  # its bytes, a byte order mark included: where the first row starts


def read_header(guard: LineGuard, buffered: io.BufferedReader, rel: str, opts: ReadOptions,
                tsv: bool) -> Iterator[FileIssue | Header]:
    """The problems found before the first row, then the Header when rows may follow."""
    head = buffered.peek(_SNIFF_BYTES)[:_SNIFF_BYTES]
    if guard.cut is not None and not head:
        yield from _ending(rel, opts, guard)
        return
    if not head.strip():
        yield FileIssue(rel, "empty", "empty file: no header and no rows", "warning", line=1, byte_offset=0)
        return
    if head.startswith(b"\xef\xbb\xbf"):
        yield FileIssue(rel, "bom", "UTF-8 byte order mark at the start of the file; ignored", "warning",
                        line=1, byte_offset=0)
    first_line = head.split(b"\n", 1)[0]
    if first_line.endswith(b"\r"):
        yield FileIssue(rel, "crlf", "CRLF line ends; read as LF", "warning", line=1, byte_offset=len(first_line) - 1)
    delimiter = opts.delimiter or ("\t" if tsv else sniff_delimiter(head))
    # The header is read whole here (it may be longer than the sniffed head: 100,000 columns)
    # and pyarrow reads the rest, so its row numbers start after the header's lines.
    header = _read_header(buffered)
    names = _header(header, delimiter)
    yield from guard.take_issues(rel)
    if not names:
        yield FileIssue(rel, "malformed-csv", "no header row could be read", line=1, byte_offset=0)
        return
    if len(names) > opts.max_columns:
        yield FileIssue(rel, "too-wide", f"{len(names):,} columns, more than {opts.max_columns:,} (--max-columns); "
                        "file not profiled", line=1, byte_offset=0)
        return
    yield Header(delimiter, tuple(_unique(names)), max(header.count(b"\n"), 1), len(header))


def arrow_options(header: Header, block: int,
                  on_invalid: Callable[[pcsv.InvalidRow], str]) -> dict[str, Any]:
    """Arrow's CSV options for the rows after a header: binary cells, RFC 4180 quoting with
    newlines in quoted values, ragged rows handed to on_invalid."""
    names = list(header.names)
    return {
        "read_options": pcsv.ReadOptions(use_threads=False, block_size=block, column_names=names, skip_rows=0),
        "parse_options": pcsv.ParseOptions(delimiter=header.delimiter, newlines_in_values=True,
                                           invalid_row_handler=on_invalid),
        "convert_options": pcsv.ConvertOptions(column_types=dict.fromkeys(names, pa.binary()),
                                               strings_can_be_null=False, quoted_strings_can_be_null=False),
    }


def head_of(stream: BinaryIO, rel: str, opts: ReadOptions, *,
            tsv: bool = False) -> tuple[list[FileIssue], Header | None]:
    """What read_csv reports before the first row of stream, and the header (None when no
    rows can follow)."""
    guard = LineGuard(stream, opts.max_record_bytes)
    issues: list[FileIssue] = []
    header: Header | None = None
    for item in read_header(guard, io.BufferedReader(guard, buffer_size=_SNIFF_BYTES), rel, opts, tsv):
        if isinstance(item, Header):
            header = item
        else:
            issues.append(item)
    return issues, header


def read_csv(stream: BinaryIO, rel: str, opts: ReadOptions, *, tsv: bool = False) -> Iterator[Item]:
    """Stream a delimited text file in batches of at most opts.batch_rows rows."""
    guard = LineGuard(stream, opts.max_record_bytes)
    buffered = io.BufferedReader(guard, buffer_size=_SNIFF_BYTES)
    header: Header | None = None
    for item in read_header(guard, buffered, rel, opts, tsv):
        if isinstance(item, Header):
            header = item
        else:
            yield item
    if header is None:
        return
    header_lines = header.lines
    ragged: list[FileIssue] = []

    def on_invalid(row: pcsv.InvalidRow) -> str:
        ragged.append(
            FileIssue(
                rel,
                "ragged-row",
                f"expected {row.expected_columns} fields, found {row.actual_columns}; row skipped",
                line=None if row.number is None else row.number + header_lines,
            )
        )
        return "skip"

    try:
        reader = pcsv.open_csv(buffered, **arrow_options(header, _block(opts), on_invalid))
    except pa.ArrowInvalid as exc:
        if "Empty CSV file" not in str(exc):  # a header and no rows is an empty table, not a problem
            yield FileIssue(rel, "malformed-csv", f"cannot parse: {exc}", line=1)
        yield from _ending(rel, opts, guard)
        return
    state = CsvState(rel, opts, line=header_lines + 1)
    batches = Rebatch(opts.batch_rows, opts.batch_bytes)
    while True:
        try:
            rb = reader.read_next_batch()
        except StopIteration:
            break
        except (pa.ArrowInvalid, OSError, EOFError) as exc:
            yield from ragged
            yield from guard.take_issues(rel)
            yield FileIssue(rel, "malformed-csv", f"parsing stopped: {exc}", line=state.line, row=state.rows)
            break
        yield from ragged
        ragged.clear()
        yield from guard.take_issues(rel)
        for batch in batches.add(rb):
            yield state.observe(batch)
    yield from ragged
    for batch in batches.rest():
        yield state.observe(batch)
    yield from _ending(rel, opts, guard)


def _ending(rel: str, opts: ReadOptions, guard: LineGuard) -> Iterator[FileIssue]:
    yield from guard.take_issues(rel)
    yield from guard.rest_issue(rel)
    if guard.cut is not None:
        yield _too_long(rel, opts, guard)


def _too_long(rel: str, opts: ReadOptions, guard: LineGuard) -> FileIssue:
    line, offset = guard.cut or (1, 0)
    return FileIssue(rel, "too-large", f"line longer than {opts.max_record_bytes:,} bytes (--max-record-bytes); "
                     "it and the rest of the file were not profiled", line=line, byte_offset=offset)


class Rebatch:
    """Cuts Arrow's record batches, whatever their size, into batches of `size` rows (the last
    one shorter), or fewer when their cells' bytes reach max_bytes first (through the row that
    reaches it; a row's bytes are its cells' plus one separator each, whatever Arrow's chunks):
    slices, and a copy only of a batch that straddles two of Arrow's.  Row bytes are counted
    only once Arrow's own size of what is held (an upper bound of them) reaches max_bytes."""

    def __init__(self, size: int, max_bytes: int = 2**62) -> None:
        self.size, self.max_bytes = size, max_bytes
        self._parts: deque[pa.RecordBatch] = deque()
        self._sizes: dict[int, pa.Array] = {}  # id of a held part → its rows' bytes, once counted
        self._rows = 0
        self._upper = 0  # bytes held, at least: Arrow's size plus a separator per cell

    def add(self, rb: pa.RecordBatch) -> Iterator[pa.RecordBatch]:
        if rb.num_rows:
            self._parts.append(rb)
            self._rows += rb.num_rows
            self._upper += _upper(rb)
        while n := self._ready():
            yield self._take(n)

    def rest(self) -> Iterator[pa.RecordBatch]:
        while self._rows:
            yield self._take(self._ready() or self._rows)

    def _ready(self) -> int:
        """Rows of the next batch once it is complete, else 0."""
        if self._upper >= self.max_bytes:
            seen_rows = seen_bytes = 0
            for part in self._parts:
                sizes = self._sizes.get(id(part))
                if sizes is None:
                    sizes = self._sizes[id(part)] = _row_bytes(part)
                total = pc.sum(sizes).as_py() or 0
                if seen_bytes + total >= self.max_bytes:
                    ends = pc.cumulative_sum(sizes)
                    j = pc.index(pc.greater_equal(ends, self.max_bytes - seen_bytes), True).as_py()
                    return min(self.size, seen_rows + j + 1)
                seen_rows += part.num_rows
                seen_bytes += total
                if seen_rows >= self.size:
                    break
        return self.size if self._rows >= self.size else 0

    def _take(self, n: int) -> pa.RecordBatch:
        pieces: list[pa.RecordBatch] = []
        need = n
        while need:
            head = self._parts[0]
            sizes = self._sizes.pop(id(head), None)
            self._upper -= _upper(head)
            if head.num_rows <= need:
                pieces.append(self._parts.popleft())
                need -= head.num_rows
            else:
                pieces.append(head.slice(0, need))
                rest = self._parts[0] = head.slice(need)
                self._upper += _upper(rest)
                if sizes is not None:
                    self._sizes[id(rest)] = sizes.slice(need)
                need = 0
        self._rows -= n
        if len(pieces) == 1:
            return pieces[0]
        columns = [pa.concat_arrays([p.column(i) for p in pieces]) for i in range(pieces[0].num_columns)]
        return pa.RecordBatch.from_arrays(columns, schema=pieces[0].schema)


def _upper(rb: pa.RecordBatch) -> int:
    return int(rb.nbytes) + rb.num_rows * rb.num_columns


def _row_bytes(rb: pa.RecordBatch) -> pa.Array:
    """Each row's cell bytes plus one separator per cell (int64)."""
    total = pa.repeat(pa.scalar(rb.num_columns, pa.int64()), rb.num_rows)
    for col in rb.columns:
        length = col.cast(pa.binary()) if not pa.types.is_binary(col.type) else col
        total = pc.add(total, pc.fill_null(pc.binary_length(length).cast(pa.int64()), 0))
    return total


class CsvState:
    """Rows, batches and the line of the next row, from a given start (a file's first row, or
    a span's, see csvsplit)."""

    def __init__(self, rel: str, opts: ReadOptions, line: int, rows: int = 0, batch: int = 0) -> None:
        self.rel, self.opts = rel, opts
        self.rows = rows
        self.batch = batch
        self.line = line  # line of the next row (exact unless blank or ragged lines intervene)

    def observe(self, cells: pa.RecordBatch) -> Observation:
        """One batch of binary cells observed as text.

        The cells are valid UTF-8 without a check here: every byte Arrow reads passed
        LineGuard's check (or csvsplit's, for a span), and a cell is cut from that text at
        ASCII bytes only (Arrow takes an ASCII delimiter, quotes and line ends), so it cannot
        split a character.  A view as string is then exact and costs nothing.
        """
        text = pa.RecordBatch.from_arrays([c.view(pa.string()) for c in cells.columns], names=cells.schema.names)
        lines = self._lines(cells)
        obs = observe_table(text, file=self.rel, batch=self.batch, row_start=self.rows, lines=lines,
                            text_source=True, exact=self.opts.exact or None)
        self.rows += cells.num_rows
        self.batch += 1
        return obs

    def _lines(self, cells: pa.RecordBatch) -> Sequence[int]:
        # Each row starts one line after the previous one, plus the newlines inside its cells.
        n = cells.num_rows
        if n == 0:
            return []
        multiline = [col for col in cells.columns if holds_newline(col)]
        if not multiline:  # the common case, found by one byte search per column
            starts: Sequence[int] = range(self.line, self.line + n)
            self.line += n
            return starts
        step = pa.array([1] * n, pa.int64())
        for col in multiline:
            step = pc.add(step, pc.fill_null(pc.count_substring(col, "\n"), 0))
        ends = pc.cumulative_sum(step).to_pylist()
        starts = [self.line] + [self.line + e for e in ends[:-1]]
        self.line += ends[-1]
        return starts


_NEWLINE = re.compile(b"\n")


def holds_newline(arr: pa.Array) -> bool:
    """Whether any value of a binary array holds a newline: one search of its bytes."""
    return _NEWLINE.search(value_view(arr)) is not None
