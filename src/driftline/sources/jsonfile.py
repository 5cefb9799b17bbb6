"""JSON Lines and JSON documents (one array of records, or one value) → observations."""

from __future__ import annotations

import io
from collections.abc import Iterator
from typing import Any, BinaryIO

import orjson

from driftline.observe.observation import Observation
from driftline.observe.records import observe_records
from driftline.sources.base import FileIssue, ReadOptions

_CHUNK = 4 * 1024 * 1024
_BOM = b"\xef\xbb\xbf"
DOCUMENT_LIMIT = 1024**3  # a single JSON document is parsed whole; larger ones should be JSON Lines

Item = Observation | FileIssue


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
    """Collects parsed records into batches of at most batch_rows rows."""

    def __init__(self, rel: str, opts: ReadOptions) -> None:
        self.rel, self.opts = rel, opts
        self.records: list[Any] = []
        self.lines: list[int] | None = []
        self.rows = 0
        self.batch = 0

    def add(self, record: Any, line: int | None) -> Observation | None:
        self.records.append(record)
        if self.lines is not None and line is not None:
            self.lines.append(line)
        else:
            self.lines = None
        return self.flush() if len(self.records) >= self.opts.batch_rows else None

    def flush(self) -> Observation | None:
        if not self.records:
            return None
        obs = observe_records(self.records, file=self.rel, batch=self.batch, row_start=self.rows, lines=self.lines)
        self.rows += len(self.records)
        self.batch += 1
        self.records, self.lines = [], ([] if self.lines is not None else None)
        return obs


def read_jsonl(stream: BinaryIO, rel: str, opts: ReadOptions, *, first_line_offset: int = 0) -> Iterator[Item]:
    """One JSON value per line. Blank lines are skipped; a bad line is reported and skipped."""
    out = _Batcher(rel, opts)
    crlf_noted = False
    for lineno, offset, content in iter_lines(stream, opts.max_record_bytes):
        offset += first_line_offset
        if content is None:
            yield FileIssue(rel, "too-large", f"line longer than {opts.max_record_bytes:,} bytes (--max-record-bytes); skipped", line=lineno, byte_offset=offset)
            continue
        if lineno == 1 and content.startswith(_BOM):
            yield FileIssue(rel, "bom", "UTF-8 byte order mark at the start of the file; ignored", "warning", line=1, byte_offset=0)
            content, offset = content[3:], offset + 3
        if content.endswith(b"\r"):
            content = content[:-1]
            if not crlf_noted:
                crlf_noted = True
                yield FileIssue(rel, "crlf", "CRLF line ends; read as LF", "warning", line=lineno, byte_offset=offset + len(content))
        if not content.strip():
            continue
        try:
            value = orjson.loads(content)
        except orjson.JSONDecodeError as exc:
            msg, _, col, pos = _decode_error(exc, content)
            yield FileIssue(rel, "malformed-json", f"{msg} (column {col}); line skipped", line=lineno, byte_offset=offset + pos)
            continue
        obs = out.add(value, lineno)
        if obs is not None:
            yield obs
    obs = out.flush()
    if obs is not None:
        yield obs


def _looks_like_lines(data: bytes) -> bool:
    lines = [ln for ln in data.splitlines() if ln.strip()]
    if len(lines) < 2:
        return False
    try:
        first = orjson.loads(lines[0])
    except orjson.JSONDecodeError:
        return False
    return isinstance(first, dict)


def read_json(stream: BinaryIO, rel: str, opts: ReadOptions) -> Iterator[Item]:
    """A JSON document: an array gives one record per element, anything else one record.

    A .json file that holds JSON Lines is read as JSON Lines.
    """
    data = stream.read(DOCUMENT_LIMIT + 1)
    if len(data) > DOCUMENT_LIMIT:
        yield FileIssue(rel, "too-large", f"JSON document larger than {DOCUMENT_LIMIT:,} bytes; write it as JSON Lines to scan it")
        return
    start = 0
    if data.startswith(_BOM):
        yield FileIssue(rel, "bom", "UTF-8 byte order mark at the start of the file; ignored", "warning", line=1, byte_offset=0)
        start = 3
    body = data[start:]
    if not body.strip():
        yield FileIssue(rel, "empty", "empty file: no records", "warning", line=1, byte_offset=0)
        return
    try:
        doc = orjson.loads(body)
    except orjson.JSONDecodeError as exc:
        if _looks_like_lines(body):
            yield from read_jsonl(io.BytesIO(body), rel, opts, first_line_offset=start)
            return
        msg, line, col, pos = _decode_error(exc, body)
        yield FileIssue(rel, "malformed-json", f"{msg} (line {line}, column {col}); file not profiled", line=line, byte_offset=start + pos)
        return
    out = _Batcher(rel, opts)
    for record in doc if isinstance(doc, list) else [doc]:
        obs = out.add(record, None)
        if obs is not None:
            yield obs
    obs = out.flush()
    if obs is not None:
        yield obs
