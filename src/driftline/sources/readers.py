"""Read one FileRef completely: dispatch on its format, never raise for bad content."""

from __future__ import annotations

import hashlib
import io
import os
from collections.abc import Iterator
from typing import Any

from driftline.observe.observation import Observation
from driftline.sources.base import FileIssue, FileResult, ReadOptions
from driftline.sources.csvfile import read_csv
from driftline.sources.discover import FileRef
from driftline.sources.formats import CountingRaw, LimitExceeded, open_stream
from driftline.sources.jsonfile import read_json, read_jsonl
from driftline.sources.parquetfile import read_parquet
from driftline.sources.remote import is_url, open_random, open_stream_remote


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
    if isinstance(exc, EOFError) or "end" in str(exc).lower() and compression:
        return "truncated", f"{compression or 'file'} data ends early ({exc}); rows before it were profiled"
    if isinstance(exc, PermissionError):
        return "unreadable", "permission denied"
    if isinstance(exc, FileNotFoundError):
        return "vanished", "the file was removed after it was found"
    if isinstance(exc, OSError) and exc.strerror:
        return "unreadable", f"read failed: {exc.strerror}"  # without the absolute path
    return "unreadable", f"read failed: {exc}"


def file_changed(ref: FileRef) -> str | None:
    """How the file differs from what discovery saw, or None: a file rewritten, appended to or
    removed during the scan gives rows that belong to no single version of it."""
    try:
        st = os.stat(ref.path)
    except FileNotFoundError:
        return "the file was removed while the scan read it"
    except OSError:
        return None
    if st.st_size != ref.size:
        return f"the file changed during the scan (size {ref.size:,} then {st.st_size:,} bytes); rescan it"
    if st.st_mtime_ns != ref.mtime_ns:
        return "the file was modified during the scan (same size, new modification time); rescan it"
    return None


def _items(ref: FileRef, opts: ReadOptions, stream: Any) -> Iterator[Any]:
    if ref.format == "jsonl":
        return read_jsonl(stream, ref.rel, opts)
    if ref.format == "json":
        return read_json(stream, ref.rel, opts)
    return read_csv(stream, ref.rel, opts, tsv=ref.format == "tsv")


def read_file(ref: FileRef, opts: ReadOptions, *, digest: bool = False) -> FileResult:
    """Read a whole file into a FileResult. Problems become FileIssues; nothing is raised."""
    observations: list[Observation] = []
    issues: list[FileIssue] = []
    declared: dict[str, str] | None = None
    complete = True
    try:
        if ref.format == "parquet":
            if ref.compression is not None:
                issues.append(
                    FileIssue(
                        ref.rel,
                        "unsupported",
                        f"{ref.compression}-compressed Parquet files are not read; Parquet compresses its pages itself",
                    )
                )
                items: Iterator[Any] = iter(())
                complete = False
            else:
                source: Any = ref.path
                if is_url(ref.path):  # random access: the footer and column chunks come as ranged GETs
                    try:
                        source = open_random(ref.path)
                    except OSError as exc:
                        return _result(ref, [], [FileIssue(ref.rel, "unreadable", f"cannot open: {exc}")], None, False)
                items = read_parquet(source, ref.rel, opts)
            for item in items:
                if isinstance(item, dict):
                    declared = item
                elif isinstance(item, FileIssue):
                    issues.append(item)
                    complete = complete and item.severity != "error"
                else:
                    observations.append(item)
        else:
            try:
                opener = open_stream_remote if is_url(ref.path) else open_stream
                raw = opener(
                    ref.path, ref.compression, limit=opts.max_decompressed_bytes, ratio=opts.max_decompression_ratio
                )
            except OSError as exc:
                kind, msg = _describe_failure(exc, None)
                return _result(ref, [], [FileIssue(ref.rel, kind, f"cannot open: {msg}")], None, False)
            safe = _SafeStream(raw)
            with io.BufferedReader(safe, buffer_size=1 << 20) as stream:
                for item in _items(ref, opts, stream):
                    (issues if isinstance(item, FileIssue) else observations).append(item)
            if safe.failure is not None:
                complete = False
                kind, msg = _describe_failure(safe.failure, ref.compression)
                issues.append(
                    FileIssue(ref.rel, kind, msg, byte_offset=safe.count if ref.compression is None else None)
                )
    except Exception as exc:  # a reader bug must not stop the scan of the other files
        complete = False
        issues.append(
            FileIssue(ref.rel, "internal", f"unexpected {type(exc).__name__}: {exc}; please report this file")
        )
    if not observations and not issues and ref.size == 0:
        issues.append(FileIssue(ref.rel, "empty", "empty file: no rows", "warning", line=1, byte_offset=0))
    if not is_url(ref.path) and not any(i.kind == "vanished" for i in issues):
        change = file_changed(ref)
        if change is not None:
            complete = False
            issues.append(FileIssue(ref.rel, "changed", change))
    result = _result(ref, observations, issues, declared, complete)
    if digest:
        result = _with_digest(result, ref.path)
    return result


def _result(
    ref: FileRef,
    observations: list[Observation],
    issues: list[FileIssue],
    declared: dict[str, str] | None,
    complete: bool,
) -> FileResult:
    return FileResult(
        rel=ref.rel,
        format=ref.format,
        compression=ref.compression,
        partitions=ref.partitions,
        size=ref.size,
        mtime_ns=ref.mtime_ns,
        rows=sum(o.rows for o in observations),
        observations=tuple(observations),
        issues=tuple(issues),
        declared=declared,
        complete=complete,
    )


def _with_digest(result: FileResult, path: str) -> FileResult:
    from dataclasses import replace

    h = hashlib.blake2b(digest_size=16)
    try:
        with open(path, "rb") as fh:
            while chunk := fh.read(1 << 20):
                h.update(chunk)
    except OSError:
        return result
    return replace(result, digest=h.hexdigest())
