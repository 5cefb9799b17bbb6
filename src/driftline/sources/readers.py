"""Read one FileRef completely with the reader the registry gives its format; never raise for bad content."""

from __future__ import annotations

import hashlib
import io
from collections.abc import Callable, Iterator, Sequence
from dataclasses import replace
from typing import Any

import pyarrow as pa

from driftline.core.fileref import FileRef, file_changed
from driftline.core.files import FileIssue, FileResult, file_result
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.core.textfile import Dialect, TextEncoding
from driftline.observe import thinning
from driftline.observe.fast.bulk import Batch, observe_batches
from driftline.observe.fast.recordgroups import Walked, observe_walked
from driftline.observe.thinning import Thinner, thin
from driftline.sources.csvfile import LinedCells
from driftline.sources.encoding import TextStream
from driftline.sources.formats import CorruptStream, CountingRaw, IgnoredTail, LimitExceeded, open_stream
from driftline.sources.linecount import LineTally, jsonl_issue
from driftline.sources.registry import SPECS, FormatSpec
from driftline.sources.remote import (
    ObjectVersion,
    object_changed,
    open_random,
    open_random_pinned,
    open_stream_pinned,
    open_stream_remote,
)


class _SafeStream(CountingRaw):
    """Turns a decompression or I/O failure into end of data, remembering what happened.

    Readers then finish normally and keep every row read before the failure.
    """

    def __init__(self, inner: Any) -> None:
        super().__init__(inner)
        self.failure: BaseException | None = None

    def _read(self, n: int) -> bytes:
        if self.failure is not None:
            return b""
        try:
            # read1: one underlying read, so bytes decoded before a failure are not dropped
            return getattr(self._inner, "read1", self._inner.read)(n)
        except Exception as exc:  # OSError, EOFError, zlib/lzma/zstd errors, LimitExceeded, MemoryError…
            self.failure = exc
            return b""


def _describe_failure(exc: BaseException, compression: str | None) -> tuple[str, str]:
    if isinstance(exc, LimitExceeded):
        return "too-large", f"{exc}; rest of the file not profiled"
    if isinstance(exc, CorruptStream):
        return "corrupt", f"{exc}; rows before it were profiled"
    if isinstance(exc, EOFError) or "end" in str(exc).lower() and compression:
        return "truncated", f"{compression or 'file'} data ends early ({exc}); rows before it were profiled"
    if isinstance(exc, PermissionError):
        return "unreadable", "permission denied"
    if isinstance(exc, FileNotFoundError):
        return "vanished", "the file was removed after it was found"
    if isinstance(exc, OSError) and exc.strerror:
        return "unreadable", f"read failed: {exc.strerror}"  # without the absolute path
    return "unreadable", f"read failed: {exc}"


def read_values(
    ref: FileRef, batch_rows: int, base: ReadOptions | None = None
) -> Iterator[list[Any] | pa.RecordBatch | LinedCells]:
    """The values of the rows read_file reads from a file (local or an object), at most batch_rows at a time, for
    casting them (recommendation/raw): lists of parsed JSON records, Arrow batches of typed columns, or
    (the format's text_cells) batches of text cells with the line each row starts on.  The same
    reader, encoding and dialect as read_file with default options; the problems are read_file's
    to report, and a file that cannot be read at all raises. base: the scan's read options (encoding,
    delimiter, dialect pins), when not the defaults."""
    spec = SPECS[ref.format]
    opts = replace(base or ReadOptions(), batch_rows=batch_rows, batch_bytes=_LARGEST_BATCH)
    if spec.read is None:  # an object is read with ranged GETs, as read_file reads it
        yield from spec.values(open_random(ref.path) if ref.is_remote else ref.path, ref.rel, opts)
        return
    opened = open_stream_remote(ref.path, ref.compression, limit=None) if ref.is_remote else None
    with opened or open_stream(ref.path, ref.compression, limit=None) as stream:
        yield from spec.values(TextStream(stream, spec.json_text).stream, ref.rel, opts)


_LARGEST_BATCH = 2**30  # batch_bytes never ends a batch of values before batch_rows does (core/ranges.py's highest)


def read_file(ref: FileRef, opts: ReadOptions, *, digest: bool = False) -> FileResult:
    """Read a whole file into a FileResult. Problems become FileIssues; nothing is raised."""
    return read_files([ref], opts, digest=digest)[0]


def read_files(
    refs: Sequence[FileRef], opts: ReadOptions, *, digest: bool = False, before: Callable[[FileRef], None] | None = None
) -> list[FileResult]:
    """Read files in order, each as read_file would; the batches of Parquet files, and the records
    of JSON files read in one batch, are observed together, a group of at most about batch_rows rows
    at a time (observe.bulk, observe.fast.recordgroups).

    before, when given, is called with each file just before it is read (progress).
    """
    pending = _Pending(opts)
    reads = []
    for ref in refs:
        if before:
            before(ref)
        reads.append(_read_one(ref, opts, pending))
    pending.flush()
    results = [r.finish(pending) for r in reads]
    return [_with_digest(r, ref.path) for r, ref in zip(results, refs, strict=True)] if digest else results


class _Pending:
    """Batches waiting to be observed together: Parquet batches (observe.bulk) and the walked
    records of JSON files read in one batch (observe.fast.recordgroups).  A group is observed
    once it holds about batch_rows rows or batch_bytes bytes: memory stays bounded."""

    def __init__(self, opts: ReadOptions) -> None:
        self._limit = opts.batch_rows
        self._byte_limit = opts.batch_bytes
        self._exact = opts.exact
        self._batches: list[tuple[int, Batch]] = []
        self._walked: list[tuple[int, Walked]] = []
        self._rows = 0
        self._bytes = 0
        self._tickets = 0
        self.done: dict[int, Observation | Exception] = {}  # ticket -> its observation, or what went wrong

    def add(self, batch: Batch) -> int:
        ticket = self._ticket()
        self._batches.append((ticket, batch))
        self._grow(batch.data.num_rows, batch.data.nbytes)
        return ticket

    def add_walked(self, walked: Walked) -> int:
        ticket = self._ticket()
        self._walked.append((ticket, walked))
        # parsed records and their walk hold many times their text: a group of them ends sooner
        self._grow(walked.rows, walked.size * _WALKED_WEIGHT)
        return ticket

    def _ticket(self) -> int:
        self._tickets += 1
        return self._tickets - 1

    def _grow(self, rows: int, size: int) -> None:
        self._rows += rows
        self._bytes += size
        if self._rows >= self._limit or self._bytes >= self._byte_limit:
            self.flush()

    def flush(self) -> None:
        if self._batches:
            tickets, batches = zip(*self._batches, strict=True)
            try:
                got: list[Observation | Exception] = list(observe_batches(batches, exact=self._exact))
            except Exception:  # a bug in one batch must not cost the others: observe them one by one
                got = [_observe_one(b, self._exact) for b in batches]
            self.done.update(zip(tickets, got, strict=True))
        if self._walked:
            tickets, walked = zip(*self._walked, strict=True)
            try:
                got = list(observe_walked(walked))
            except Exception:  # as above: each alone, by the reference walk
                got = [_observe_alone(w) for w in walked]
            self.done.update(zip(tickets, got, strict=True))
        self._batches, self._walked, self._rows, self._bytes = [], [], 0, 0


_WALKED_WEIGHT = 16  # a walked file counts as 16 times its input bytes against batch_bytes (4 MB of JSON a group)


def _observe_one(b: Batch, exact: bool) -> Observation | Exception:
    try:
        return observe_batches([b], exact=exact)[0]
    except Exception as exc:
        return exc


def _observe_alone(w: Walked) -> Observation | Exception:
    try:
        return w.alone()
    except Exception as exc:
        return exc


class _Read:
    """One file's reading so far: observations (or tickets of batches still pending) and issues."""

    def __init__(self, ref: FileRef) -> None:
        self.ref = ref
        self.parts: list[Observation | int] = []
        self.issues: list[FileIssue] = []
        self.declared: dict[str, str] | None = None
        self.dialect: Dialect | None = None
        self.encoding: TextEncoding | None = None
        self.complete = True
        self.opened = True  # False: the file could not even be opened; nothing more is checked
        self.thinner = Thinner()  # a stream's observations, summarised in blocks past FILE_BATCHES
        self.version: ObjectVersion | None = None  # an object's version when opened (s3://)

    def fail(self, exc: BaseException) -> None:
        self.complete = False
        self.issues.append(
            FileIssue(self.ref.rel, "internal", f"unexpected {type(exc).__name__}: {exc}; please report this file")
        )

    def not_opened(self, issue: FileIssue) -> None:
        self.complete, self.opened = False, False
        self.issues.append(issue)

    def finish(self, pending: _Pending) -> FileResult:
        if not self.opened:
            return file_result(self.ref, [], self.issues, complete=False, dialect=self.dialect)
        observations: list[Observation] = []
        unobserved: dict[str, tuple[str, int]] = {}  # column -> (why, first row of its first batch)
        for part in self.parts:
            got = pending.done[part] if isinstance(part, int) else part
            if isinstance(got, Exception):
                self.fail(got)  # as if the reader had raised there: the batches before it are kept
                break
            observations.append(got)
            for name, why in got.unobserved:
                unobserved.setdefault(name, (why, got.row_start))
        blocks, span = self.thinner.result()
        if blocks:  # a stream's observations, summarised as they came
            observations = list(blocks)
        elif len(observations) > thinning.FILE_BATCHES:
            blocks, span = thin(observations)
            observations = list(blocks)
        ref, issues = self.ref, self.issues
        issues.extend(_unobserved_issue(ref.rel, name, why, row) for name, (why, row) in unobserved.items())
        if not observations and not issues and ref.size == 0:
            issues.append(FileIssue(ref.rel, "empty", "empty file: no rows", "warning", line=1, byte_offset=0))
        if (
            not observations
            and ref.size
            and SPECS[ref.format].header_row
            and not any(i.severity == "error" for i in issues)
        ):
            unread = nothing_read(ref)
            if unread is not None:
                self.complete = False
                issues.append(unread)
        change = self._changed()
        if change is not None:
            self.complete = False
            issues.append(FileIssue(ref.rel, "changed", change))
        return file_result(
            ref,
            observations,
            issues,
            declared=self.declared,
            complete=self.complete,
            dialect=self.dialect,
            encoding=self.encoding,
            span=span,
        )

    def _changed(self) -> str | None:
        ref = self.ref
        if ref.is_remote:  # against the version opened: one HEAD after the read
            return object_changed(ref.path, ref.size, ref.mtime_ns, self.version) if self.version else None
        if any(i.kind == "vanished" for i in self.issues):
            return None
        return file_changed(ref)


def _unobserved_issue(rel: str, column: str, why: str, row: int) -> FileIssue:
    """One warning per column a file's batches left out: the other columns were profiled."""
    return FileIssue(
        rel, "unsupported-type", f"column {column!r} not profiled: {why}; the other columns are", "warning", row=row
    )


def nothing_read(ref: FileRef, limit: int = 64 * 2**20) -> FileIssue | None:
    """A CSV/TSV file read as a header and no rows, although a line after its first holds data:
    a quote opened in the header and never closed takes every row into one column name
    (RFC 4180 section 2, rule 6), which no reader reports.  None when the file is a header only
    (or cannot be read again: the read already reported why)."""
    if ref.is_remote:
        return None
    try:
        with open_stream(ref.path, ref.compression, limit=limit) as fh:
            in_first_line = True
            while chunk := fh.read(1 << 20):
                if in_first_line:
                    nl = chunk.find(b"\n")
                    if nl < 0:
                        continue
                    chunk, in_first_line = chunk[nl + 1 :], False
                if chunk.strip():
                    break
            else:
                return None
    except Exception:  # noqa: BLE001 - unreadable now: the read itself reported what it met
        return None
    return FileIssue(
        ref.rel,
        "nothing-read",
        f"no row was read from {ref.size:,} bytes of more than one line: "
        "a quote opened in the header and never closed takes every row into a column name",
        line=2,
    )


def _read_one(ref: FileRef, opts: ReadOptions, pending: _Pending) -> _Read:
    read = _Read(ref)
    spec = SPECS[ref.format]
    try:
        if spec.read is None:
            _read_random(ref, spec, opts, pending, read)
        else:
            _read_stream(ref, spec, opts, pending, read)
    except Exception as exc:  # a reader bug must not stop the scan of the other files
        read.fail(exc)
    return read


def _read_random(ref: FileRef, spec: FormatSpec, opts: ReadOptions, pending: _Pending, read: _Read) -> None:
    """A format read from its path with random access (Parquet's footer and column chunks):
    the declared schema (a dict), FileIssues and observe.bulk Batches, observed in groups."""
    assert spec.read_path is not None
    if ref.compression is not None:
        read.complete = False
        read.issues.append(
            FileIssue(
                ref.rel,
                "unsupported",
                f"{ref.compression}-compressed Parquet files are not read; Parquet compresses its pages itself",
            )
        )
        return
    source: Any = ref.path
    if ref.is_remote:  # random access: the footer and column chunks come as ranged GETs
        try:
            source, read.version = open_random_pinned(ref.path)
        except OSError as exc:
            read.not_opened(FileIssue(ref.rel, "unreadable", f"cannot open: {exc}"))
            return
    for item in spec.read_path(source, ref.rel, opts):
        if isinstance(item, dict):
            read.declared = item
        elif isinstance(item, FileIssue):
            read.issues.append(item)
            read.complete = read.complete and item.severity != "error"
        else:
            read.parts.append(pending.add(item))


def _read_stream(ref: FileRef, spec: FormatSpec, opts: ReadOptions, pending: _Pending, read: _Read) -> None:
    assert spec.read is not None
    notes: list[IgnoredTail] = []
    try:
        limit, ratio = opts.max_decompressed_bytes, opts.max_decompression_ratio
        if ref.is_remote:
            raw, read.version = open_stream_pinned(ref.path, ref.compression, limit=limit, ratio=ratio)
        else:
            raw = open_stream(ref.path, ref.compression, limit=limit, ratio=ratio, notes=notes)
    except OSError as exc:
        kind, msg = _describe_failure(exc, None)
        read.not_opened(FileIssue(ref.rel, kind, f"cannot open: {msg}"))
        return
    safe = _SafeStream(raw)
    with io.BufferedReader(safe, buffer_size=1 << 20) as stream:
        text = TextStream(stream, spec.json_text, opts.encoding)
        read.encoding = text.encoding
        read.issues.extend(text.issues(ref.rel))
        # JSON Lines: line feeds counted apart, reconciled with rows, reported lines and blank lines
        tally = LineTally(text.stream, "lines") if spec.count_lines else None
        blanks: list[int] = []
        rows = 0
        for item in spec.read(tally or text.stream, ref.rel, opts, blanks):
            if isinstance(item, Walked):  # a file read in one batch: observed with other small files
                rows += item.rows
                read.parts.append(pending.add_walked(item))
            elif isinstance(item, Dialect):
                read.dialect = item
            elif isinstance(item, FileIssue):
                # The readers count bytes of the UTF-8 text they see, which are not the file's
                # when it was transcoded: only the line is kept then.
                read.issues.append(replace(item, byte_offset=None) if text.transcoded else item)
            else:
                rows += item.rows
                read.thinner.add(item)
        read.issues.extend(text.transcoding_issues(ref.rel))
    if tally is not None and blanks:
        unaccounted = jsonl_issue(ref.rel, tally, rows, blanks[0], read.issues)
        if unaccounted is not None:
            read.issues.append(unaccounted)
    if safe.failure is not None:
        read.complete = False
        kind, msg = _describe_failure(safe.failure, ref.compression)
        read.issues.append(FileIssue(ref.rel, kind, msg, byte_offset=safe.count if ref.compression is None else None))
    for note in notes:
        read.issues.append(FileIssue(ref.rel, "trailing-data", note.message(ref.size), "warning"))


def _with_digest(result: FileResult, path: str) -> FileResult:
    h = hashlib.blake2b(digest_size=16)
    try:
        with open(path, "rb") as fh:
            while chunk := fh.read(1 << 20):
                h.update(chunk)
    except OSError:
        return result
    return replace(result, digest=h.hexdigest())
