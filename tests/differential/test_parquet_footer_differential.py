"""Parquet columns answered from the footer's statistics give the same report as their data.

Each scan runs three ways: as shipped with the footer shortcut taken on row groups of any
size (sources/parquetstats.FOOTER_MIN_ROWS lowered to 1, and a short prefix so that a first
null past it sends the column to the data), with the shortcut forced off
(DRIFTLINE_FOOTER_STATS=0), and on the exact path (ReadOptions(exact=True)).  The reports are
compared as JSON text without duration_s.  A spy on parquetstats.answer counts the columns
the footer answered, so a shortcut that never fires fails the test instead of passing it.
"""

from __future__ import annotations

import json
import math
import random
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest

import driftline.sources.jsonfile as jsonfile
from conftest import SHARED_TESTDATA
from driftline.core import jsonnum
from driftline.core.options import ReadOptions
from driftline.core.stats import FieldStats
from driftline.results.report import to_dict
from driftline.scanning.run import scan_paths
from driftline.sources import parquetfile, parquetstats
from driftline.sources.parquetfile import read_parquet

SUITE = SHARED_TESTDATA / "parquet-conformance"
# every Parquet file of the suite, the damaged and the encrypted ones too: an encrypted column's
# metadata must never be touched (it aborts the process), and damage must be reported as before
SUITE_FILES = sorted(
    p
    for d in ("data", "bad_data")
    for p in (SUITE / d).rglob("*")
    if p.name.endswith((".parquet", ".parquet.encrypted"))
)


@pytest.fixture
def answered(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """The shortcut on every row group, with a 3-row prefix; the names of the columns it answered."""
    monkeypatch.setattr(parquetstats, "FOOTER_MIN_ROWS", 1)
    monkeypatch.setattr(parquetstats, "PREFIX_ROWS", 3)
    monkeypatch.setattr(parquetfile, "_UNANSWERED", {})
    monkeypatch.delenv(jsonfile.EXACT_ENV, raising=False)
    monkeypatch.delenv(parquetstats.FOOTER_ENV, raising=False)
    names: list[str] = []
    real = parquetstats.answer

    def spy(*args: Any, **kwargs: Any) -> dict[str, FieldStats]:
        got = real(*args, **kwargs)
        names.extend(got)
        return got

    monkeypatch.setattr(parquetstats, "answer", spy)
    return names


def _report(paths: list[Path], *, footer: bool, exact: bool = False, batch_rows: int = 65_536) -> bytes:
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv(parquetstats.FOOTER_ENV, "1" if footer else "0")
        if exact:
            mp.setenv(jsonfile.EXACT_ENV, "1")
        profile = scan_paths([str(p) for p in paths], read=ReadOptions(batch_rows=batch_rows, exact=exact))
        data = to_dict(profile)
    data.pop("duration_s")
    return jsonnum.dumps(data, option=orjson.OPT_SORT_KEYS)


def _same_three_ways(paths: list[Path], batch_rows: int = 65_536) -> dict[str, Any]:
    on = _report(paths, footer=True, batch_rows=batch_rows)
    off = _report(paths, footer=False, batch_rows=batch_rows)
    exact = _report(paths, footer=True, exact=True, batch_rows=batch_rows)
    for other in (off, exact):
        if on != other:  # show where, not two walls of JSON
            a, b = json.loads(on), json.loads(other)
            for key in ("fields", "files", "events", "summary"):
                assert a[key] == b[key], key
        assert on == other
    return json.loads(on)


# -- the conformance suite ------------------------------------------------------------


@pytest.mark.parametrize("batch_rows", [65_536, 1000])
def test_conformance_suite(answered: list[str], batch_rows: int) -> None:
    # source: Apache Parquet conformance files (parquet-conformance/data and bad_data): missing
    # statistics, NaN in statistics, legacy sort orders, INT96, null pages, damaged pages
    assert len(SUITE_FILES) > 60
    report = _same_three_ways(SUITE_FILES, batch_rows)
    assert len(report["files"]) == len(SUITE_FILES)
    assert len(answered) > 20  # the shortcut was taken, on many columns


def test_each_conformance_file_alone(answered: list[str]) -> None:
    # source: Apache Parquet conformance files; alone, no file's problem can hide another's
    for p in SUITE_FILES:
        assert _report([p], footer=True) == _report([p], footer=False), p.name


# -- files of our own: every type the footer answers, and the cases it must refuse ------


def _columns(rng: random.Random, n: int) -> dict[str, pa.Array]:
    def nulls(values: list[Any], share: float) -> list[Any]:
        return [None if rng.random() < share else v for v in values]

    ints = [rng.randrange(-1000, 1000) for _ in range(n)]
    return {
        "i8": pa.array([v % 100 for v in ints], pa.int8()),
        "i32": pa.array(nulls(ints, 0.1), pa.int32()),
        "i64": pa.array(ints, pa.int64()),
        "big": pa.array([2**60 + v * 2**50 for v in ints], pa.int64()),  # past 2**53: unsafe integers need the data
        "u64": pa.array([abs(v) * 2**50 for v in ints], pa.uint64()),
        "u64_small": pa.array([abs(v) for v in ints], pa.uint64()),
        "u32": pa.array([abs(v) * 2**21 for v in ints], pa.uint32()),
        "f64": pa.array(nulls([rng.uniform(-1e6, 1e6) for _ in range(n)], 0.05), pa.float64()),
        "zeros": pa.array([(0.0, -0.0, 1.5)[i % 3] for i in range(n)], pa.float64()),
        "nan": pa.array([rng.choice([math.nan, 2.5, -7.0, math.inf]) for _ in range(n)], pa.float64()),
        "f32": pa.array([rng.uniform(1, 9) for _ in range(n)], pa.float32()),
        "late_null": pa.array([None if i == n - 2 else i for i in range(n)], pa.int64()),
        "all_null": pa.array([None] * n, pa.int16()),
        "flag": pa.array(nulls([rng.random() < 0.5 for _ in range(n)], 0.02), pa.bool_()),
        "day": pa.array([rng.randrange(-800_000, 2_900_000) for _ in range(n)], pa.int32()).cast(pa.date32()),
        "ns_tz": pa.array([rng.randrange(-(2**62), 2**62) for _ in range(n)], pa.int64()).cast(
            pa.timestamp("ns", "Europe/Paris")
        ),
        "us": pa.array(nulls([rng.randrange(-(2**55), 2**55) for _ in range(n)], 0.3), pa.int64()).cast(
            pa.timestamp("us")
        ),
        "ms_utc": pa.array([rng.randrange(0, 2**42) for _ in range(n)], pa.int64()).cast(pa.timestamp("ms", "UTC")),
        "sec": pa.array([rng.randrange(0, 2**32) for _ in range(n)], pa.int64()).cast(pa.timestamp("s")),
        "dict_int": pa.array([v % 7 for v in ints], pa.int64()).dictionary_encode(),
        "text": pa.array(nulls([rng.choice(["12", "x", "2026-01-02", "", "NaN"]) for _ in range(n)], 0.1)),
        "codes": pa.array([f"c{v % 40:03d}" for v in ints]).dictionary_encode(),  # read back as a dictionary
        "ids": pa.array([str(v * 7919) for v in ints]),  # many distinct values
        "nested": pa.array([{"a": v, "b": [v, v]} for v in ints]),
    }


def _write(folder: Path, rng: random.Random, **options: Any) -> Iterator[Path]:
    for k, (n, group) in enumerate(((500, 120), (301, 301), (64, 7))):
        p = folder / f"part-{k}.parquet"
        pq.write_table(pa.table(_columns(rng, n)), p, row_group_size=group, data_page_size=512, **options)
        yield p


WRITES = {
    "statistics": {},
    "no statistics": {"write_statistics": False},
    "statistics of some columns": {"write_statistics": ["i32", "f64", "day", "flag"]},
    "dictionary pages": {"use_dictionary": True},
    "plain pages": {"use_dictionary": False, "compression": "zstd"},
    "format 1.0, int96": {"version": "1.0", "use_deprecated_int96_timestamps": True},
    "data page v2": {"data_page_version": "2.0", "compression": "snappy"},
}


@pytest.mark.parametrize("write", list(WRITES))
def test_files_of_our_own(tmp_path: Path, answered: list[str], write: str) -> None:
    # source: pyarrow.parquet.write_table, each writer option as documented; the reference is
    # the same files read from their pages
    files = list(_write(tmp_path, random.Random(write), **WRITES[write]))
    _same_three_ways(files)
    _same_three_ways(files, batch_rows=100)  # row groups past a batch: never answered
    if write == "no statistics":
        assert answered == []  # nothing to answer from
    elif write == "statistics of some columns":
        assert set(answered) == {"i32", "f64", "day", "flag"}
    else:
        assert {"i8", "i64", "u64_small", "f64", "nan", "flag", "day", "all_null"} <= set(answered)
        # past 2**53, a zero of either sign, strings, nested: always read
        assert not {"big", "zeros", "text", "nested"} & set(answered)


def test_answers_equal_pyarrow_compute(tmp_path: Path, answered: list[str]) -> None:
    # source: pyarrow.compute (null_count, min_max) over pq.read_table of the same row group
    path = next(_write(tmp_path, random.Random(7)))
    whole = pq.ParquetFile(path)
    seen = 0
    for item in read_parquet(str(path), "part-0.parquet", ReadOptions()):
        if not getattr(item, "known", None):
            continue
        group = whole.read_row_group(item.batch)
        assert set(item.data.column_names) == set(group.column_names) - set(item.known)
        for name, stats in item.known.items():
            col = group[name]
            assert stats.nulls == col.null_count
            assert sum(stats.types.values()) == len(col) - col.null_count
            if pa.types.is_boolean(col.type) or col.null_count == len(col):
                continue
            mm = pc.min_max(col)
            lo, hi = mm["min"], mm["max"]
            if pa.types.is_temporal(col.type):
                try:  # source: Python's datetime.isoformat, where the value is in its range
                    lo, hi = lo.as_py().isoformat(), hi.as_py().isoformat()
                except (ValueError, OverflowError):
                    continue
                assert (stats.minimum, stats.maximum) == (lo, hi)
            else:
                assert (stats.minimum, stats.maximum) == (lo.as_py(), hi.as_py())
            seen += 1
    assert seen >= 10


def test_as_shipped_on_large_row_groups(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # source: pyarrow.parquet.write_table (row groups of 20,000 rows, past FOOTER_MIN_ROWS); the
    # thresholds as shipped, the strings read with their dictionary pages
    monkeypatch.delenv(jsonfile.EXACT_ENV, raising=False)
    monkeypatch.delenv(parquetstats.FOOTER_ENV, raising=False)
    monkeypatch.setattr(parquetfile, "_UNANSWERED", {})
    rng = random.Random(11)
    path = tmp_path / "big.parquet"
    pq.write_table(pa.table(_columns(rng, 50_000)), path, row_group_size=20_000)
    batches = [b for b in read_parquet(str(path), "big.parquet", ReadOptions()) if hasattr(b, "known")]
    assert [bool(b.known) for b in batches] == [True, True, False]  # the last group: 10,000 rows, read whole
    assert pa.types.is_dictionary(batches[0].data.schema.field("text").type)
    assert pa.types.is_dictionary(batches[0].data.schema.field("ids").type)
    assert not pa.types.is_dictionary(batches[2].data.schema.field("text").type)
    _same_three_ways([path])


def test_footers_without_statistics_are_asked_again_now_and_then(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # source: pyarrow.parquet.write_table(write_statistics=False); the same schema and writer
    monkeypatch.delenv(jsonfile.EXACT_ENV, raising=False)
    monkeypatch.delenv(parquetstats.FOOTER_ENV, raising=False)
    monkeypatch.setattr(parquetfile, "_UNANSWERED", {})
    monkeypatch.setattr(parquetstats, "FOOTER_MIN_ROWS", 1)
    table = pa.table(_columns(random.Random(3), 40))
    bare, full = tmp_path / "bare.parquet", tmp_path / "full.parquet"
    pq.write_table(table, bare, write_statistics=False)
    pq.write_table(table, full)

    def answered(path: Path) -> bool:
        return any(getattr(b, "known", None) for b in read_parquet(str(path), path.name, ReadOptions()))

    assert answered(full)
    assert not answered(bare)
    # the next files of that schema and writer are read whole, but one in _RETRY_EVERY asks again
    asked = [answered(full) for _ in range(parquetfile._RETRY_EVERY)]
    assert asked == [False] * (parquetfile._RETRY_EVERY - 1) + [True]
    assert answered(full)  # answered once: asked every time again
    _same_three_ways([bare, full])
