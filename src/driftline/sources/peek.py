"""A cheap look at one file's field names: its head, or its Parquet footer, never a full read.

Dataset discovery (sources/datasets.py) decides which files belong to one table from their
field names; reading every file whole to learn them would cost as much as the scan.  So:

- JSON Lines: the top-level keys of the objects on the first complete lines of the first
  HEAD_BYTES (decompressed), more only to end a first line longer than that (up to
  MAX_HEAD_BYTES);
- a JSON document: the keys of the first elements of its array (or of the object itself);
- CSV/TSV: the header row, as the project's dialect finder reads it from the head
  (names of a file without a header are column_1, column_2, …, as the reader names them);
- Parquet: the top-level column names of the footer's schema (sources/footer.py).

Compressed files are read through the same decompression as the readers (formats.open_stream),
and text in UTF-16/32 (or a single-byte encoding, for CSV) is decoded as encoding.decide says.
A head that cannot be read gives a Peek with a problem in plain words, never an exception.
Each format's record in sources/registry.py names its peek (FormatSpec.peek).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass

import orjson
import pyarrow.parquet as pq

from driftline.core.fileref import FileRef
from driftline.sources.dialect import ROW_NAME_COLUMN, find_dialect, positional_name
from driftline.sources.encoding import decide, decoder
from driftline.sources.footer import top_level_names
from driftline.sources.formats import decode_errors, open_stream

HEAD_BYTES = 64 * 1024  # the head looked at (as much as the encoding decision reads)
MAX_HEAD_BYTES = 1 << 20  # read on to here only to hold a first record whole
HEAD_RECORDS = 50  # JSON records looked at, at most
_BOM = b"\xef\xbb\xbf"


@dataclass(frozen=True, slots=True)
class Peek:
    """The top-level field names a file's head shows (in the order first seen), or why none could be read."""

    fields: tuple[str, ...] = ()
    problem: str | None = None  # the head could not be read: why, in plain words


def peek_lines(ref: FileRef) -> Peek:
    """The keys of the objects on the first lines of a JSON Lines file.

    >>> import tempfile, pathlib
    >>> from driftline.sources.discover import discover
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"id": 1}\\n{"id": 2, "t": 0}\\n')
    >>> peek_lines(discover([d]).files[0])
    Peek(fields=('id', 't'), problem=None)
    """
    return _guarded(ref, lambda head, whole: _json(head, whole, document=False))


def peek_document(ref: FileRef) -> Peek:
    """The keys of the first elements of a JSON document's array (or of the document's object)."""
    return _guarded(ref, lambda head, whole: _json(head, whole, document=True))


def peek_delimited(ref: FileRef, *, tsv: bool) -> Peek:
    """The header row of a CSV/TSV file, as the dialect finder reads it from the head.

    >>> import tempfile, pathlib
    >>> from driftline.sources.discover import discover
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("id;name\\n1;x\\n")
    >>> peek_delimited(discover([d]).files[0], tsv=False)
    Peek(fields=('id', 'name'), problem=None)
    """
    return _guarded(ref, lambda head, whole: _delimited(head, whole, tsv), fallback=True)


def peek_footer(ref: FileRef) -> Peek:
    """The top-level column names of a Parquet file's footer."""
    if ref.compression is not None:
        return Peek(problem=f"a {ref.compression}-compressed Parquet file: Parquet compresses its pages itself")
    return _guarded(ref, None)


def _guarded(ref: FileRef, judge: Callable[[bytes, bool], Peek] | None, *, fallback: bool = False) -> Peek:
    """judge(head, whole) on the file's head, or the footer's names when judge is None; a
    failure to read becomes a Peek with a problem.  fallback: text that is not UTF-8 may be
    read in a single-byte encoding (CSV/TSV; never JSON, RFC 8259 section 8.1)."""
    if ref.is_remote:
        return Peek(problem="an object in a store: its head is not looked at")
    try:
        if judge is None:  # the footer's schema: decoded alone when it can be, else by pyarrow
            names = top_level_names(ref.path)
            return Peek(names if names is not None else tuple(pq.read_schema(ref.path).names))
        head, whole = _head(ref, fallback)
    except decode_errors() as exc:
        return Peek(problem=f"its head cannot be read: {_short(exc)}")
    except Exception as exc:  # noqa: BLE001 - a reader library's own error: the file is loose, the rest goes on
        return Peek(problem=f"its head cannot be read: {type(exc).__name__}: {_short(exc)}")
    return judge(head, whole)


def _short(exc: BaseException) -> str:
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror  # without the absolute path
    text = str(exc).strip().splitlines()
    return text[0][:200] if text else type(exc).__name__


def _head(ref: FileRef, fallback: bool) -> tuple[bytes, bool]:
    """The decompressed head, as UTF-8 text, and whether it is the whole file."""
    with open_stream(ref.path, ref.compression, limit=None) as stream:
        raw = stream.read(HEAD_BYTES)
        whole = len(raw) < HEAD_BYTES
        while not whole and b"\n" not in raw and b"\r" not in raw and len(raw) < MAX_HEAD_BYTES:
            more = stream.read(HEAD_BYTES)
            raw += more
            whole = len(more) < HEAD_BYTES
    enc = decide(raw[:HEAD_BYTES], whole=whole, fallback=fallback)
    if not enc.is_utf8:
        raw = decoder(enc).decode(raw[enc.bom :], whole).encode("utf-8", "surrogateescape")
    return raw.removeprefix(_BOM), whole


def _delimited(head: bytes, whole: bool, tsv: bool) -> Peek:
    if not head.strip():
        return Peek()  # an empty file: no fields, and nothing wrong with its head
    if not whole and b"\n" not in head and b"\r" not in head:
        return Peek(problem=f"its first line is longer than {MAX_HEAD_BYTES:,} bytes")
    finding = find_dialect(head, at_end=whole, tsv=tsv)
    d = finding.dialect
    if d.header == "no":
        return Peek(tuple(positional_name(i) for i in range(finding.width)))
    names = list(finding.names or ())
    if d.header == "row-names":
        names = [ROW_NAME_COLUMN, *names]
    if not names:
        return Peek(problem="no header row could be read")
    return Peek(_unique(names))


def _unique(names: list[str]) -> tuple[str, ...]:
    # as the CSV reader names a repeated column: 'name', then 'name_2', …
    seen: dict[str, int] = {}
    out = []
    for name in names:
        seen[name] = seen.get(name, 0) + 1
        out.append(name if seen[name] == 1 else f"{name}_{seen[name]}")
    return tuple(out)


def _json(head: bytes, whole: bool, document: bool) -> Peek:
    text = head.lstrip()
    if not text:
        return Peek()
    if document and text.startswith(b"["):
        records = _array_head(text.decode("utf-8", "replace"))
        failed = None if records else "its first element is not a whole JSON value within the head"
    else:
        records, failed = _lines_head(head, whole)
        if document and not records and not whole:
            failed = f"a JSON document larger than its first {len(head):,} bytes that is not an array"
    objects = [r for r in records if isinstance(r, dict)]
    if not objects:
        return Peek(problem=failed or "the first records of its head are not JSON objects")
    return Peek(tuple(dict.fromkeys(k for r in objects for k in r)))


def _lines_head(head: bytes, whole: bool) -> tuple[list[object], str | None]:
    """The records of the first complete lines (a whole JSON document in the head counts as one)."""
    lines = head.split(b"\n")
    if not whole:
        lines.pop()  # cut short by the head's end
    records: list[object] = []
    failed = None
    for n, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        try:
            records.append(orjson.loads(line))
        except orjson.JSONDecodeError as exc:
            failed = failed or f"line {n} of its head is not JSON ({str(exc).split(':')[0]})"
            continue
        if len(records) >= HEAD_RECORDS:
            break
    if not records and whole:  # one document over several lines (a .json file, or pretty-printed)
        try:
            return [orjson.loads(head)], None
        except orjson.JSONDecodeError:
            pass
    if not records and not lines:
        failed = f"its first line is longer than {MAX_HEAD_BYTES:,} bytes"
    return records, failed


def _array_head(text: str) -> list[object]:
    """The first whole elements of a JSON array, from the head of the document."""
    dec = json.JSONDecoder()
    at = 1
    out: list[object] = []
    while len(out) < HEAD_RECORDS:
        while at < len(text) and text[at] in " \t\r\n,":
            at += 1
        if at >= len(text) or text[at] == "]":
            break
        try:
            value, at = dec.raw_decode(text, at)
        except ValueError:
            break
        out.append(value)
    return out
