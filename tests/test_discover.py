"""Discovery: sorted relative paths, partitions from key=value folders, skipped files counted."""

from __future__ import annotations

import gzip
from pathlib import Path

import pytest

from driftline.errors import InputPathError
from driftline.sources.discover import discover, partition_values
from driftline.sources.formats import detect_compression, detect_format


def _touch(path: Path, data: bytes = b'{"a": 1}\n') -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    return path


def test_sorted_partitions_and_skips(tmp_path: Path):
    _touch(tmp_path / "region=south/day=2026-11-30/b.jsonl")
    _touch(tmp_path / "region=north/day=2026-11-30/a.jsonl")
    _touch(tmp_path / "_SUCCESS", b"")
    _touch(tmp_path / ".tmp/x.jsonl")
    _touch(tmp_path / "notes.txt", b"hello")
    found = discover([tmp_path])
    assert [f.rel for f in found.files] == [
        "region=north/day=2026-11-30/a.jsonl",
        "region=south/day=2026-11-30/b.jsonl",
    ]
    assert found.files[0].partitions == (("region", "north"), ("day", "2026-11-30"))
    assert sorted((s.rel, s.reason) for s in found.skipped) == [
        (".tmp/x.jsonl", "hidden"),
        ("_SUCCESS", "marker"),
        ("notes.txt", "unknown-format"),
    ]


def test_include_exclude(tmp_path: Path):
    _touch(tmp_path / "a.jsonl")
    _touch(tmp_path / "b.csv", b"x\n1\n")
    _touch(tmp_path / "c.jsonl")
    found = discover([tmp_path], include=["*.jsonl"], exclude=["c*"])
    assert [f.rel for f in found.files] == ["a.jsonl"]


def test_partition_values_are_data_not_paths():
    assert partition_values("k=../x/f.jsonl") == (("k", ".."),)
    assert partition_values("a=1/b=/c.json") == (("a", "1"), ("b", ""))


def test_missing_path_is_a_clear_error(tmp_path: Path):
    with pytest.raises(InputPathError, match="does not exist"):
        discover([tmp_path / "nope"])


def test_formats_by_extension_and_by_sniffing(tmp_path: Path):
    assert detect_format("x/part-0.jsonl.gz") == "jsonl" and detect_compression("x/part-0.jsonl.gz") == "gzip"
    assert detect_format("a.tsv.zst") == "tsv" and detect_compression("a.tsv.zst") == "zstd"
    blob = _touch(tmp_path / "blob", gzip.compress(b'{"a": 1}\n'))
    # source: RFC 1952 section 2.3.1, the gzip magic number 0x1f 0x8b
    assert detect_compression(str(blob)) == "gzip" and detect_format(str(blob)) == "jsonl"
    pq_like = _touch(tmp_path / "noext", b"PAR1....")  # source: Parquet format spec, magic "PAR1"
    assert detect_format(str(pq_like)) == "parquet"
    csv_like = _touch(tmp_path / "export", b"a;b\n1;2\n")
    assert detect_format(str(csv_like)) == "csv"
