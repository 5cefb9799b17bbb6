"""Builders of hostile input files, shared by the fault tests and scripts/reliability_table.

Each builder writes into a folder it is given (a pytest tmp_path, or a temporary folder of
the script) and returns what it wrote; nothing here touches the repository.
"""

from __future__ import annotations

import bz2
import gzip
import io
import struct
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import zstandard

SUITES = Path(__file__).resolve().parents[1].parent / "shared" / "testdata"
JSON_SUITE = SUITES / "json-parsing" / "test_parsing"
CSV_SUITE = SUITES / "csv-edge-cases"
PARQUET_SUITE = SUITES / "parquet-conformance"


# -- Parquet footers -------------------------------------------------------------------
# source: apache/parquet-format README "File Format": a file ends with the Thrift
# FileMetaData, its 4-byte little-endian length, then the magic "PAR1". The metadata is
# Thrift compact protocol: i64 fields are zigzag varints (Apache Thrift compact spec).


def _varint(n: int) -> bytes:
    out = bytearray()
    while True:
        byte, n = n & 0x7F, n >> 7
        if n:
            out.append(byte | 0x80)
        else:
            out.append(byte)
            return bytes(out)


def _zigzag(n: int) -> int:
    return (n << 1) ^ (n >> 63)


def split_parquet(data: bytes) -> tuple[bytes, bytes]:
    """(pages, footer metadata) of a Parquet file's bytes."""
    assert data[-4:] == b"PAR1"
    (length,) = struct.unpack("<I", data[-8:-4])
    return data[: -8 - length], data[-8 - length : -8]


def join_parquet(pages: bytes, footer: bytes, length: int | None = None) -> bytes:
    return pages + footer + struct.pack("<I", len(footer) if length is None else length) + b"PAR1"


def small_parquet(rows: int = 12_345) -> bytes:
    """A one-row-group Parquet file with an int64 and a string column, as bytes."""
    t = pa.table({"a": pa.array(range(rows), pa.int64()), "s": [f"x{i}" for i in range(rows)]})
    buf = io.BytesIO()
    pq.write_table(t, buf, row_group_size=rows)
    return buf.getvalue()


def parquet_absurd_footers(rows: int = 12_345) -> dict[str, bytes]:
    """Files whose footer claims sizes that cannot be true, keyed by what it claims."""
    data = small_parquet(rows)
    pages, footer = split_parquet(data)
    count = _varint(_zigzag(rows))
    assert footer.count(count) >= 2  # FileMetaData.num_rows and RowGroup.num_rows at least
    return {
        "footer-length-4GiB": join_parquet(pages, footer, length=0xFFFF_FFF0),
        "rows-2^62": join_parquet(pages, footer.replace(count, _varint(_zigzag(2**62)))),
        "chunks-past-end-of-file": join_parquet(pages[:200], footer),
    }


def parquet_ratio_bomb(path: Path, *, values: int = 200, width: int = 100_000) -> int:
    """A zstd Parquet file whose row group holds values*width bytes of one letter; returns that size."""
    col = pa.array(["a" * width] * values, pa.string())
    pq.write_table(pa.table({"s": col}), path, compression="zstd", use_dictionary=False)
    return values * width


# -- compressed streams ----------------------------------------------------------------


def jsonl_lines(n: int) -> bytes:
    return b"".join(b'{"id": %d, "v": "x%d"}\n' % (i, i) for i in range(n))


def compress(data: bytes, codec: str) -> bytes:
    if codec == "gzip":
        return gzip.compress(data, mtime=0)
    if codec == "bz2":
        return bz2.compress(data)
    if codec == "zstd":
        return zstandard.ZstdCompressor().compress(data)
    raise ValueError(codec)


SUFFIX = {"gzip": ".gz", "bz2": ".bz2", "zstd": ".zst"}


BOMB_LINE = b'{"a": 1}\n'


def bomb(codec: str, size: int) -> bytes:
    """About size bytes of one repeated JSON line, compressed: the ratio of a bomb."""
    return compress(BOMB_LINE * (size // len(BOMB_LINE)), codec)
