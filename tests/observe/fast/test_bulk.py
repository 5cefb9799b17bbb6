"""observe.bulk: many small batches observed at once equal observe_table on each, batch by batch."""

from __future__ import annotations

import datetime as dt
import math
import random
from pathlib import Path

import pyarrow as pa
import pytest

from driftline.core.stats import class_sample
from driftline.observe.fast.bulk import Batch, observe_batches
from driftline.observe.fast.columnar import observe_table
from driftline.results.profile import Profile
from driftline.results.report import to_dict

# Values at the edges the statistics care about, each with its source.
_FLOATS = [
    0.0,
    -0.0,
    1.5,
    -2.25,
    math.nan,
    math.inf,
    -math.inf,  # source: IEEE 754 (signed zero, NaN, infinities)
    0.1 + 0.2,  # source: IEEE 754 binary64, 0.30000000000000004
    float(2**53),
    1e308,
    5e-324,
]  # source: IEEE 754 binary64 limits
_INTS = [
    0,
    -1,
    7,
    2**53 - 1,
    2**53,
    2**53 + 1,
    -(2**53) - 5,  # source: RFC 7493 section 2.2 (exact to 2**53-1)
    2**63 - 1,
    -(2**63),
]  # source: int64 range
_STRINGS = [
    "",
    " ",
    "n/a",
    "NULL",
    "true",
    "FALSE",
    "42",
    "007",
    "-3.25",
    "1e5",
    "12345678901234567890",
    "0x1F",
    "+1",
    "2024-02-29",
    "2026-02-29",  # source: Gregorian calendar (2024 is a leap year)
    "1985-04-12T23:20:50.52Z",
    "1996-12-19T16:39:57-08:00",
    "1990-12-31T23:59:60Z",  # source: RFC 3339 5.8
    "1985-04-12t23:20:50.52z",
    "1985-04-12 23:20:50",
    "1985-04-12T23:20:50+0800",
    "déjà vu",
    "😀",
    "a\nb",
]


def _column(rng: random.Random, t: pa.DataType, n: int, null_share: float) -> pa.Array:
    def value() -> object:
        if rng.random() < null_share:
            return None
        if pa.types.is_floating(t):
            return rng.choice(_FLOATS)
        if pa.types.is_unsigned_integer(t):
            return rng.choice([0, 1, 2**53 + 1, 2**64 - 1]) if t.bit_width == 64 else rng.randrange(200)
        if pa.types.is_integer(t):
            return rng.choice(_INTS) if t.bit_width == 64 else rng.randrange(-100, 100)
        if pa.types.is_string(t) or pa.types.is_large_string(t):
            return rng.choice(_STRINGS) if rng.random() < 0.7 else f"id-{rng.randrange(10**6)}"
        if pa.types.is_boolean(t):
            return rng.random() < 0.5
        if pa.types.is_date(t):
            return dt.date(rng.choice([1, 1970, 2026, 9999]), rng.randint(1, 12), rng.randint(1, 28))
        if pa.types.is_timestamp(t):
            return dt.datetime(
                rng.choice([1970, 2026]), 1, rng.randint(1, 28), rng.randrange(24), tzinfo=dt.UTC if t.tz else None
            )
        return [rng.randrange(3)]  # a list: observe_table's own walk

    return pa.array([value() for _ in range(n)], t)


_TYPES = [
    pa.int8(),
    pa.int32(),
    pa.int64(),
    pa.uint32(),
    pa.uint64(),
    pa.float32(),
    pa.float64(),
    pa.bool_(),
    pa.string(),
    pa.large_string(),
    pa.date32(),
    pa.date64(),
    pa.timestamp("ms"),
    pa.timestamp("us", "UTC"),
    pa.list_(pa.int64()),
]


def _batches(seed: int, count: int) -> list[Batch]:
    rng = random.Random(seed)
    out = []
    for k in range(count):
        n = rng.choice([1, 2, 3, 17, 200])
        names = rng.sample(["a", "b", "c", "d", "e"], rng.randint(1, 5))
        null_share = rng.choice([0.0, 0.0, 0.3, 1.0])
        cols = {
            name: _column(rng, rng.choice(_TYPES[:3]) if name == "a" else rng.choice(_TYPES), n, null_share)
            for name in names
        }
        out.append(Batch(pa.table(cols), f"part-{k // 3:03d}.parquet", k % 3, (k % 3) * 200))
    return out


def _one_by_one(batches: list[Batch]) -> list:
    return [observe_table(b.data, file=b.file, batch=b.batch, row_start=b.row_start) for b in batches]


@pytest.mark.parametrize("seed", range(12))
def test_equal_to_observe_table_batch_by_batch(seed: int) -> None:
    batches = _batches(seed, 60)
    assert observe_batches(batches) == _one_by_one(batches)


def test_strings_of_every_class_and_their_examples() -> None:
    # Three examples per class once a lossy class repeats, else the first of each: the rule of
    # columnar._string_stats, kept batch by batch although the batches are classified together.
    rows = [
        ["x", "1", "2", "3", "y"],
        ["1", "2", "3", "4"],
        ["", "", None, "2026-02-29", "2024-02-29"],
        [None, None],
        ["1990-12-31T23:59:60Z", "1985-04-12t23:20:50.52z", "n/a"],
    ]
    batches = [Batch(pa.table({"s": pa.array(r, pa.string())}), "f.parquet", k, 10 * k) for k, r in enumerate(rows)]
    got = observe_batches(batches)
    assert got == _one_by_one(batches)
    first = got[0].fields["s"]
    assert first.classes == {"integer": 3, "text": 2}
    assert [e.row for e in first.samples[class_sample("integer")]] == [1, 2, 3]
    assert [e.row for e in got[1].fields["s"].samples[class_sample("integer")]] == [
        10
    ]  # no lossy class: the first only
    assert got[2].fields["s"].classes == {"empty": 2, "date": 1, "text": 1}  # source: 2026 is not a leap year
    assert got[4].fields["s"].leap_seconds == 1 and got[4].fields["s"].lowercase_rfc3339 == 1  # source: RFC 3339 5.8


def test_signed_zeros_and_nan_keep_observe_tables_extremes() -> None:
    # source: IEEE 754: -0.0 == 0.0 and NaN compares with nothing; the extremes skip NaN
    batches = [
        Batch(pa.table({"x": pa.array(v, pa.float64())}), "f.parquet", k, 0)
        for k, v in enumerate([[0.0, -0.0], [-0.0, 0.0], [math.nan, 1.0], [math.nan], [None, -0.0, 2.0]])
    ]
    got = observe_batches(batches)
    assert got == _one_by_one(batches)
    assert got[2].fields["x"].minimum == 1.0 and got[3].fields["x"].minimum is None


def test_repeated_column_names_and_empty_batches() -> None:
    twice = pa.Table.from_arrays([pa.array([1, 2]), pa.array(["a", None])], names=["x", "x"])
    batches = [
        Batch(twice, "a.parquet", 0, 0),
        Batch(pa.table({"x": pa.array([], pa.int64())}), "b.parquet", 0, 0),
        Batch(pa.table({"x": [5]}), "c.parquet", 0, 0),
    ]
    assert observe_batches(batches) == _one_by_one(batches)


# -- through the scan: files read in groups, in a pool or not --------------------------------


def _landing(root: Path) -> Path:
    import pyarrow.parquet as pq

    for k in range(40):
        cols = {
            "id": pa.array(range(k * 10, k * 10 + 10), pa.int64()),
            "reading": pa.array(
                [None if i % 4 == 0 else k * i for i in range(10)], pa.int32() if k < 15 else pa.int64()
            ),  # a widening after 15 files
            "site": pa.array([["a", "b", "", "n/a"][i % 4] for i in range(10)]),
        }
        if k >= 30:
            cols["battery"] = pa.array([float(i) for i in range(10)])  # a column appears
        pq.write_table(pa.table(cols), root / f"part-{k:03d}.parquet")
    (root / "part-020-bad.parquet").write_bytes(b"PAR1" + b"\x00" * 64 + b"PAR1")  # a footer that cannot be read
    (root / "notes.jsonl").write_text('{"id": 1}\n')
    return root


def test_grouped_reading_equals_file_by_file(tmp_path: Path) -> None:
    from driftline.core.options import ReadOptions
    from driftline.scanning.run import scan_paths
    from driftline.sources.discover import discover
    from driftline.sources.readers import read_file

    root = _landing(tmp_path)
    found = discover([root])
    alone = Profile(found.root, tuple(read_file(ref, ReadOptions()) for ref in found.files), found.skipped)
    for jobs in (1, 2):
        profile = scan_paths([root], jobs=jobs)
        assert profile.files == alone.files
        # as the report too: examples compare by place only, their values must match as well
        assert _report(profile) == _report(alone)
    # the widening shows at the first valid value of the first int64 file (row 0 holds a null)
    assert [(e.kind, e.path, e.file, e.row, e.example) for e in profile.events] == [
        ("field-new", "reading", "part-000.parquet", 0, "null"),
        ("field-new", "site", "part-000.parquet", 0, '"a"'),
        ("textclass-changed", "site", "part-000.parquet", 2, '""'),
        ("textclass-changed", "site", "part-000.parquet", 3, '"n/a"'),
        ("type-widened", "reading", "part-015.parquet", 1, "15"),
        ("field-new", "battery", "part-030.parquet", 0, "0.0"),
    ]


def _report(profile: Profile) -> dict:
    data = to_dict(profile)
    data.pop("duration_s"), data.pop("options")  # not content: how long, and how it was asked for
    return data


def test_max_errors_stops_at_the_same_file_with_and_without_a_pool(tmp_path: Path) -> None:
    from driftline.scanning.run import scan_paths

    root = _landing(tmp_path)
    serial, pooled = (scan_paths([root], jobs=jobs, max_errors=1) for jobs in (1, 2))
    assert [f.rel for f in serial.files] == [f.rel for f in pooled.files]
    assert serial.files[-1].rel == "part-020-bad.parquet" and len(serial.files) == 22
    assert serial == pooled
