"""Readers: every format and compression, batches bounded by batch_rows, problems with positions."""

from __future__ import annotations

import bz2
import gzip
import lzma
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import zstandard

import driftline
from driftline.core.stats import class_sample

LINES = b'{"a": 1, "b": "x"}\n{"a": 2, "b": "y"}\n{"a": 3}\n'
COMPRESSORS = {
    "gz": gzip.compress,
    "bz2": bz2.compress,
    "xz": lzma.compress,
    "zst": lambda b: zstandard.ZstdCompressor().compress(b),
}


@pytest.mark.parametrize("ext", sorted(COMPRESSORS))
def test_each_compression_reads_the_same_rows(tmp_path: Path, ext: str):
    (tmp_path / f"f.jsonl.{ext}").write_bytes(COMPRESSORS[ext](LINES))
    p = driftline.scan(tmp_path)
    assert (p.rows, p.fields["a"].stats.types, p.fields["b"].absent, p.error_count) == (3, {"int64": 3}, 1, 0)


def test_batches_never_exceed_batch_rows(tmp_path: Path):
    (tmp_path / "big.jsonl").write_text("".join(f'{{"i": {i}}}\n' for i in range(25)))
    (tmp_path / "big.csv").write_text("i\n" + "".join(f"{i}\n" for i in range(25)))
    pq.write_table(pa.table({"i": list(range(25))}), tmp_path / "big.parquet", row_group_size=10)
    p = driftline.scan(tmp_path, batch_rows=7)
    for f in p.files:
        sizes = [o.rows for o in f.observations]
        assert max(sizes) <= 7 and sum(sizes) == 25, (f.rel, sizes)
        assert [o.row_start for o in f.observations] == [sum(sizes[:i]) for i in range(len(sizes))]
    # Parquet batches follow row groups: 10 + 10 + 5 rows, each cut at 7.
    assert [o.rows for o in p.file("big.parquet").observations] == [7, 3, 7, 3, 5]


def test_json_array_document_and_tsv(tmp_path: Path):
    (tmp_path / "doc.json").write_text('[{"a": 1}, {"a": 2.5}]')
    (tmp_path / "t.tsv").write_text("a\tb\n1\tx y\n")
    p = driftline.scan(tmp_path)
    assert p.file("doc.json").rows == 2 and p.file("t.tsv").rows == 1
    assert p.fields["b"].stats.types == {"string": 1}


def test_csv_rfc4180_quoting_and_delimiter_sniffing(tmp_path: Path):
    # source: RFC 4180 section 2 (rules 6 and 7): quoted CRLF and doubled quotes; worked example in REFERENCES §3
    (tmp_path / "q.csv").write_bytes(b'x,y,z\r\n"aaa","b\r\nbb","ccc"\r\nzzz,yyy,xxx\r\n"a","b""bb","c"\r\n')
    (tmp_path / "semi.csv").write_text("k;v\n1;2\n")
    p = driftline.scan(tmp_path)
    q = p.file("q.csv")
    assert q.rows == 3
    assert q.observations[0].fields["y"].samples[class_sample("text")][0].value == '"b\\r\\nbb"'
    # the row after the quoted CRLF starts on line 4 (header 1, row 0 spans lines 2-3)
    assert q.observations[0].fields["x"].samples[class_sample("text")][1].line == 4
    assert sorted(p.file("semi.csv").observations[0].fields) == ["k", "v"]


def test_problems_have_positions_and_the_scan_goes_on(tmp_path: Path):
    (tmp_path / "a.jsonl").write_bytes(b'\xef\xbb\xbf{"a": 1}\r\n{"a": \r\n{"a": 2}\r\n')
    (tmp_path / "b.csv").write_bytes(b"a,b\n1,2\n3\n4,\xff\n")
    (tmp_path / "c.jsonl").write_bytes(b"")
    many = b"".join(b'{"i": %d, "pad": "%s"}\n' % (i, b"x" * (i % 50)) for i in range(20_000))
    packed = gzip.compress(many)
    (tmp_path / "d.jsonl.gz").write_bytes(packed[: len(packed) // 2])
    # encoding pinned: b.csv is UTF-8 with a stray byte (found alone, one high byte and no
    # valid multi-byte character would be read as windows-1252: tests/sources/test_encoding.py)
    p = driftline.scan(tmp_path, encoding="utf-8")
    (cut,) = [i for i in p.issues if i.file == "d.jsonl.gz" and i.kind == "malformed-json"]
    got = sorted((i.file, i.kind, i.severity, i.line, i.row) for i in p.issues)
    assert got == [
        ("a.jsonl", "bom", "warning", 1, None),
        ("a.jsonl", "crlf", "warning", 1, None),
        ("a.jsonl", "malformed-json", "error", 2, None),
        ("b.csv", "invalid-utf8", "error", 4, None),  # found while decoding the line (see csvfile.LineGuard)
        ("b.csv", "ragged-row", "error", 3, None),
        ("c.jsonl", "empty", "warning", 1, None),
        ("d.jsonl.gz", "malformed-json", "error", cut.line, None),
        ("d.jsonl.gz", "truncated", "error", None, None),
    ]
    assert p.file("a.jsonl").rows == 2 and p.file("b.csv").rows == 2
    # Every whole line decoded before the cut is kept; the cut line itself is malformed.
    d = p.file("d.jsonl.gz")
    assert d.rows == cut.line - 1 and 1_000 < d.rows < 20_000 and not d.complete


def test_parquet_declared_schema_comes_from_the_footer(tmp_path: Path):
    t = pa.table({"n": pa.array([1, None], pa.int32()), "s": pa.array([{"x": "1"}, None])})
    pq.write_table(t, tmp_path / "p.parquet")
    f = driftline.scan(tmp_path).file("p.parquet")
    assert f.declared == {"n": "int32", "s": "struct", "s.x": "string"}
    st = f.observations[0].fields
    assert (st["n"].types, st["n"].nulls, st["s.x"].classes) == ({"int32": 1}, 1, {"integer": 1})
