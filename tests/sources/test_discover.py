"""Discovery: sorted relative paths, partitions from key=value folders, skipped files counted."""

from __future__ import annotations

import builtins
import gzip
import os
from pathlib import Path

import pytest

from driftline.errors import InputPathError
from driftline.sources.discover import discover, partition_values
from driftline.sources.formats import detect_compression
from driftline.sources.registry import detect_format


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
        ("notes.txt", "other-extension"),  # an extension not read: never opened,
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


# -- files that are not data ------------------------------------------------------------------------


def _parquet(path: Path, n: int) -> Path:
    import pyarrow as pa
    import pyarrow.parquet as pq

    path.parent.mkdir(parents=True, exist_ok=True)
    pq.write_table(pa.table({"id": list(range(n)), "name": [f"n{i}" for i in range(n)]}), path)
    return path


SQL = b"CREATE TABLE events (id BIGINT, name TEXT);\nCREATE INDEX ON events (id, name);\n"


def test_a_sql_file_beside_parquet_is_skipped_not_read_as_csv(tmp_path: Path):
    import driftline

    _parquet(tmp_path / "a.parquet", 3)
    _parquet(tmp_path / "b.parquet", 2)
    _touch(tmp_path / "schema.sql", SQL)
    profile = driftline.scan(tmp_path)
    assert [f.rel for f in profile.files] == ["a.parquet", "b.parquet"]
    assert [(s.rel, s.reason) for s in profile.skipped] == [("schema.sql", "other-extension")]
    assert sorted(profile.fields) == ["id", "name"] and profile.rows == 5
    assert profile.events == ()  # before: a field named after the first statement, and 2 drift events


def test_sniff_unknown_reads_files_of_other_extensions_that_look_like_data(tmp_path: Path):
    _touch(tmp_path / "schema.sql", SQL)
    _touch(tmp_path / "export.txt", b"id,name\n1,a\n")
    _touch(tmp_path / "events.dat", b'{"id": 1}\n')
    _touch(tmp_path / "readme.md", b"# notes\nnothing here\n")
    found = discover([tmp_path])
    assert found.files == ()
    assert [(s.rel, s.reason) for s in found.skipped] == [
        ("events.dat", "other-extension"),
        ("export.txt", "other-extension"),
        ("readme.md", "other-extension"),
        ("schema.sql", "other-extension"),
    ]
    sniffed = discover([tmp_path], sniff_unknown=True)
    # asked for: the sniffer decides, the SQL's commas included (the user asked for it)
    assert [(f.rel, f.format) for f in sniffed.files] == [
        ("events.dat", "jsonl"),
        ("export.txt", "csv"),
        ("schema.sql", "csv"),
    ]
    assert [(s.rel, s.reason) for s in sniffed.skipped] == [("readme.md", "unknown-format")]


def test_a_file_named_on_its_own_is_read_whatever_its_extension(tmp_path: Path):
    export = _touch(tmp_path / "export.txt", b"id,name\n1,a\n")
    _touch(tmp_path / "other.txt", b"id,name\n2,b\n")
    assert [(f.rel, f.format) for f in discover([str(export)]).files] == [("export.txt", "csv")]
    globbed = discover([str(tmp_path / "*.txt")])  # a glob finds files as a folder does
    assert globbed.files == () and [s.reason for s in globbed.skipped] == ["other-extension"] * 2


def test_names_without_an_extension_are_still_sniffed(tmp_path: Path):
    import gzip

    _touch(tmp_path / "part-00000", b"id,name\n1,a\n")  # common practice: Hadoop/Spark part files
    _touch(tmp_path / "events.2026-11-30", b'{"id": 1}\n')  # a date is not an extension
    _touch(tmp_path / "dump.gz", gzip.compress(b'{"id": 2}\n'))  # only a compression suffix
    _touch(tmp_path / "LICENSE", b"Permission is hereby granted\n")
    found = discover([tmp_path])
    assert [(f.rel, f.format, f.compression) for f in found.files] == [
        ("dump.gz", "jsonl", "gzip"),
        ("events.2026-11-30", "jsonl", None),
        ("part-00000", "csv", None),
    ]
    assert [(s.rel, s.reason) for s in found.skipped] == [("LICENSE", "unknown-format")]


def test_parquet_under_another_extension_is_known_by_its_magic_at_both_ends(tmp_path: Path):
    # source: Apache Parquet file format: the file starts and ends with "PAR1"
    _parquet(tmp_path / "a.parquet.bak", 4)
    _touch(tmp_path / "fake.txt", b"PAR1,PAR2\n1,2\n")  # text that starts like one
    found = discover([tmp_path])
    assert [(f.rel, f.format) for f in found.files] == [("a.parquet.bak", "parquet")]
    assert [(s.rel, s.reason) for s in found.skipped] == [("fake.txt", "other-extension")]


def test_the_cli_names_the_files_it_did_not_read_for_their_extension(tmp_path: Path):
    import subprocess
    import sys

    _touch(tmp_path / "a.jsonl")
    _touch(tmp_path / "schema.sql", SQL)
    res = subprocess.run(
        [sys.executable, "-m", "driftline.cli", "scan", str(tmp_path)], capture_output=True, text=True, timeout=120
    )
    assert res.returncode == 0, res.stderr
    assert "\nskipped for their extension: schema.sql (--sniff-unknown reads them)\n" in res.stdout
    only_sql = tmp_path / "sql"
    _touch(only_sql / "schema.sql", SQL)
    res = subprocess.run(
        [sys.executable, "-m", "driftline.cli", "scan", str(only_sql)], capture_output=True, text=True, timeout=120
    )
    assert res.returncode == 2
    assert (
        "(1 skipped: 1 other-extension (--sniff-unknown reads files of other extensions that look like data))"
        in res.stderr
    )


# -- paths taken as globs -------------------------------------------------------------------------


def test_an_existing_path_with_glob_characters_is_taken_literally(tmp_path: Path):
    _touch(tmp_path / "report[1].jsonl")
    _touch(tmp_path / "report1.jsonl", b'{"b": 2}\n')  # what the pattern report[1].jsonl would match
    found = discover([str(tmp_path / "report[1].jsonl")])
    assert [f.rel for f in found.files] == ["report[1].jsonl"]
    starred = _touch(tmp_path / "odd" / "a*b?.csv", b"x\n1\n")
    assert [f.rel for f in discover([str(starred)]).files] == ["a*b?.csv"]
    folder = tmp_path / "exports [2026]"
    _touch(folder / "x.jsonl")
    assert [f.rel for f in discover([str(folder)]).files] == ["x.jsonl"]


def test_a_pattern_that_is_no_existing_path_is_still_a_glob(tmp_path: Path):
    _touch(tmp_path / "report1.jsonl")
    _touch(tmp_path / "report2.jsonl")
    found = discover([str(tmp_path / "report[12].jsonl")])
    assert [f.rel for f in found.files] == ["report1.jsonl", "report2.jsonl"]
    with pytest.raises(InputPathError, match="no file matches the pattern"):
        discover([str(tmp_path / "report[3].jsonl")])


# -- cost per file: counted, never timed ----------------------------------------------------------


def _count_calls(monkeypatch: pytest.MonkeyPatch, module: object, name: str, seen: list[str]) -> list[str]:
    """Every path module.<name> is called with while the test runs (the call itself goes through)."""
    real = getattr(module, name)

    def counting(path, *args, **kwargs):  # type: ignore[no-untyped-def]
        seen.append(os.fspath(path))
        return real(path, *args, **kwargs)

    monkeypatch.setattr(module, name, counting)
    return seen


def _landing(root: Path, files: int) -> list[Path]:
    # key=value folders of small files; every fifth one gzip'd under a name that does not say so,
    # so its compression comes from its first bytes
    out = []
    for k in range(files):
        data = b'{"a": %d}\n' % k
        out.append(_touch(root / f"day={k % 3}" / f"part-{k:03d}.jsonl", gzip.compress(data) if k % 5 == 0 else data))
    return out


@pytest.mark.parametrize("files", [8, 40])
def test_each_file_is_opened_once_and_links_are_judged_from_the_listing(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, files: int
):
    # On 20,000 small files discovery's opens and system calls were most of its cost: it opened
    # each file twice (the driftline-output marker, then the compression's magic number) and
    # asked lstat of every entry to find links.  One open per file now answers both, and links
    # come from the folder listing: the lstat calls are the few of the named paths' real paths,
    # the same for 8 files as for 40 (scripts/bench --files-scaling times it).
    written = _landing(tmp_path, files)
    opened: list[str] = []  # by a file object or a bare descriptor alike
    _count_calls(monkeypatch, builtins, "open", opened)
    _count_calls(monkeypatch, os, "open", opened)
    lstats = _count_calls(monkeypatch, os, "lstat", [])
    found = discover([tmp_path])
    monkeypatch.undo()
    assert sorted(opened) == sorted(str(p) for p in written)
    assert len(lstats) == len(discover_lstats_of_the_root(tmp_path, monkeypatch))
    # source: RFC 1952 section 2.3.1 (a gzip member starts with the bytes 1f 8b)
    assert [f.compression for f in found.files] == [
        ("gzip" if int(f.rel[-9:-6]) % 5 == 0 else None) for f in found.files
    ]
    assert [f.rel for f in found.files] == sorted(p.relative_to(tmp_path).as_posix() for p in written)


def discover_lstats_of_the_root(root: Path, monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """The lstat calls of discovering a folder that holds one file only: the root's own."""
    lone = root.parent / (root.name + "-lone")
    _touch(lone / "only.jsonl")
    lstats = _count_calls(monkeypatch, os, "lstat", [])
    discover([lone])
    monkeypatch.undo()
    return lstats
