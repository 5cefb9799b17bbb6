"""The Parquet reader's per-file shortcuts give what the plain computation gives.

The declared paths of a file are reused from the previous file when its schema is equal
(metadata aside): each file's answer is checked against declared_paths of its own schema,
over files whose schemas repeat, alternate, differ only in metadata, nullability or a nested
type. The reference for the declared types is pyarrow's own schema of each written file
(pyarrow.parquet.read_schema).

A small file is read into memory and decoded without pyarrow's pre-buffering; the same file
read from its path gives the same items, on the Parquet conformance suite (apache/parquet-testing).
"""

from __future__ import annotations

from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import SHARED_TESTDATA
from driftline.core.options import ReadOptions
from driftline.sources import parquetfile
from driftline.sources.parquetfile import declared_paths, read_parquet

SUITE = SHARED_TESTDATA / "parquet-conformance"
SUITE_FILES = sorted(
    p
    for d in ("data", "bad_data")
    for p in (SUITE / d).rglob("*")
    if p.name.endswith((".parquet", ".parquet.encrypted"))
)

SCHEMAS = [
    pa.schema([("a", pa.int32()), ("s", pa.string())]),
    pa.schema([("a", pa.int32()), ("s", pa.string())]),  # the previous one again
    pa.schema([("a", pa.int32()), ("s", pa.string())], metadata={b"k": b"v"}),  # metadata aside: equal
    pa.schema([("a", pa.int64()), ("s", pa.string())]),  # a wider type
    pa.schema([("a", pa.int32()), ("s", pa.string())]),  # back to the first
    pa.schema([pa.field("a", pa.int32(), nullable=False), ("s", pa.string())]),
    pa.schema([("a", pa.int32()), ("s", pa.struct([("x", pa.int8())]))]),
    pa.schema([("a", pa.int32()), ("s", pa.struct([("x", pa.int16())]))]),  # differs below the top
    pa.schema([("a", pa.int32()), ("s", pa.list_(pa.string()))]),
]


def _values(t: pa.DataType) -> pa.Array:
    if pa.types.is_struct(t):
        return pa.array([{"x": 1}, None], t)
    if pa.types.is_list(t):
        return pa.array([["u"], None], t)
    if pa.types.is_string(t):
        return pa.array(["u", None], t)
    return pa.array([1, 2], t)


def test_declared_paths_of_each_file_whatever_the_file_before(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr(parquetfile, "_PREVIOUS", [])
    monkeypatch.setattr(parquetfile, "_DECLARED", {})
    opts = ReadOptions()
    for k, schema in enumerate(SCHEMAS):
        path = tmp_path / f"p{k}.parquet"
        pq.write_table(pa.table([_values(f.type) for f in schema], schema=schema), path)
        first = next(read_parquet(str(path), path.name, opts))
        # source: pyarrow.parquet.read_schema, the file's own footer read by pyarrow
        assert first == declared_paths(pq.read_schema(path)), (k, schema)
    assert parquetfile._PREVIOUS[0][1] == {"a": "int32", "s": "list", "s[]": "string"}


def test_declared_paths_are_a_copy(tmp_path: Path, monkeypatch) -> None:
    # A caller changing its dict changes neither the cache nor the next file's answer.
    monkeypatch.setattr(parquetfile, "_PREVIOUS", [])
    opts = ReadOptions()
    pq.write_table(pa.table({"a": pa.array([1], pa.int32())}), tmp_path / "a.parquet")
    got = next(read_parquet(str(tmp_path / "a.parquet"), "a.parquet", opts))
    got["a"] = "changed"
    assert next(read_parquet(str(tmp_path / "a.parquet"), "a.parquet", opts)) == {"a": "int32"}


def _same_values(a: pa.Table, b: pa.Table) -> bool:
    """Equal tables, NaN equal to NaN: the values as Python shows them (-0.0 apart from 0.0), or
    Arrow's equality for the values Python cannot hold (nanoseconds, dates past year 9999)."""
    try:
        return repr(a.to_pylist()) == repr(b.to_pylist())
    except (ValueError, OverflowError, pa.ArrowException):
        return a.equals(b)


def _items(path: Path) -> list[object]:
    out: list[object] = []
    for item in read_parquet(str(path), path.name, ReadOptions()):
        out.append(("batch", item.data, item.known) if hasattr(item, "data") else item)
    return out


@pytest.mark.parametrize("path", SUITE_FILES, ids=[p.name for p in SUITE_FILES])
def test_a_file_read_from_memory_reads_as_from_disk(path: Path, monkeypatch) -> None:
    # Small files are read into memory and decoded without pyarrow's pre-buffering; the same
    # file read from its path (pre-buffered, as a large file is) gives the same batches, the
    # same footer answers and the same problems, on the conformance suite's files, damaged
    # and encrypted ones too.
    in_memory = _items(path)
    monkeypatch.setattr(parquetfile, "IN_MEMORY_BYTES", -1)
    from_disk = _items(path)
    assert len(in_memory) == len(from_disk)
    for a, b in zip(in_memory, from_disk, strict=True):
        if isinstance(a, tuple) and isinstance(b, tuple):
            assert a[1].schema.equals(b[1].schema, check_metadata=True)
            assert _same_values(a[1], b[1])
            assert a[2] == b[2]
        else:
            assert a == b
