"""Strings classified on threads give the same report as one column at a time, and as the exact path.

observe.fast.strprofile.string_profiles classifies a batch's string columns together, on a few
threads when they pay (DRIFTLINE_STRING_THREADS; THREADS_MIN_VALUES).  Here the threads are
forced on for every batch, however small, and each report is compared, as JSON text without
duration_s, with the report of the same files with the threads forced off, and with the exact
walk's (DRIFTLINE_EXACT): on bench-like data (scripts/bench's own generators), on the public
conformance suites, and on columns of strings chosen to stress every content class.
"""

from __future__ import annotations

import csv
import importlib.machinery
import importlib.util
import random
import threading
from pathlib import Path
from types import ModuleType

import orjson
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest

import driftline.sources.jsonfile as jsonfile
from conftest import ROOT, SHARED_TESTDATA
from driftline.core import jsonnum
from driftline.core.options import ReadOptions
from driftline.observe import textclass
from driftline.observe.fast import strprofile
from driftline.observe.fast.columnar import observe_table
from driftline.results.report import to_dict
from driftline.scanning.run import scan_paths

CSV_SUITE = SHARED_TESTDATA / "csv-edge-cases" / "csvs"
PARQUET_SUITE = SHARED_TESTDATA / "parquet-conformance" / "data"
JSON_SUITE = SHARED_TESTDATA / "json-parsing" / "test_parsing"


def _bench() -> ModuleType:
    """scripts/bench as a module (its file has no .py suffix), for its data generators."""
    loader = importlib.machinery.SourceFileLoader("driftline_bench", str(ROOT / "scripts" / "bench"))
    spec = importlib.util.spec_from_loader("driftline_bench", loader)
    assert spec is not None
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    return module


THREADS_SEEN: set[str] = set()  # the threads string_profile ran on, in the last report


def _report(paths: list[Path], mode: str, batch_rows: int) -> bytes:
    """The report of paths with the strings classified on threads ("threads"), one column at a
    time ("serial"), or by the exact walk ("exact")."""
    THREADS_SEEN.clear()
    profile_one = strprofile.string_profile

    def spy(*args: object, **kwargs: object) -> strprofile.StringProfile:
        THREADS_SEEN.add(threading.current_thread().name)
        return profile_one(*args, **kwargs)  # type: ignore[arg-type]

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(strprofile, "string_profile", spy)
        mp.setattr(jsonfile, "FAST_MIN_ROWS", 1)
        mp.setattr(strprofile, "THREADS_MIN_VALUES", 0)  # threads for every batch, however small
        mp.setenv(strprofile.THREADS_ENV, "1" if mode == "serial" else "3")
        if mode == "exact":
            mp.setenv(jsonfile.EXACT_ENV, "1")
        else:
            mp.delenv(jsonfile.EXACT_ENV, raising=False)
        profile = scan_paths([str(p) for p in paths], read=ReadOptions(batch_rows=batch_rows, exact=mode == "exact"))
        data = to_dict(profile)
    data.pop("duration_s")
    return jsonnum.dumps(data, option=orjson.OPT_SORT_KEYS)


def _same(paths: list[Path], batch_rows: int, exact: bool = True, threaded: bool = True) -> dict:
    threads = _report(paths, "threads", batch_rows)
    if threaded:  # the threads were really used
        assert any(name.startswith("driftline-strings") for name in THREADS_SEEN)
    assert threads == _report(paths, "serial", batch_rows)
    assert not any(name.startswith("driftline-strings") for name in THREADS_SEEN)
    if exact:
        assert threads == _report(paths, "exact", batch_rows)
    return orjson.loads(threads)


@pytest.fixture(scope="module")
def bench_data(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    bench = _bench()
    folder = tmp_path_factory.mktemp("bench-like")
    out = {"clean": folder / "clean.jsonl", "drift": folder / "drift.jsonl", "csv": folder / "wide.csv"}
    bench._write_jsonl(out["clean"], 3_000, False, 1)
    bench._write_jsonl(out["drift"], 3_000, True, 1)
    bench._write_csv(out["csv"], 3_000, 2)
    return out


@pytest.mark.parametrize("name", ["clean", "drift", "csv"])
@pytest.mark.parametrize("batch_rows", [700, 65_536])
def test_bench_like_data(bench_data: dict[str, Path], name: str, batch_rows: int) -> None:
    report = _same([bench_data[name]], batch_rows)
    assert report["summary"]["rows"] == 3_000
    if name == "csv":  # the generator's columns, read back by Python's csv module (RFC 4180)
        with open(bench_data[name], newline="", encoding="utf-8") as fh:
            header = next(csv.reader(fh))
        assert sorted(report["fields"]) == sorted(header)


def test_csv_edge_cases() -> None:
    files = sorted(CSV_SUITE.glob("*.csv"))
    assert len(files) > 10
    _same(files, 64)


def test_parquet_conformance_data() -> None:
    files = sorted(PARQUET_SUITE.glob("*.parquet"))
    assert len(files) > 10
    _same(files, 1024)


def test_json_parsing_suite_documents() -> None:
    files = sorted(JSON_SUITE.glob("y_*.json"))
    assert len(files) > 50
    _same(files, 1024, exact=False, threaded=False)  # whole documents: the fast path never takes them; threads or not


# Strings for every class, with the class each one has (each fact's source beside it).
STRESS = [
    ("", "empty"),
    ("  \t", "empty"),  # str.isspace whitespace (textclass)
    ("NULL", "null_token"),
    (" n/a ", "null_token"),
    ("True", "boolean"),  # pyarrow's bool cast takes any letter case (textclass docstring, checked there)
    ("fAlSe", "boolean"),
    ("007", "zero_padded"),
    ("-0012", "zero_padded"),
    ("0", "integer"),
    ("-0", "integer"),
    ("9223372036854775807", "integer"),  # source: 2**63 - 1, int64's largest (two's complement)
    ("-9223372036854775808", "integer"),  # source: -2**63, int64's smallest
    ("9223372036854775808", "decimal"),  # one past int64
    ("+12", "text"),  # a '+' is not an integer here: pyarrow's int64 cast rejects it
    ("-1.25", "decimal"),
    ("1e3", "float"),  # source: IEEE 754 / Python float(): exponent form
    ("-2.5E-3", "float"),
    ("1e400", "float_out_of_range"),  # source: IEEE 754 binary64 overflows past about 1.8e308
    ("1e-400", "float_out_of_range"),  # underflows to 0 from a non-zero number
    ("-inf", "float"),
    ("NaN", "float"),
    ("2024-02-29", "date"),  # source: Gregorian calendar, 2024 is a leap year
    ("2023-02-29", "text"),  # source: Gregorian calendar, 2023 is not
    ("1990-12-31T23:59:60Z", "timestamp_rfc3339"),  # source: RFC 3339 section 5.8, a leap second
    ("1985-04-12t23:20:50.52z", "timestamp_rfc3339"),  # source: RFC 3339 section 5.6, lowercase t and z
    ("1996-12-19T16:39:57-08:00", "timestamp_rfc3339"),  # source: RFC 3339 section 5.8
    ("2026-01-02 03:04:05+0100", "timestamp_offset"),
    ("2026-01-02T03:04:05", "timestamp_local"),
    ("2026-13-01T00:00:00Z", "text"),  # source: RFC 3339 section 5.6, date-month is 01-12
    ("Zoë", "text"),
    ("ｔｒｕｅ", "text"),  # fullwidth letters are not ASCII true (textclass: [Tt]-style classes)
    ("٣", "text"),  # an Arabic-Indic digit is not [0-9]
    ("nİl", "text"),  # 'İ' lowers to 'i̇', not 'i' (str.lower, textclass's null tokens)
]


def test_stress_strings_have_their_classes() -> None:
    # The per-value reference agrees with the sources above, so the columns below test real classes.
    assert [textclass.class_of(v) for v, _ in STRESS] == [c for _, c in STRESS]
    # source: Python's float() (IEEE 754 binary64): the out-of-range pair really leaves float64
    assert float("1e400") == float("inf") and float("1e-400") == 0.0
    # source: pyarrow's own date32 cast rejects 2023-02-29, as the Gregorian calendar does
    with pytest.raises(pa.ArrowInvalid):
        pc.cast(pa.array(["2023-02-29"]), pa.date32())


def _column(rng: random.Random, n: int, distinct: int) -> list[str | None]:
    """n values drawn from the first `distinct` stress strings and their numbered variants, some null."""
    pool = (
        [v for v, _ in STRESS][:distinct]
        if distinct <= len(STRESS)
        else [STRESS[i % len(STRESS)][0] + (str(i) if i >= len(STRESS) and i % 3 else "") for i in range(distinct)]
    )
    return [None if rng.random() < 0.05 else rng.choice(pool) for _ in range(n)]


@pytest.mark.parametrize("n", [40, 5_000])
@pytest.mark.parametrize("distinct", [3, len(STRESS), 600, 4_000])
def test_threaded_profiles_equal_classify(n: int, distinct: int, monkeypatch: pytest.MonkeyPatch) -> None:
    """Each column's profile, computed with others on threads, equals textclass.classify's answer
    over it: few distinct values (the table of verdicts), a dictionary, or every value apart."""
    monkeypatch.setenv(strprofile.THREADS_ENV, "3")
    monkeypatch.setattr(strprofile, "THREADS_MIN_VALUES", 0)
    rng = random.Random(n * 7 + distinct)
    columns = [pa.array(_column(rng, n, distinct), pa.string()) for _ in range(5)]
    profiles = strprofile.string_profiles([(c, None) for c in columns], 3)
    for col, prof in zip(columns, profiles, strict=True):
        scan = textclass.classify(col)
        assert prof.counts == scan.counts
        assert {k: v[0] for k, v in prof.first.items()} == scan.first_index
        assert (prof.int_digits, prof.frac_digits) == (scan.int_digits, scan.frac_digits)
        assert (prof.leap_seconds, prof.lowercase_rfc3339) == (scan.leap_seconds, scan.lowercase_rfc3339)
        assert prof.max_length == max(len(v) for v in col.to_pylist() if v is not None)


def test_stress_strings_in_files(tmp_path: Path) -> None:
    """The stress strings as JSON strings, CSV cells and Parquet strings (plain and dictionary
    pages): the same report threaded, one column at a time, and exact."""
    rng = random.Random(5)
    n = 3_000
    cols = {f"s{k}": _column(rng, n, d) for k, d in enumerate((3, len(STRESS), 600, 2_500))}
    with open(tmp_path / "s.jsonl", "wb") as fh:
        for i in range(n):
            fh.write(orjson.dumps({k: v[i] for k, v in cols.items()}) + b"\n")
    with open(tmp_path / "s.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        w.writerows([["" if v[i] is None else v[i] for v in cols.values()] for i in range(n)])
    table = pa.table({k: pa.array(v, pa.string()) for k, v in cols.items()})
    pq.write_table(table, tmp_path / "plain.parquet", use_dictionary=False)
    pq.write_table(table, tmp_path / "dict.parquet", use_dictionary=True)
    for name in ("s.jsonl", "s.csv", "plain.parquet", "dict.parquet"):
        report = _same([tmp_path / name], 1_000)
        assert report["summary"]["rows"] == n
        counts = report["fields"]["s1"]["classes"]
        want = {c: 0 for _, c in STRESS}
        for v in cols["s1"]:
            if v is not None and (name != "s.csv" or v != ""):
                want[textclass.class_of(v)] += 1
        if name == "s.csv":  # an empty cell and a missing value are one thing in CSV (RFC 4180 has no null)
            want["empty"] += sum(v is None or v == "" for v in cols["s1"])
        assert counts == {c: k for c, k in want.items() if k}


def _stamps(rng: random.Random, shape: str, distinct: int) -> list[str]:
    """distinct timestamps of one shape, some on days that do not exist, some with second 60, some
    with a long fraction, RFC 3339 ones sometimes in lowercase."""
    out = []
    for i in range(distinct):
        day = f"{2020 + i % 5}-{1 + i % 12:02d}-{1 + i % 31:02d}"  # 2023-02-29, 2021-04-31: no such days
        clock = f"{i % 24:02d}:{i // 24 % 60:02d}:{60 if i % 97 == 0 else i % 60:02d}"  # RFC 3339 5.7: 60 a leap second
        if i % 13 == 0:
            clock += ".123456789"  # RFC 3339 section 5.6: time-secfrac is 1*DIGIT
        if shape == "timestamp_rfc3339":
            v = f"{day}T{clock}Z"
            out.append(v.lower() if i % 11 == 0 else v)  # RFC 3339 section 5.6: t and z may be lowercase
        elif shape == "timestamp_offset":
            out.append(f"{day} {clock}+0100")
        else:
            out.append(f"{day} {clock}")
    return out


@pytest.mark.parametrize("shape", ["timestamp_rfc3339", "timestamp_offset", "timestamp_local"])
@pytest.mark.parametrize("distinct", [300, 2_000, 9_000])
@pytest.mark.parametrize("mixed", [False, True])
def test_repeated_timestamps_equal_classify(shape: str, distinct: int, mixed: bool) -> None:
    """Timestamp columns whose values repeat are classified on their dictionary (string_profile);
    the profile equals textclass.classify's over every row, mixed with text or not."""
    rng = random.Random(distinct)
    pool = _stamps(rng, shape, distinct)
    values: list[str | None] = [pool[0]] + [None if rng.random() < 0.02 else rng.choice(pool) for _ in range(9_999)]
    if mixed:
        values[5_000] = "not a time"
    col = pa.array(values, pa.string())
    prof = strprofile.string_profile(col, 3)
    scan = textclass.classify(col)
    assert prof.counts == scan.counts
    assert {k: v[0] for k, v in prof.first.items()} == scan.first_index
    assert (prof.leap_seconds, prof.lowercase_rfc3339) == (scan.leap_seconds, scan.lowercase_rfc3339)
    assert prof.max_length == max(len(v) for v in values if v is not None)
    # source: Gregorian calendar: 2023-02-29 does not exist, so some rows are text whatever the shape
    assert scan.counts.get("text", 0) > 0 and scan.counts.get(shape, 0) > 0
    if shape == "timestamp_rfc3339":
        assert scan.lowercase_rfc3339 > 0
    assert scan.leap_seconds > 0


def test_threads_forced_in_pool_workers(bench_data: dict[str, Path], monkeypatch: pytest.MonkeyPatch) -> None:
    """Threads forced on in a pool's workers, forked after this process made its own pool of
    threads (a child makes its own: the parent's threads are not in it): the serial report."""
    files = [bench_data["clean"], bench_data["drift"], bench_data["csv"]]
    serial = _report(files, "serial", 700)
    assert _report(files, "threads", 700) == serial  # this process's pool of threads now exists
    monkeypatch.setenv(strprofile.THREADS_ENV, "3")
    monkeypatch.setattr(strprofile, "THREADS_MIN_VALUES", 0)
    monkeypatch.setattr(jsonfile, "FAST_MIN_ROWS", 1)
    monkeypatch.setenv("DRIFTLINE_TEST_ALWAYS_POOL", "1")  # workers.TEST_POOL_ENV: a pool for small work
    profile = scan_paths([str(p) for p in files], jobs=2, read=ReadOptions(batch_rows=700))
    data = to_dict(profile)
    data.pop("duration_s")
    assert jsonnum.dumps(data, option=orjson.OPT_SORT_KEYS) == serial


def test_columns_of_one_name(monkeypatch: pytest.MonkeyPatch) -> None:
    """Two string columns of one name (Arrow allows it) are observed as one column at a time does."""
    rng = random.Random(9)
    a = pa.array(_column(rng, 3_000, len(STRESS)), pa.string())
    b = pa.array(_column(rng, 3_000, 600), pa.string())
    c = pa.array(_column(rng, 3_000, 3), pa.string())
    table = pa.Table.from_arrays([a, b, c], names=["x", "x", "y"])
    got = {}
    for threads in ("1", "3"):
        monkeypatch.setenv(strprofile.THREADS_ENV, threads)
        monkeypatch.setattr(strprofile, "THREADS_MIN_VALUES", 0)
        got[threads] = observe_table(table, file="t.parquet", batch=0, row_start=0)
    assert got["1"] == got["3"]
    # the last column of a name is the one kept, as a dict keeps the last value of a key
    assert got["3"].fields["x"].classes == textclass.classify(b).counts
