"""CSV / TSV (dialect found by sources/dialect.py, or pinned) → observations of text columns.

Cells are read as bytes and checked as UTF-8 here, so one bad cell is reported with its
row instead of failing the whole block; types are inferred later from content classes.
"""

from __future__ import annotations

import io
import re
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, BinaryIO

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv

from driftline.core.files import FileIssue
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.core.stagetime import staged
from driftline.core.textfile import Dialect
from driftline.core.words import count
from driftline.observe.fast.columnar import observe_table
from driftline.observe.fast.valuebytes import value_view
from driftline.sources.dialect import ROW_NAME_COLUMN, SAMPLE_BYTES, Finding, find_dialect, pin_for, positional_name
from driftline.sources.linecount import LineTally, RowLines
from driftline.sources.native import hand

_SNIFF_BYTES = 64 * 1024
_BLOCK = 8 * 1024 * 1024
_MAX_CELL_ISSUES = 20  # per file; the count of further ones is reported once

Item = Observation | FileIssue


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

    def __init__(
        self, inner: BinaryIO, limit: int, prefix: bytes = b"", cr: bool = False, comment: str | None = None
    ) -> None:
        self._inner, self._limit = inner, limit
        self._prefix = prefix  # bytes already taken from inner (the dialect finder's sample)
        self._cr = cr  # CR-only line ends: each CR becomes LF, byte for byte, so offsets and lines stay exact
        # comment lines lose their content (not their newline): Arrow skips them as blank lines,
        # and their numbers let CsvState keep row lines exact
        self._comment = (
            None if comment is None else re.compile(rb"(?m)^[ \t]*" + re.escape(comment.encode()) + rb"[^\n]*")
        )
        self.comment_lines: deque[int] = deque()  # line numbers of comment lines not yet passed by the rows
        self.comments = 0
        self.first_comment: int | None = None
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
        self.tally: LineTally | None = None  # sees every byte passed on (linecount.py)

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
        if self._comment is not None:
            data = self._blank_comments(data, first_line)
        if self.tally is not None:  # after the comments are emptied: to the tally they are blank lines
            self.tally.see(data, first_line - 1, self.lines)
        self._out = data

    def _blank_comments(self, data: bytes, first_line: int) -> bytes:
        assert self._comment is not None
        line, pos, found = first_line, 0, 0
        for m in self._comment.finditer(data):
            line += data.count(b"\n", pos, m.start())
            pos = m.start()
            self.comment_lines.append(line)
            found += 1
            if self.first_comment is None:
                self.first_comment = line
        self.comments += found
        return self._comment.sub(b"", data) if found else data

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

    @staged("read")
    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        while not self._out and not self._eof:
            chunk = self._chunk()
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

    def _chunk(self) -> bytes:
        if self._prefix:
            chunk, self._prefix = self._prefix[: self._step], self._prefix[self._step :]
        else:
            chunk = self._inner.read(self._step)
        return chunk.replace(b"\r", b"\n") if self._cr else chunk

    def take_issues(self, rel: str) -> list[FileIssue]:
        out = [
            FileIssue(rel, "invalid-utf8", "invalid UTF-8 on this line; read with U+FFFD", line=line, byte_offset=at)
            for line, at in self.bad_utf8
        ]
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


_BOM = b"\xef\xbb\xbf"


def read_sample(stream: BinaryIO, limit: int) -> tuple[bytes, bool]:
    """The dialect finder's sample: SAMPLE_BYTES of stream, more only to end its first line
    (up to limit + 1 bytes); and whether it is the whole stream.  Linear: each read is
    searched once."""
    parts = [stream.read(SAMPLE_BYTES)]
    size = len(parts[0])
    ended = b"\n" in parts[0] or b"\r" in parts[0]
    at_end = size < SAMPLE_BYTES
    while not ended and not at_end and size <= limit:
        more = stream.read(min(SAMPLE_BYTES, limit + 1 - size) or 1)
        parts.append(more)
        size += len(more)
        ended, at_end = b"\n" in more or b"\r" in more, not more
    return b"".join(parts), at_end


@dataclass(frozen=True, slots=True)
class Header:
    """Where the table starts and how to cut its rows (the dialect found or pinned)."""

    delimiter: str
    names: tuple[str, ...]
    lines: int  # lines before the first row: preamble and header (0 without either)
    size: int  # their bytes, a byte order mark included: where the first row starts
    quote: str | None = '"'
    escape: str | None = None
    dialect: Dialect | None = None


@dataclass(frozen=True, slots=True)
class Opened:
    """A stream positioned at its first row: the LineGuard, the buffered reader over it, the header."""

    guard: LineGuard
    buffered: io.BufferedReader[LineGuard]
    header: Header


def read_header(stream: BinaryIO, rel: str, opts: ReadOptions, tsv: bool) -> Iterator[FileIssue | Dialect | Opened]:
    """The problems found before the first row, the dialect, then the stream at its first row
    (Opened) when rows may follow."""
    sample, at_end = read_sample(stream, opts.max_record_bytes)
    if not sample.strip():
        yield FileIssue(rel, "empty", "empty file: no header and no rows", "warning", line=1, byte_offset=0)
        return
    # A UTF-8 byte order mark is skipped without a word: RFC 4180 says nothing of it, the
    # Unicode Standard allows it as a signature, and the report's encoding records it
    # (evidence "bom"), as for UTF-16 and UTF-32 files (reliability.md, "Warnings").
    bom = sample.startswith(_BOM)
    text = sample[len(_BOM) :] if bom else sample
    if not at_end and b"\n" not in text and b"\r" not in text:  # the first line alone passes the limit
        yield FileIssue(
            rel,
            "too-large",
            f"line longer than {count(opts.max_record_bytes, 'byte')} (--max-record-bytes); "
            "it and the rest of the file were not profiled",
            line=1,
            byte_offset=0,
        )
        return
    finding = find_dialect(text, at_end=at_end, tsv=tsv, pin=pin_for(rel, opts.csv_dialects, opts.delimiter))
    d = finding.dialect
    yield d
    yield from _dialect_notes(rel, sample, finding)
    guard = LineGuard(stream, opts.max_record_bytes, prefix=sample, cr=d.line_end == "CR", comment=d.comment)
    # Blank lines, emptied comment lines and stray CRs, to place each row on its line (linecount.py)
    guard.tally = LineTally(None, "csv")
    buffered = io.BufferedReader(guard, buffer_size=_SNIFF_BYTES)
    size = finding.start_bytes + (len(_BOM) if bom else 0)
    # The preamble and header pass through the guard, line by line (its output may differ from
    # the file's bytes: undecodable ones become U+FFFD); their bytes are checked too.
    for _ in range(finding.start_lines):
        buffered.readline()
    while guard.comment_lines and guard.comment_lines[0] <= finding.start_lines:
        guard.comment_lines.popleft()  # the preamble's (reported as such), not between rows
        guard.comments -= 1
    guard.first_comment = guard.comment_lines[0] if guard.comment_lines else None
    yield from guard.take_issues(rel)
    names = _names(finding)
    if not names:
        yield FileIssue(rel, "malformed-csv", "no header row could be read", line=1, byte_offset=0)
        return
    if len(names) > opts.max_columns:
        yield FileIssue(
            rel,
            "too-wide",
            f"{len(names):,} columns, more than {opts.max_columns:,} (--max-columns); file not profiled",
            line=d.skip + 1,
            byte_offset=0,
        )
        return
    yield Opened(guard, buffered, Header(d.delimiter, names, finding.start_lines, size, d.quote, d.escape, d))


def _names(finding: Finding) -> tuple[str, ...]:
    d = finding.dialect
    if d.header == "no":
        return tuple(positional_name(i) for i in range(finding.width))
    names = list(finding.names or ())
    if d.header == "row-names":
        names = [ROW_NAME_COLUMN, *names]
    return tuple(_unique(names))


def _dialect_notes(rel: str, sample: bytes, finding: Finding) -> Iterator[FileIssue]:
    """Warnings about what the dialect makes the reader do: nothing is lost, but a person
    should know (line ends converted, lines skipped, names invented)."""
    d = finding.dialect
    # CRLF is the record end RFC 4180 (section 2) itself gives: nothing to note for CSV/TSV
    # (the dialect still records it). Lone CRs are no standard's line end: they are noted.
    if d.line_end == "CR":
        yield FileIssue(
            rel,
            "cr",
            "CR-only line ends (as old spreadsheet exports write them); read as LF",
            "warning",
            line=1,
            byte_offset=sample.find(b"\r"),
        )
    if d.skip:
        yield FileIssue(
            rel,
            "preamble",
            f"{count(d.skip, 'line')} before the header skipped (comments, a title or notes)",
            "warning",
            line=1,
            byte_offset=0,
        )
    # RFC 4180 makes the header optional (section 2, item 3) and lets the sender say whether
    # it is there (section 3, header=present/absent): a pinned header=no is that word, and
    # needs no note; a guessed one is noted, since a wrong guess reads the names as a row.
    if d.header == "no" and "header" not in d.pinned:
        yield FileIssue(
            rel,
            "no-header",
            f"no header row (the first row reads like the rows after it); columns named "
            f"{positional_name(0)} … {positional_name(finding.width - 1)} by position",
            "warning",
            line=d.skip + 1,
        )
    elif d.header == "row-names":
        yield FileIssue(
            rel,
            "row-names",
            f"the header has one name fewer than the rows: the first column holds row "
            f"names, read as {ROW_NAME_COLUMN!r}",
            "warning",
            line=d.skip + 1,
        )
    if finding.stray_quote:
        yield FileIssue(
            rel,
            "stray-quote",
            "the header line opens a quote it never closes; the header was read as that one line",
            "warning",
            line=d.skip + 1,
        )


def arrow_options(header: Header, block: int, on_invalid: Callable[[pcsv.InvalidRow], str]) -> dict[str, Any]:
    """Arrow's CSV options for the rows after a header: binary cells, the dialect's quoting
    (newlines in quoted values), ragged rows handed to on_invalid."""
    names = list(header.names)
    quote = header.quote or False
    return {
        "read_options": pcsv.ReadOptions(use_threads=False, block_size=block, column_names=names, skip_rows=0),
        "parse_options": pcsv.ParseOptions(
            delimiter=header.delimiter,
            quote_char=quote,
            escape_char=header.escape or False,
            newlines_in_values=quote is not False,
            invalid_row_handler=on_invalid,
        ),
        "convert_options": pcsv.ConvertOptions(
            column_types=dict.fromkeys(names, pa.binary()), strings_can_be_null=False, quoted_strings_can_be_null=False
        ),
    }


def head_of(
    stream: BinaryIO, rel: str, opts: ReadOptions, *, tsv: bool = False
) -> tuple[list[FileIssue], Header | None]:
    """What read_csv reports before the first row of stream, and the header (None when no
    rows can follow)."""
    issues: list[FileIssue] = []
    header: Header | None = None
    for item in read_header(stream, rel, opts, tsv):
        if isinstance(item, Opened):
            header = item.header
        elif isinstance(item, FileIssue):
            issues.append(item)
    return issues, header


def read_csv(stream: BinaryIO, rel: str, opts: ReadOptions, *, tsv: bool = False) -> Iterator[Item | Dialect]:
    """Stream a delimited text file in batches of at most opts.batch_rows rows; its Dialect
    comes first (unless the file is empty)."""
    return _read_rows(stream, rel, opts, tsv, CsvState.observe)


@dataclass(frozen=True, slots=True)
class LinedCells:
    """A batch of text cells and the line each row starts on (1-based, as the scan numbers them)."""

    cells: pa.RecordBatch
    lines: Sequence[int]


def read_csv_cells(stream: BinaryIO, rel: str, opts: ReadOptions, *, tsv: bool = False) -> Iterator[LinedCells]:
    """The rows read_csv observes, as batches of text cells (recommendation/raw casts them) with their
    lines: the same dialect, header, rows, batches and lines; the problems are read_csv's to report."""
    for item in _read_rows(stream, rel, opts, tsv, CsvState.cells):
        if isinstance(item, LinedCells) and item.cells.num_rows:
            yield item


def _read_rows(
    stream: BinaryIO, rel: str, opts: ReadOptions, tsv: bool, take: Callable[[CsvState, pa.RecordBatch], Any]
) -> Iterator[Any]:
    """read_csv's reading, each batch of binary cells handed to take (observed, or kept as text)."""
    opened: Opened | None = None
    for item in read_header(stream, rel, opts, tsv):
        if isinstance(item, Opened):
            opened = item
        else:
            yield item
    if opened is None:
        return
    guard, buffered, header = opened.guard, opened.buffered, opened.header
    header_lines = header.lines
    assert guard.tally is not None
    places = RowLines(rel, guard.tally, header_lines + 1, header.names)

    def on_invalid(row: pcsv.InvalidRow) -> str:
        places.set_aside(
            row.number,
            row.text,
            f"expected {count(row.expected_columns, 'field')}, found {row.actual_columns:,}; row skipped",
        )
        return "skip"

    state = CsvState(rel, opts, line=header_lines + 1, places=places)
    try:
        # Arrow's threads may outlive this reader: what they hold is awaited at exit (native.py)
        reader = pcsv.open_csv(hand(buffered), **arrow_options(header, _block(opts), hand(on_invalid)))
    except pa.ArrowInvalid as exc:
        if "Empty CSV file" not in str(exc):  # a header and no rows is an empty table, not a problem
            yield FileIssue(rel, "malformed-csv", f"cannot parse: {exc}", line=header_lines + 1)
            yield from places.unplaced()
        elif guard.cut is None:
            yield from places.finish(0)
        yield take(state, _no_rows(header))  # the header's columns, with no values
        yield from _ending(rel, opts, guard)
        return
    stopped = False
    batches = Rebatch(opts.batch_rows, opts.batch_bytes)
    while True:
        try:
            rb = _next_batch(reader)
        except StopIteration:
            break
        except (pa.ArrowInvalid, OSError, EOFError) as exc:
            stopped = True
            yield from guard.take_issues(rel)
            yield FileIssue(rel, "malformed-csv", f"parsing stopped: {exc}", line=state.line, row=state.rows)
            break
        yield from places.ready()
        yield from guard.take_issues(rel)
        for batch in batches.add(rb):
            yield take(state, batch)
    for batch in batches.rest():
        yield take(state, batch)
    if state.batch == 0:
        yield take(state, _no_rows(header))
    # Every line is a row, a set-aside row or a blank line, unless the reading stopped early.
    yield from places.unplaced() if stopped or guard.cut is not None else places.finish(state.rows)
    yield from _ending(rel, opts, guard)


@staged("parse")
def _next_batch(reader: pcsv.CSVStreamingReader) -> pa.RecordBatch:
    return reader.read_next_batch()


def _no_rows(header: Header) -> pa.RecordBatch:
    return pa.RecordBatch.from_arrays([pa.array([], pa.binary()) for _ in header.names], names=list(header.names))


def _ending(rel: str, opts: ReadOptions, guard: LineGuard) -> Iterator[FileIssue]:
    yield from guard.take_issues(rel)
    if guard.comments:
        n = guard.comments
        yield FileIssue(rel, "comments", f"{count(n, 'comment line')} skipped", "warning", line=guard.first_comment)
    yield from guard.rest_issue(rel)
    if guard.cut is not None:
        yield _too_long(rel, opts, guard)


def _too_long(rel: str, opts: ReadOptions, guard: LineGuard) -> FileIssue:
    line, offset = guard.cut or (1, 0)
    return FileIssue(
        rel,
        "too-large",
        f"line longer than {count(opts.max_record_bytes, 'byte')} (--max-record-bytes); "
        "it and the rest of the file were not profiled",
        line=line,
        byte_offset=offset,
    )


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

    def __init__(
        self,
        rel: str,
        opts: ReadOptions,
        line: int,
        rows: int = 0,
        batch: int = 0,
        comment_lines: deque[int] | None = None,
        places: RowLines | None = None,
    ) -> None:
        self.rel, self.opts = rel, opts
        self.comment_lines = comment_lines  # lines skipped between rows (LineGuard fills it ahead of the rows)
        self.places = places  # when given, places each row on its line, blank and set-aside lines included
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
        text = as_text(cells)
        lines = self._lines(cells)
        obs = observe_table(
            text,
            file=self.rel,
            batch=self.batch,
            row_start=self.rows,
            lines=lines,
            text_source=True,
            exact=self.opts.exact or None,
        )
        self.rows += cells.num_rows
        self.batch += 1
        return obs

    def cells(self, cells: pa.RecordBatch) -> LinedCells:
        """One batch of binary cells as text, counted and placed as observe does, with its rows' lines."""
        lines = self._lines(cells)
        self.rows += cells.num_rows
        self.batch += 1
        return LinedCells(as_text(cells), lines)

    def _lines(self, cells: pa.RecordBatch) -> Sequence[int]:
        # Each row starts one line after the previous one, plus the newlines inside its cells.
        n = cells.num_rows
        if n == 0:
            return []
        if self.places is not None:
            placed = self.places.starts(cells)
            self.line = self.places.line
            return placed
        multiline = [col for col in cells.columns if holds_newline(col)]
        if not multiline and not self.comment_lines:  # the common case, found by one byte search per column
            starts: Sequence[int] = range(self.line, self.line + n)
            self.line += n
            return starts
        if not multiline:
            return self._past_comments([1] * n)
        step = pa.array([1] * n, pa.int64())
        for col in multiline:
            step = pc.add(step, pc.fill_null(pc.count_substring(col, "\n"), 0))
        if self.comment_lines:
            return self._past_comments(step.to_pylist())
        ends = pc.cumulative_sum(step).to_pylist()
        starts = [self.line] + [self.line + e for e in ends[:-1]]
        self.line += ends[-1]
        return starts

    def _past_comments(self, steps: list[int]) -> list[int]:
        """Row lines when comment lines (emptied by LineGuard, skipped by Arrow) lie between rows."""
        skipped = self.comment_lines
        assert skipped is not None
        starts = []
        line = self.line
        for step in steps:
            while skipped and skipped[0] <= line:
                skipped.popleft()
                line += 1
            starts.append(line)
            line += step
        self.line = line
        return starts


def as_text(cells: pa.RecordBatch) -> pa.RecordBatch:
    """Binary cells viewed as strings: exact and free, for they passed LineGuard's UTF-8 check
    (CsvState.observe tells why)."""
    return pa.RecordBatch.from_arrays([c.view(pa.string()) for c in cells.columns], names=cells.schema.names)


_NEWLINE = re.compile(b"\n")


def holds_newline(arr: pa.Array) -> bool:
    """Whether any value of a binary array holds a newline: one search of its bytes."""
    return _NEWLINE.search(value_view(arr)) is not None
