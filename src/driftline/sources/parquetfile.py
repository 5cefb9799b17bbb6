"""Parquet → batches of Arrow data within each row group; the footer gives the declared schema.

The batches are observed by the caller: one by one (readers.read_file), or many small files'
batches at once (observe.bulk, through readers.read_files).
"""

from __future__ import annotations

import contextlib
import io
import os
from collections.abc import Iterator

import pyarrow as pa
import pyarrow.parquet as pq

from driftline.core import paths
from driftline.core.files import FileIssue
from driftline.core.lattice import from_arrow, unsupported_reason
from driftline.core.options import RATIO_FLOOR_BYTES, ReadOptions
from driftline.core.words import count
from driftline.observe.fast.bulk import Batch
from driftline.sources import parquetstats

Item = Batch | FileIssue | dict
# A local file this small is read into memory first: pyarrow then decodes it without its
# I/O machinery for files, which costs more than the decoding on small files (0.17 ms
# against 0.48 ms for a 200-row file of 6 columns, measured on the bench's files).
IN_MEMORY_BYTES = 8 * 1024 * 1024


def declared_paths(schema: pa.Schema) -> dict[str, str]:
    """Every field path of an Arrow schema with its shallow type key, in sorted path order.

    >>> declared_paths(pa.schema([("a", pa.struct([("b", pa.int32())])), ("t", pa.list_(pa.string()))]))
    {'a': 'struct', 'a.b': 'int32', 't': 'list', 't[]': 'string'}
    """
    out: dict[str, str] = {}

    def walk(path: str, t: pa.DataType) -> None:
        if unsupported_reason(t) is not None:
            return  # a column the reader leaves out, with a problem saying why
        out[path] = from_arrow(t).shallow_key()
        while pa.types.is_dictionary(t) or pa.types.is_run_end_encoded(t) or isinstance(t, pa.BaseExtensionType):
            t = t.storage_type if isinstance(t, pa.BaseExtensionType) else t.value_type
        if pa.types.is_struct(t):
            for i in range(t.num_fields):
                walk(paths.child(path, t.field(i).name), t.field(i).type)
        elif pa.types.is_map(t):
            walk(paths.map_part(path, "key"), t.key_type)
            walk(paths.map_part(path, "value"), t.item_type)
        elif hasattr(t, "value_type") and (
            pa.types.is_list(t)
            or pa.types.is_large_list(t)
            or pa.types.is_fixed_size_list(t)
            or pa.types.is_list_view(t)
            or pa.types.is_large_list_view(t)
        ):
            walk(paths.element(path), t.value_type)

    for f in schema:
        walk(paths.child(None, f.name), f.type)
    return dict(sorted(out.items()))


def read_parquet(path: str, rel: str, opts: ReadOptions) -> Iterator[Item]:
    """Yield the declared schema (a dict) first, then one Batch per batch of rows (at most batch_rows).

    A row group the footer says would decompress past the limits is reported and
    skipped before any of it is decompressed; the others are still read.
    """
    try:
        source, stored = _source(path)
        pf = pq.ParquetFile(source, pre_buffer=_pre_buffer(source))
        schema = pf.schema_arrow
    except (OSError, pa.ArrowException, ValueError, IndexError, MemoryError) as exc:
        yield FileIssue(rel, _kind(exc), f"cannot read the Parquet footer: {_short(exc, path)}")
        return
    yield _declared(schema)
    rows, batch, expected = 0, 0, 0
    footer: bool | None = None  # whether to ask the footer; looked up on the first large row group
    leaves: dict[str, int] | None = None  # set on the first row group large enough to ask the footer
    words: _Words | None = None  # the same file, its string columns read with their dictionaries
    for rg in range(pf.metadata.num_row_groups):
        meta = pf.metadata.row_group(rg)
        too_big = _oversized(meta, stored, opts)
        if too_big:
            yield FileIssue(rel, "too-large", f"row group {rg}: {too_big}; row group not read", row=rows)
            continue
        expected += meta.num_rows
        per_batch = _rows_per_batch(meta, opts)
        large = parquetstats.FOOTER_MIN_ROWS <= meta.num_rows <= per_batch
        if large and footer is None:
            footer = parquetstats.footer_first(opts)
        if large and footer:
            if leaves is None:
                shape = (schema, pf.metadata.created_by)
                leaves = (parquetstats.leaf_indices(schema, pf.schema) or {}) if _asked(shape) else {}
                words = _Words(source, schema)
            got = _footer_answered(pf, words, rg, meta, leaves, rel, batch, rows) if leaves and words else None
            if got is not None:
                _UNANSWERED.pop(shape, None)
                yield got
                rows += got.data.num_rows
                batch += 1
                continue
            # A footer that answered nothing (no statistics) is not asked again in this file, nor
            # in most next files of its schema and writer: the prefix would be read for nothing.
            footer = False
            if leaves:
                _missed(shape)
        try:
            for rb in _row_group(pf, rg, meta.num_rows, per_batch):
                yield Batch(rb, rel, batch, rows)
                rows += rb.num_rows
                batch += 1
        except (OSError, pa.ArrowException, ValueError, IndexError, MemoryError) as exc:
            yield FileIssue(
                rel, _kind(exc), f"row group {rg}: {_short(exc, path)}; rest of the file not profiled", row=rows
            )
            return
    if rows != expected:
        # Nothing lost silently: a footer promising rows the pages do not hold is corrupt.
        yield FileIssue(
            rel, "row-count", f"the footer declares {count(expected, 'row')} but {rows:,} could be read", row=rows
        )


def _asked(shape: tuple[pa.Schema, str | None]) -> bool:
    """Whether to ask a file's footer: not while files of its schema and writer answered nothing,
    but for one in _RETRY_EVERY of them."""
    misses = _UNANSWERED.get(shape, 0)
    if misses % _RETRY_EVERY:
        _UNANSWERED[shape] = misses + 1
        return False
    return True


def _missed(shape: tuple[pa.Schema, str | None]) -> None:
    if len(_UNANSWERED) > 256:
        _UNANSWERED.clear()
    _UNANSWERED[shape] = _UNANSWERED.get(shape, 0) + 1


class _Words:
    """The file opened again, once and only when needed, with its top-level string columns read
    as dictionaries: dictionary pages are then decoded once per value, not once per row, and
    string_profile classifies the dictionary and counts through the indices
    (observe/fast/strprofile.encoded_rows)."""

    def __init__(self, source: object, schema: pa.Schema) -> None:
        self._source = source
        self._names = [f.name for f in schema if f.type == pa.string()]
        self._file: pq.ParquetFile | None = None

    def file(self, plain: pq.ParquetFile) -> pq.ParquetFile:
        if self._file is None:
            self._file = plain
            if self._names:
                with contextlib.suppress(OSError, pa.ArrowException, ValueError, IndexError, MemoryError):
                    self._file = pq.ParquetFile(
                        self._source, read_dictionary=self._names, pre_buffer=_pre_buffer(self._source)
                    )
        return self._file


def _one_dictionary(data: pa.Table) -> pa.Table:
    """data with each dictionary column of several chunks (each its own dictionary) decoded: one
    chunk per column is what the observers concatenate without unifying dictionaries."""
    for i, col in enumerate(data.columns):
        if pa.types.is_dictionary(col.type) and col.num_chunks > 1:
            data = data.set_column(i, data.field(i).with_type(col.type.value_type), col.cast(col.type.value_type))
    return data


def _footer_answered(
    pf: pq.ParquetFile,
    words: _Words,
    rg: int,
    meta: pq.RowGroupMetaData,
    leaves: dict[str, int],
    rel: str,
    batch: int,
    row_start: int,
) -> Batch | None:
    """The row group as one Batch whose columns the footer answers (parquetstats) come as
    statistics and whose other columns are read by projection (from words: strings with their
    dictionaries); None when the footer answers none of them, or the prefix cannot be read:
    the row group is then read whole, as always, and a damaged or encrypted column is
    reported by that reading. The prefix of the columns the footer may answer is read before
    their metadata is touched: that of an encrypted column aborts the process (pyarrow
    26.0.1), and its data raises first."""
    try:
        first = pf.iter_batches(
            batch_size=parquetstats.PREFIX_ROWS, row_groups=[rg], columns=list(leaves), use_threads=False
        )
        known = parquetstats.answer(meta, next(first), leaves, file=rel, row_start=row_start)
        if not known:
            return None
        rest = [n for n in pf.schema_arrow.names if n not in known]
        data = _one_dictionary(words.file(pf).read_row_group(rg, columns=rest, use_threads=False))
    except (OSError, pa.ArrowException, ValueError, IndexError, MemoryError, StopIteration):
        return None
    if data.num_rows != meta.num_rows:
        return None
    return Batch(data, rel, batch, row_start, known)


def _source(path: object) -> tuple[object, int]:
    """What pyarrow reads (the path, the object-store file, or the bytes of a small local file) and its size."""
    if not isinstance(path, str):
        return path, path.size()  # type: ignore[attr-defined]  # an object-store file
    with open(path, "rb") as fh:
        size = os.fstat(fh.fileno()).st_size  # of the file opened: no second lookup of the path
        if size > IN_MEMORY_BYTES:
            return path, size
        data = fh.read(IN_MEMORY_BYTES + 1)
    return pa.BufferReader(data), len(data)


def _pre_buffer(source: object) -> bool:
    """Whether pyarrow should gather a row group's column chunks in a few large reads first: for
    a file read from disk or an object store, yes; for bytes already in memory it only copies
    them (about 20 µs of a 200-row file's 200, measured on the bench's files). The pages decoded
    are the same either way (tests/sources/test_parquetfile.py)."""
    return not isinstance(source, pa.BufferReader)


def _rows_per_batch(meta: pq.RowGroupMetaData, opts: ReadOptions) -> int:
    """batch_rows, or fewer when the footer's size of the row group says that many rows would
    pass batch_bytes once decoded (the same for every reading of the file)."""
    size = max(meta.total_byte_size, 0)
    if size <= opts.batch_bytes or meta.num_rows == 0:
        return opts.batch_rows
    return max(1, min(opts.batch_rows, opts.batch_bytes * meta.num_rows // size))


def _row_group(pf: pq.ParquetFile, rg: int, rows: int, batch_rows: int) -> Iterator[pa.Table | pa.RecordBatch]:
    if rows == 0:
        return  # as iter_batches: no batch for an empty row group
    if rows <= batch_rows:  # one batch: read it whole, without the batch iterator's set-up
        yield pf.read_row_group(rg, use_threads=False)
    else:
        yield from pf.iter_batches(batch_size=batch_rows, row_groups=[rg], use_threads=False)


# (schema, writer) -> files since its footers last answered nothing: one file in _RETRY_EVERY asks again
_UNANSWERED: dict[tuple[pa.Schema, str | None], int] = {}
_RETRY_EVERY = 16
_DECLARED: dict[pa.Schema, dict[str, str]] = {}  # files of one schema share its declared paths
# The previous file's schema and its declared paths: most files have the shape of the one before,
# and Schema.equals is a C++ comparison where hashing a Schema for the dict builds every field
# in Python (about 30 µs a file).  Equal schemas (metadata aside, as the dict's == has it) have
# equal declared paths: declared_paths reads the types alone.
_PREVIOUS: list[tuple[pa.Schema, dict[str, str]]] = []


def _declared(schema: pa.Schema) -> dict[str, str]:
    if _PREVIOUS and schema.equals(_PREVIOUS[0][0]):
        return dict(_PREVIOUS[0][1])
    got = _DECLARED.get(schema)
    if got is None:
        if len(_DECLARED) > 256:
            _DECLARED.clear()
        got = _DECLARED[schema] = declared_paths(schema)
    _PREVIOUS[:] = [(schema, got)]
    return dict(got)


def _oversized(meta: pq.RowGroupMetaData, stored: int, opts: ReadOptions) -> str | None:
    """Why the footer's size for a row group is past the limits, or None.

    Only row-group totals are read: touching column metadata that is encrypted aborts
    the process (pyarrow 26.0.1). The file size stands in for the compressed bytes,
    which can only understate the ratio.
    """
    out = max(meta.total_byte_size, 0)
    if out > opts.max_decompressed_bytes:
        limit = opts.max_decompressed_bytes
        return f"declares {out:,} decompressed bytes, more than {limit:,} (--max-decompressed-bytes)"
    if out > RATIO_FLOOR_BYTES and out > opts.max_decompression_ratio * max(stored, 1):
        return (
            f"declares {out:,} decompressed bytes in a file of {stored:,}, a ratio over "
            f"{opts.max_decompression_ratio:,g}:1 (--max-decompression-ratio)"
        )
    return None


def _kind(exc: BaseException) -> str:
    if isinstance(exc, FileNotFoundError):
        return "vanished"  # removed between discovery and reading
    # pyarrow says "encrypted metadata" (encrypted footer) or "Cannot decrypt" (encrypted columns).
    return "encrypted" if "crypt" in str(exc).lower() else "unreadable"


def _short(exc: BaseException, path: object = None) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    if isinstance(path, str) and path:
        text = text.replace(path, os.path.basename(path))  # reports name files by relative path only
    return text[:300]


def read_parquet_values(path: object, rel: str, opts: ReadOptions) -> Iterator[pa.RecordBatch]:
    """The file's rows as Arrow batches of at most opts.batch_rows rows (recommendation/raw casts
    them); a damaged file raises, for a cast must not pass over rows."""
    yield from pq.ParquetFile(path).iter_batches(batch_size=opts.batch_rows, use_threads=False)


def has_parquet_magic(path: str) -> bool:
    """Whether a local file starts and ends with Parquet's magic number, whatever its name.

    source: Apache Parquet file format: "PAR1" (or "PARE", encrypted footer) at the start and the end
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(4)
            if head not in (b"PAR1", b"PARE") or fh.seek(0, io.SEEK_END) < 12:
                return False
            fh.seek(-4, io.SEEK_END)
            return fh.read(4) == head
    except OSError:
        return False
