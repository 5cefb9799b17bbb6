"""JSON Lines and JSON documents (one array of records, or one value) → observations."""

from __future__ import annotations

import io
import re
from bisect import bisect_left
from collections.abc import Iterator
from dataclasses import replace
from itertools import accumulate
from typing import Any, BinaryIO

import orjson

from driftline.core import jsonnum
from driftline.core.files import FileIssue
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.core.stagetime import staged
from driftline.core.words import count
from driftline.observe.fast.jsonbatch import observe_json_lines
from driftline.observe.fast.recordgroups import Walked, groups_enabled, walk
from driftline.observe.fast.strprofile import EXACT_ENV, exact_requested  # noqa: F401 - EXACT_ENV re-exported
from driftline.observe.records import observe_records
from driftline.sources.jsonlined import LinedRecords, lined_records

_CHUNK = 4 * 1024 * 1024
_WINDOW_BYTES = 256 * 1024 * 1024  # a window stops growing here, whatever batch_rows asks
_BOM = b"\xef\xbb\xbf"

FAST_MIN_ROWS = 256  # smaller batches take the exact walk: the columnar set-up would cost more
GROUP_MAX_ROWS = 1024  # a file of fewer lines, read in one batch, is walked and observed in a group

Item = Observation | FileIssue | Walked  # Walked: only from a reader asked to group (group=True)


def iter_lines(stream: BinaryIO, max_bytes: int) -> Iterator[tuple[int, int, bytes | None]]:
    """Yield (line number, byte offset of the line, content) per line; content None when too long.

    An over-long line is skipped as it streams by, never held in memory whole.
    """
    lineno, pos, line_start = 0, 0, 0
    buf: list[bytes] = []
    buf_len, skipping = 0, False
    while chunk := stream.read(_CHUNK):
        start = 0
        while True:
            nl = chunk.find(b"\n", start)
            if nl < 0:
                if not skipping:
                    buf.append(chunk[start:])
                    buf_len += len(chunk) - start
                    if buf_len > max_bytes:
                        buf, buf_len, skipping = [], 0, True
                break
            lineno += 1
            piece = chunk[start:nl]
            if skipping or buf_len + len(piece) > max_bytes:
                yield lineno, line_start, None
            else:
                yield lineno, line_start, (b"".join(buf) + piece) if buf else piece
            buf, buf_len, skipping = [], 0, False
            line_start = pos + nl + 1
            start = nl + 1
        pos += len(chunk)
    if buf_len or skipping:
        yield lineno + 1, line_start, None if skipping else b"".join(buf)


def _decode_error(exc: orjson.JSONDecodeError, data: bytes) -> tuple[str, int, int, int]:
    """(message, line, column, byte offset) of a parse error, from its character position."""
    try:
        byte_pos = len(data.decode("utf-8")[: exc.pos].encode("utf-8"))
    except UnicodeDecodeError:
        byte_pos = exc.pos
    return exc.msg, exc.lineno, exc.colno, byte_pos


class _Batcher:
    """Collects parsed records into batches: a batch ends at batch_rows records, or once its
    records' input bytes (each with its line end or separator) reach batch_bytes."""

    def __init__(self, rel: str, opts: ReadOptions, group: bool = False) -> None:
        self.rel, self.opts = rel, opts
        # a file read in one batch is handed on walked, to be observed with other small files (recordgroups)
        self.defer = group and groups_enabled() and not (opts.exact or exact_requested())
        self.records: list[Any] = []
        self.lines: list[int] | None = []
        self.bytes = 0  # input bytes of the records held
        self.rows = 0
        self.batch = 0

    def add(self, record: Any, line: int | None, size: int = 0) -> Observation | None:
        self.records.append(record)
        self.bytes += size
        if self.lines is not None and line is not None:
            self.lines.append(line)
        else:
            self.lines = None
        full = len(self.records) >= self.opts.batch_rows or self.bytes >= self.opts.batch_bytes
        return self.flush() if full else None

    def flush(self) -> Observation | None:
        if not self.records:
            return None
        obs = observe_records(
            self.records,
            file=self.rel,
            batch=self.batch,
            row_start=self.rows,
            lines=self.lines,
            max_paths=self.opts.max_paths,
            shapes=True,
        )
        self.rows += len(self.records)
        self.batch += 1
        self.records, self.lines = [], ([] if self.lines is not None else None)
        self.bytes = 0
        return obs

    def last(self, size: int | None = None) -> Observation | Walked | None:
        """The last batch: observed now, or walked only when it is the file's one batch and the
        reader groups small files (size: the file's input bytes, when the batch did not count them)."""
        if not (self.defer and self.batch == 0 and self.records):
            return self.flush()
        got = walk(
            self.records,
            file=self.rel,
            batch=0,
            row_start=self.rows,
            lines=self.lines,
            max_paths=self.opts.max_paths,
            shapes=True,
            size=self.bytes if size is None else size,
        )
        self.rows += len(self.records)
        self.batch += 1
        self.records, self.lines, self.bytes = [], ([] if self.lines is not None else None), 0
        return got

    def observe_all(self, records: list[Any]) -> Observation:
        """One batch of records gathered elsewhere (a JSON array read element by element)."""
        self.records, self.lines = records, None
        obs = self.flush()
        assert obs is not None
        return obs

    def took(self, obs: Observation) -> None:
        """A batch observed elsewhere (the columnar path) in this batcher's sequence."""
        self.rows += obs.rows
        self.batch += 1


class _Window:
    """Consecutive lines of normal length (without their newline), from first_line at offset.

    full: the window stopped at the line whose bytes reached the batch's byte budget.
    """

    __slots__ = ("items", "first_line", "offset", "full")

    def __init__(self, items: list[bytes], first_line: int, offset: int, full: bool = False) -> None:
        self.items, self.first_line, self.offset, self.full = items, first_line, offset, full

    def __len__(self) -> int:
        return len(self.items)

    def lines(self) -> Iterator[tuple[int, int, bytes]]:
        """(line number, byte offset, content) per line, as iter_lines yields them."""
        offset = self.offset
        for i, content in enumerate(self.items):
            yield self.first_line + i, offset, content
            offset += len(content) + 1


class _TooLong:
    """A line longer than the limit, already consumed: its number and byte offset."""

    __slots__ = ("line", "offset")

    def __init__(self, line: int, offset: int) -> None:
        self.line, self.offset = line, offset


class _Lines:
    """The lines of a stream in bulk, split as iter_lines splits them, without a Python step per line.

    peek(k) gives the next run of at most k lines of normal length (a _Window), or a
    _TooLong for an over-long next line (consumed, and never held whole once it passes
    the buffer), or None at the end.  advance(m) consumes m lines of the last window.
    """

    def __init__(self, stream: BinaryIO, max_bytes: int, first_line_offset: int = 0) -> None:
        self.stream, self.max = stream, max_bytes
        self.items: list[bytes] = []  # complete lines not yet consumed, from index k on
        self.k = 0
        self.held = 0  # bytes in items[k:]
        self.tail = b""  # the start of a line whose newline has not been read yet
        self.offset = first_line_offset  # stream offset of items[k] (plus the caller's shift)
        self.lineno = 0  # lines consumed so far
        self.eof = False

    @staged("read")
    def _fill(self) -> None:
        chunk = self.stream.read(_CHUNK)
        if not chunk:
            self.eof = True
            if self.tail:  # a last line without a newline still counts, as in iter_lines
                self._push([self.tail])
                self.tail = b""
            return
        if self.k > 4096:
            del self.items[: self.k]
            self.k = 0
        parts = (self.tail + chunk).split(b"\n") if self.tail else chunk.split(b"\n")
        self.tail = parts.pop()
        self._push(parts)

    def _push(self, parts: list[bytes]) -> None:
        self.items.extend(parts)
        self.held += sum(map(len, parts)) + len(parts)

    @staged("read")
    def peek(self, k: int, room: int = 2**62) -> _Window | _TooLong | None:
        """The next lines: at most k, through the first one whose bytes (with its newline)
        bring the window's total to room."""
        while True:
            avail = len(self.items) - self.k
            if avail:
                if len(self.items[self.k]) > self.max:
                    at = self.offset
                    self.advance(1)
                    return _TooLong(self.lineno, at)
                if (
                    avail >= k
                    or self.eof
                    or self.held > _WINDOW_BYTES
                    or self.held >= room
                    or len(self.tail) > self.max
                ):
                    break  # (an over-long line is coming: hand out what is before it first)
            elif self.eof:
                return None
            elif len(self.tail) > self.max:
                at = self.offset
                self._skip_long_line()
                return _TooLong(self.lineno, at)
            self._fill()
        take = self.items[self.k : self.k + k]
        if max(map(len, take)) > self.max:  # stop before an over-long line
            take = take[: next(j for j, v in enumerate(take) if len(v) > self.max)]
        full = False
        if sum(map(len, take)) + len(take) >= room:
            ends = list(accumulate(len(v) + 1 for v in take))
            take = take[: bisect_left(ends, room) + 1]
            full = True
        return _Window(take, self.lineno + 1, self.offset, full)

    def ends(self, w: _Window) -> bool:
        """Whether w holds every line left in the stream."""
        return self.eof and not self.tail and self.k + len(w) == len(self.items)

    @staged("read")
    def advance(self, m: int) -> None:
        gone = self.items[self.k : self.k + m]
        size = sum(map(len, gone)) + m
        self.offset += size
        self.held -= size
        self.k += m
        self.lineno += m

    def _skip_long_line(self) -> None:
        """Drop a line past the limit as it streams by, through its newline."""
        self.lineno += 1
        self.offset += len(self.tail)
        self.tail = b""
        while chunk := self.stream.read(_CHUNK):
            nl = chunk.find(b"\n")
            if nl < 0:
                self.offset += len(chunk)
                continue
            self.offset += nl + 1
            parts = chunk[nl + 1 :].split(b"\n")
            self.tail = parts.pop()
            self._push(parts)
            return
        self.eof = True


def read_jsonl(
    stream: BinaryIO,
    rel: str,
    opts: ReadOptions,
    *,
    first_line_offset: int = 0,
    start: tuple[int, int, int] = (0, 0, 0),
    lines_read: list[int] | None = None,
    blank_read: list[int] | None = None,
    group: bool = False,
) -> Iterator[Item]:
    """One JSON value per line. Blank lines are skipped; a bad line is reported and skipped.

    A batch of lines that are all objects goes to the columnar path (observe.jsonbatch),
    which answers exactly or declines; everything else takes the exact walk line by line.
    start is (lines, rows, batches) before the stream, for a part of a file (jsonsplit);
    lines_read, when given, receives the number of lines the stream held; blank_read, the
    number of blank lines skipped (for the reconciliation of lines, linecount.py).  group: a file
    read in one batch of the exact walk is yielded walked (observe/fast/recordgroups.Walked), for
    the scan to observe it with other small files.
    """
    out = _Batcher(rel, opts, group)
    out.rows, out.batch = start[1], start[2]
    src = _Lines(stream, opts.max_record_bytes, first_line_offset)
    src.lineno = start[0]
    fast = not (opts.exact or exact_requested())
    hint = None
    blanks = 0
    crlf_noted = False
    while True:
        want = opts.batch_rows - len(out.records)
        got = src.peek(want, opts.batch_bytes - out.bytes)
        if got is None:
            break
        if isinstance(got, _TooLong):
            msg = f"line longer than {count(opts.max_record_bytes, 'byte')} (--max-record-bytes); skipped"
            yield FileIssue(rel, "too-large", msg, line=got.line, byte_offset=got.offset)
            continue
        whole = len(got) == want or got.full or src.ends(got)
        # a small file whole in this window is walked and observed with other small files instead:
        # on nested records the grouped walk costs less than the columnar set-up (scripts/bench --small-json)
        grouped = out.defer and out.batch == 0 and len(got) < GROUP_MAX_ROWS and src.ends(got)
        if fast and not out.records and len(got) >= FAST_MIN_ROWS and whole and not grouped:
            try:
                done = observe_json_lines(
                    got.items,
                    file=rel,
                    batch=out.batch,
                    row_start=out.rows,
                    first_line=got.first_line,
                    hint=hint,
                    max_paths=opts.max_paths,
                )
            except Exception:  # the fast path may only decline, never lose rows: the walk decides
                done = None
            if done is not None:
                obs, hint = done
                out.took(obs)
                src.advance(len(got))
                yield obs
                continue
        for lineno, offset, content in got.lines():
            size = len(content) + 1  # the line as read, with its newline: as the window counts it
            if lineno == 1 and content.startswith(_BOM):
                yield FileIssue(
                    rel,
                    "bom",
                    "UTF-8 byte order mark at the start of the file; ignored",
                    "warning",
                    line=1,
                    byte_offset=0,
                )
                content, offset = content[3:], offset + 3
            if content.endswith(b"\r"):
                content = content[:-1]
                if not crlf_noted:
                    crlf_noted = True
                    yield FileIssue(
                        rel,
                        "crlf",
                        "CRLF line ends; read as LF",
                        "warning",
                        line=lineno,
                        byte_offset=offset + len(content),
                    )
            if not content.strip():
                blanks += 1
                continue
            try:
                value = jsonnum.loads(content)
            except orjson.JSONDecodeError as exc:
                msg, _, col, pos = _decode_error(exc, content)
                yield FileIssue(
                    rel, "malformed-json", f"{msg} (column {col}); line skipped", line=lineno, byte_offset=offset + pos
                )
                continue
            added = out.add(value, lineno, size)
            if added is not None:
                yield added
        src.advance(len(got))
    last = out.last()
    if last is not None:
        yield last
    if lines_read is not None:
        lines_read.append(src.lineno - start[0])
    if blank_read is not None:
        blank_read.append(blanks)


def _looks_like_lines(data: bytes) -> bool:
    lines = [ln for ln in data.splitlines() if ln.strip()]
    if len(lines) < 2:
        return False
    try:
        first = orjson.loads(lines[0])
    except orjson.JSONDecodeError:
        return False
    return isinstance(first, dict)


def read_json(stream: BinaryIO, rel: str, opts: ReadOptions, group: bool = False) -> Iterator[Item]:
    """A JSON document: an array gives one record per element, anything else one record.

    A document of at most batch_bytes is parsed whole.  A larger array is read element by
    element (array_elements), one batch at a time, so memory follows the batch and not the
    file; a larger document that is not an array is one record, read whole up to
    max_record_bytes.  A .json file that holds JSON Lines is read as JSON Lines.  group: as
    read_jsonl's.
    """
    whole = max(opts.batch_bytes, opts.max_record_bytes)
    data = stream.read(whole + 1)
    start = 0
    if data.startswith(_BOM):
        yield FileIssue(
            rel, "bom", "UTF-8 byte order mark at the start of the file; ignored", "warning", line=1, byte_offset=0
        )
        start = 3
    first = _first_byte(data, start)
    if len(data) > opts.batch_bytes and first == ord("["):
        yield from _stream_array(data, stream, start, rel, opts)
        return
    if len(data) > whole:
        if first == ord("{") and _first_line_is_object(data, start):
            chained = io.BufferedReader(_Chain(data[start:], stream), buffer_size=1 << 20)
            yield from read_jsonl(chained, rel, opts, first_line_offset=start, group=group)
            return
        yield FileIssue(
            rel,
            "too-large",
            f"JSON document larger than {whole:,} bytes that is not an array: it is "
            "one record (--max-record-bytes); write it as JSON Lines or as an array to scan it",
            line=1,
            byte_offset=start,
        )
        return
    body = data[start:]
    if not body.strip():
        yield FileIssue(rel, "empty", "empty file: no records", "warning", line=1, byte_offset=0)
        return
    try:
        doc = jsonnum.loads(body)
    except orjson.JSONDecodeError as exc:
        if _looks_like_lines(body):
            yield from read_jsonl(io.BytesIO(body), rel, opts, first_line_offset=start, group=group)
            return
        msg, line, col, pos = _decode_error(exc, body)
        yield FileIssue(
            rel,
            "malformed-json",
            f"{msg} (line {line}, column {col}); file not profiled",
            line=line,
            byte_offset=start + pos,
        )
        return
    out = _Batcher(rel, opts, group)
    for record in doc if isinstance(doc, list) else [doc]:
        obs = out.add(record, None)
        if obs is not None:
            yield obs
    last = out.last(size=len(body))
    if last is not None:
        yield last


def _first_byte(data: bytes, start: int) -> int | None:
    m = _SPACE.match(data, start)
    end = m.end() if m else start
    return data[end] if end < len(data) else None


def _first_line_is_object(data: bytes, start: int) -> bool:
    nl = data.find(b"\n", start)
    if nl < 0:
        return False
    try:
        return isinstance(orjson.loads(data[start:nl]), dict)
    except orjson.JSONDecodeError:
        return False


class _Chain(io.RawIOBase):
    """Bytes already read, then the rest of a stream."""

    def __init__(self, head: bytes, rest: BinaryIO) -> None:
        self._head, self._rest = memoryview(head), rest

    def readable(self) -> bool:
        return True

    def readinto(self, buf: Any) -> int:
        if self._head:
            n = min(len(buf), len(self._head))
            buf[:n] = self._head[:n]
            self._head = self._head[n:]
            return n
        data = self._rest.read(len(buf))
        buf[: len(data)] = data
        return len(data)


# JSON's whitespace (RFC 8259 section 2).  At the array's level a run stops at a comma or
# a bracket; inside an element it takes commas too, and whole strings (escapes included)
# either way, so a step of the scan is a bracket, not a character.
_SPACE = re.compile(rb"[ \t\n\r]*")
_STRING = rb'"[^"\\]*(?:\\.[^"\\]*)*"'
_RUN_TOP = re.compile(rb'(?:[^\[\]{}",]+|' + _STRING + rb")*", re.S)
_RUN_IN = re.compile(rb'(?:[^\[\]{}"]+|' + _STRING + rb")*", re.S)
_ARRAY_CHUNK = 4 * 1024 * 1024


def array_elements(data: bytes, stream: BinaryIO, at: int, max_bytes: int) -> Iterator[tuple[int, int, bytes] | str]:
    """(file offset, line, text) of each element of the array whose '[' is at offset `at` of
    data (the file's first bytes; the stream holds the rest), in order.  A str instead says
    what is wrong, and ends the elements: one longer than max_bytes, an array the file
    does not close, or text after it.  Only the current element and one chunk are held.

    >>> [(o, ln, t) for o, ln, t in array_elements(b' [1, {"a": [2, "]"]},\\n "x,y" ] ', io.BytesIO(), 1, 100)]
    [(2, 1, b'1'), (5, 1, b'{"a": [2, "]"]}'), (23, 2, b'"x,y"')]
    """
    buf, base = data, 0  # base: file offset of buf[0]
    line, counted = 1, 0  # the line at buf[counted]
    i = at + 1
    while True:
        i = _SPACE.match(buf, i).end()  # type: ignore[union-attr]
        if i == len(buf):
            more = stream.read(_ARRAY_CHUNK)
            if not more:
                yield "the array is not closed: the file ends first"
                return
            line += buf.count(b"\n", counted, i)
            buf, base, i, counted = buf[i:] + more, base + i, 0, 0
            continue
        if buf[i] == ord("]"):
            if buf[i + 1 :].strip() or stream.read(_ARRAY_CHUNK).strip():
                yield "text after the end of the array"
            return
        begin, depth = i, 0
        line += buf.count(b"\n", counted, begin)
        counted = begin
        while True:
            i = (_RUN_TOP if depth == 0 else _RUN_IN).match(buf, i).end()  # type: ignore[union-attr]
            if i - begin > max_bytes:
                yield f"an element longer than {count(max_bytes, 'byte')} (--max-record-bytes)"
                return
            if i == len(buf) or buf[i] == ord('"'):  # the text ends, or inside a string: read on
                more = stream.read(_ARRAY_CHUNK)
                if not more:
                    yield "the array is not closed: the file ends first"
                    return
                buf, base, i, begin, counted = buf[begin:] + more, base + begin, i - begin, 0, 0
                continue
            c = buf[i]
            if c in b"[{":
                depth += 1
            elif c in b"]}":
                if depth == 0:  # the array's own ']' ends its last element
                    break
                depth -= 1
            elif depth == 0:  # a comma between elements
                break
            i += 1
        yield base + begin, line, buf[begin:i].rstrip(b" \t\n\r")
        if buf[i] == ord(","):
            i += 1


def _stream_array(data: bytes, stream: BinaryIO, at: int, rel: str, opts: ReadOptions) -> Iterator[Item]:
    """The elements of a large array as records, a batch at a time: a batch's elements are
    parsed in one call, and only when one of them is not JSON one by one, to say which."""
    out = _Batcher(rel, opts)
    pieces: list[bytes] = []
    where: list[tuple[int, int]] = []  # (offset, line) of each piece
    size = 0
    problem: str | None = None
    start = _SPACE.match(data, at).end()  # type: ignore[union-attr]
    for got in array_elements(data, stream, start, opts.max_record_bytes):
        if isinstance(got, str):
            problem = got
            break
        pieces.append(got[2])
        where.append(got[:2])
        size += len(got[2]) + 1  # with its separator
        if len(pieces) >= opts.batch_rows or size >= opts.batch_bytes:
            values, bad = _parse_elements(pieces, where, rel)
            if values:
                yield out.observe_all(values)
            if bad is not None:
                yield replace(bad, row=out.rows)
                return
            pieces, where, size = [], [], 0
    values, bad = _parse_elements(pieces, where, rel)
    if values:
        yield out.observe_all(values)
    if bad is not None:
        yield replace(bad, row=out.rows)
    elif problem is not None:
        yield FileIssue(rel, "malformed-json", f"{problem}; the elements before it were profiled", row=out.rows)


def _parse_elements(pieces: list[bytes], where: list[tuple[int, int]], rel: str) -> tuple[list[Any], FileIssue | None]:
    """The values of the pieces, and the problem of the first one that is not JSON (the values
    stop before it)."""
    if not pieces:
        return [], None
    try:
        values = jsonnum.loads(b"[" + b",".join(pieces) + b"]")
        if isinstance(values, list) and len(values) == len(pieces):
            return values, None
    except orjson.JSONDecodeError:
        pass
    values = []
    for piece, (offset, line) in zip(pieces, where, strict=True):
        try:
            values.append(jsonnum.loads(piece))
        except orjson.JSONDecodeError as exc:
            msg, eline, col, pos = _decode_error(exc, piece)
            return values, FileIssue(
                rel,
                "malformed-json",
                f"{msg} (line {line + eline - 1}); rest of the file not profiled",
                line=line + eline - 1,
                byte_offset=offset + pos,
            )
    return values, None


def read_json_values(
    stream: BinaryIO, rel: str, opts: ReadOptions, *, document: bool
) -> Iterator[list[Any] | LinedRecords]:
    """The records of a JSON Lines file (document False) or a JSON document, parsed as the scan
    parses values (observe.jsonnum: exact integers and decimals), in lists of at most
    opts.batch_rows (recommendation/raw casts them).  A line that does not parse is left out, as the
    scan leaves it out (and reports it); a document that does not parse is read as lines.
    JSON Lines come as LinedRecords (jsonlined.py): with their lines, and typed by Arrow where exact.
    """
    if not document:
        yield from lined_records(stream.read(), opts.batch_rows, fast=not (opts.exact or exact_requested()))
        return
    records = list(_values(stream.read(), document))
    for start in range(0, len(records), opts.batch_rows):
        yield records[start : start + opts.batch_rows]


def _values(data: bytes, document: bool) -> Iterator[Any]:
    data = data.removeprefix(_BOM)
    if document:
        try:
            doc = jsonnum.loads(data)
        except orjson.JSONDecodeError:
            doc = None
        if doc is not None or not data.strip():
            yield from doc if isinstance(doc, list) else ([] if doc is None else [doc])
            return
    for line in data.split(b"\n"):
        line = line.removesuffix(b"\r")
        if line.strip():
            try:
                yield jsonnum.loads(line)
            except orjson.JSONDecodeError:
                continue
