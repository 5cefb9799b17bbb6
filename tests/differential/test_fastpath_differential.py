"""The fast paths and the exact path give the same report, byte for byte, on the test corpus.

Every scan here runs twice: once as shipped (columnar fast paths where they apply) and once
with ReadOptions(exact=True) (the per-record walk everywhere).  The reports are compared as
JSON text without duration_s, so 1 and 1.0, or -0.0 and 0.0, count as different.  Batches
are small and the fast path's minimum batch is lowered so the fast path is really taken.
"""

from __future__ import annotations

import json
import random
from dataclasses import replace
from pathlib import Path
from typing import Any

import orjson
import pytest

import driftline.sources.jsonfile as jsonfile
from conftest import SHARED_TESTDATA
from driftline.core import jsonnum
from driftline.core.options import ReadOptions
from driftline.observe import jsonparse
from driftline.observe.fast import jsonbatch
from driftline.results.report import to_dict
from driftline.scanning.run import scan_paths

TESTDATA = SHARED_TESTDATA
JSON_SUITE = TESTDATA / "json-parsing" / "test_parsing"
CSV_SUITE = TESTDATA / "csv-edge-cases" / "csvs"
PARQUET_SUITE = TESTDATA / "parquet-conformance" / "data"


@pytest.fixture(autouse=True)
def _fast_path_on_small_batches(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(jsonfile, "FAST_MIN_ROWS", 1)
    monkeypatch.delenv(jsonfile.EXACT_ENV, raising=False)


@pytest.fixture(params=["shipped", "eager"])
def knobs(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    """The JSON fast path as shipped, and with its shortcuts taken on tiny inputs: every
    group of rows set aside typed by Arrow on its own, and every batch's first parse
    declared from a probe of its first line or two."""
    if request.param == "eager":
        monkeypatch.setattr(jsonbatch, "ARROW_ASIDE_MIN", 1)
        monkeypatch.setattr(jsonparse, "PROBE_BYTES", 64)
    return str(request.param)


def _report(paths: list[Path], exact: bool, batch_rows: int) -> bytes:
    # The environment switch reaches every reader (Parquet's too); ReadOptions.exact the ones given it.
    with pytest.MonkeyPatch.context() as mp:
        if exact:
            mp.setenv(jsonfile.EXACT_ENV, "1")
        profile = scan_paths([str(p) for p in paths], read=ReadOptions(batch_rows=batch_rows, exact=exact))
        data = to_dict(profile)
    data.pop("duration_s")
    return jsonnum.dumps(data, option=orjson.OPT_SORT_KEYS)  # integers past 64 bits stay exact


def _same(paths: list[Path], batch_rows: int) -> dict[str, Any]:
    fast, exact = _report(paths, False, batch_rows), _report(paths, True, batch_rows)
    if fast != exact:  # show where, not two walls of JSON
        a, b = json.loads(fast), json.loads(exact)
        for key in ("fields", "files", "events", "summary"):
            assert a[key] == b[key], key
    assert fast == exact
    return json.loads(fast)


# -- the demo landing directory ------------------------------------------------------


@pytest.mark.parametrize("batch_rows", [50, 65_536])
def test_demo(demo_dir: Path, batch_rows: int) -> None:
    report = _same([demo_dir / "landing"], batch_rows)
    assert report["summary"]["files"] > 10 and report["summary"]["rows"] > 1000


# -- generated drift cases -----------------------------------------------------------

_STRINGS = [
    "",
    " ",
    "null",
    "N/A",
    "true",
    "FALSE",
    "42",
    "007",
    "-3.25",
    "1e5",
    "12345678901234567890",
    "2026-02-29",
    "2024-02-29",
    "1990-12-31T23:59:60Z",
    "1985-04-12t23:20:50.52z",
    "1996-12-19T16:39:57-08:00",
    "1985-04-12 23:20:50",
    "1985-04-12T23:20:50+0800",
    "2026-01-01T00:00:00.123456789Z",
    "plain text",
    "déjà vu",
    "😀",
    "a\nb",
    "0x1F",
    "+1",
]
_NUMBERS = [
    0,
    -0.0,
    1,
    1.0,
    -1,
    2.5,
    1e300,
    -1e-300,
    2**53,
    2**53 + 1,
    2**63 - 1,
    2**63,
    2**64 - 1,
    2**64,
    -(2**63),
    -(2**63) - 1,
    12.0,
    0.1,
    1e16,
    123456789.0,
]


def _value(rng: random.Random, depth: int = 0) -> Any:
    roll = rng.random()
    if roll < 0.12:
        return None
    if roll < 0.4:
        return rng.choice(_STRINGS)
    if roll < 0.65:
        return rng.choice(_NUMBERS)
    if roll < 0.72:
        return rng.random() < 0.5
    if depth >= 2:
        return rng.randrange(10)
    if roll < 0.86:
        return [_value(rng, depth + 1) for _ in range(rng.randrange(4))]
    return {k: _value(rng, depth + 1) for k in rng.sample(["x", "y", "a.b", "`q`", "é"], rng.randrange(4))}


def _record(rng: random.Random, i: int, n: int, style: str) -> dict[str, Any]:
    rec: dict[str, Any] = {"id": i}
    if style == "typed":  # homogeneous columns with rare drift: where the fast path must hold
        rec["n"] = rng.randrange(1000) if i < n // 2 else round(rng.uniform(0, 100), 1)
        rec["s"] = rng.choice(_STRINGS[:8]) if rng.random() < 0.9 else rng.choice(_STRINGS)
        rec["tags"] = rng.sample(["a", "b", "c"], rng.randrange(3)) if rng.random() < 0.97 else "a"
        pos = {"lat": round(rng.uniform(-9, 9), 2)}
        if rng.random() < 0.1:
            pos["lat"] = None
        if i > n // 3:
            pos["alt"] = rng.choice([1, 2, 3.5, None])
        rec["pos"] = pos if rng.random() < 0.95 else None
        if rng.random() < 0.05:
            rec["maybe"] = None
        if rng.random() < 0.3:
            rec["items"] = [{"k": rng.choice([1, None]), **({"z": "q"} if rng.random() < 0.5 else {})}]
        rec["empty"] = [] if rng.random() < 0.5 else {}
    else:  # anything anywhere
        for name in rng.sample(["a", "b", "c", "d", "e", "f"], rng.randrange(1, 6)):
            rec[name] = _value(rng)
    return rec


def _drift_file(path: Path, n: int, style: str, seed: int) -> Path:
    rng = random.Random(seed)
    # json.dumps, not orjson: it writes integers past 64 bits, and floats as 1e+300 / -0.0
    text = "".join(json.dumps(_record(rng, i, n, style), ensure_ascii=rng.random() < 0.5) + "\n" for i in range(n))
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize("style", ["typed", "mixed"])
@pytest.mark.parametrize("batch_rows", [1, 37, 500])
def test_generated_drift(tmp_path: Path, style: str, batch_rows: int, knobs: str) -> None:
    n = 120 if batch_rows == 1 else 900  # one Arrow parse per row is slow: fewer rows there
    files = [_drift_file(tmp_path / f"{style}-{k}.jsonl", n, style, seed=k) for k in range(3)]
    report = _same(files, batch_rows)
    assert report["summary"]["rows"] == 3 * n and report["summary"]["errors"] == 0


def test_lines_the_exact_reader_reports(tmp_path: Path, knobs: str) -> None:
    # Blank, malformed, CRLF, BOM, NaN (RFC 8259 section 6 forbids it; Arrow accepts it),
    # two objects on one line (Arrow reads both), a scalar line, a line past the limit,
    # invalid UTF-8, deep nesting, and a last line without a newline.
    good = [orjson.dumps({"a": i, "b": str(i)}) for i in range(40)]
    odd = [
        b"",
        b"   ",
        b'{"a": 1,}',
        b'{"a": 1}\r',
        b'{"a": NaN}',
        b'{"a": 1} {"a": 2}',
        b"[1, 2]",
        b"7",
        b'{"a": "' + b"x" * 300 + b'"}',
        b'{"a": "\xff"}',
        b'{"a": ' + b"[" * 600 + b"]" * 600 + b"}",
        b'{"a": -Infinity}',
        b'{"a": "\\ud800"}',
        b'{"a": 1, "a": 2}',
    ]
    files = []
    for k, line in enumerate(odd):
        f = tmp_path / f"odd-{k}.jsonl"
        f.write_bytes(b"\n".join(good[:20] + [line] + good[20:]) + b"\n")
        files.append(f)
    (tmp_path / "bom.jsonl").write_bytes(b"\xef\xbb\xbf" + b"\n".join(good) + b"\n")
    (tmp_path / "no-final-newline.jsonl").write_bytes(b"\n".join(good))
    files += [tmp_path / "bom.jsonl", tmp_path / "no-final-newline.jsonl"]
    for batch_rows in (8, 1000):
        profile = scan_paths([str(f) for f in files], read=ReadOptions(batch_rows=batch_rows, max_record_bytes=200))
        exact = scan_paths(
            [str(f) for f in files], read=ReadOptions(batch_rows=batch_rows, max_record_bytes=200, exact=True)
        )
        a, b = to_dict(profile), to_dict(exact)
        a.pop("duration_s"), b.pop("duration_s")
        assert jsonnum.dumps(a) == jsonnum.dumps(b)
    kinds = sorted({i.kind for i in profile.issues})
    assert kinds == ["bom", "crlf", "malformed-json", "too-large"]


_EDGE_NUMBERS = [
    0,
    -0.0,
    1,
    1.0,
    2.5,
    12.0,
    2**53 - 1,
    2**53,
    2**53 + 1,
    2**63 - 1,
    2**63,
    2**64,
    -(2**63),
    -(2**63) - 1,
    1e308,
    -1.7976931348623157e308,
    5e-324,
    1e16,
]  # float64/int64 edges (IEEE 754)


def _changing_line(rng: random.Random, i: int, n: int, duplicates: bool = False) -> str:
    """A record whose fields change kind within a batch, written with varied spacing and traps."""
    late = i >= n // 2
    rec: dict[str, Any] = {"id": i, "ts": f"2026-03-{1 + i % 28:02d}T10:00:{i % 60:02d}Z"}
    roll = rng.random()
    if roll < 0.03:
        rec["v"] = None
    elif roll < 0.05:
        pass  # v absent
    elif late:
        rec["v"] = rng.choice(["1", "1.0", "x", "2026-01-01T00:00:00Z", "", "v"]) if rng.random() < 0.98 else 7
    else:
        rec["v"] = rng.choice(_EDGE_NUMBERS)
    pos: dict[str, Any] = {"lat": round(rng.uniform(-9, 9), 1) if i < 2 * n // 3 else f"{rng.randrange(9)}N"}
    if rng.random() < 0.1:
        pos["v"] = rng.choice([1, None] if not 400 <= i < 420 else ["1"])  # the same name one level down
    if rng.random() < 0.05:
        pos["lat"] = None
    rec["pos"] = pos
    rec["tags"] = rng.sample(["a", "v", "lat"], rng.randrange(3)) if rng.random() < 0.95 else "v"  # keys as values
    if rng.random() < 0.05:
        rec["note"] = rng.choice(['"v": "x"', "v", "\\", '{"lat": 1}'])  # a key's text inside a string
    if rng.random() < 0.02:
        rec["deep"] = json.loads("[" * 30 + "]" * 30)
    sep = rng.choice([(", ", ": "), (",", ":"), (",", " :\t")])
    line = json.dumps(rec, separators=sep, ensure_ascii=rng.random() < 0.5)
    if rng.random() < 0.03 and i < 600:  # (among rows of two kinds, an escaped key hides from the patterns)
        line = line.replace('"v"', '"\\u0076"', 1)  # an escaped key (RFC 8259 section 7)
    if duplicates and i in (1234, 1240):
        line = '{"v": 0, ' + line[1:]  # a duplicate key: orjson keeps the last; Arrow refuses the batch
    return line


@pytest.mark.parametrize("batch_rows", [64, 700, 4096])
def test_kinds_that_change_within_a_batch(tmp_path: Path, batch_rows: int, knobs: str) -> None:
    # A number that becomes a string halfway, a nested number that becomes a string at two
    # thirds, rare lists that are strings, the same names at two depths and as values,
    # escaped and duplicate keys, float64/int64 edges: the rows of each kind are set aside,
    # walked or typed on their own, and the report is the exact walk's.
    files = []
    for k in range(3):
        rng = random.Random(100 + k)
        n = 3000
        lines = [_changing_line(rng, i, n, duplicates=k == 0) for i in range(n)]
        if k == 1:
            lines.insert(1500, "")  # a blank line: that batch takes the exact walk, the others not
        f = tmp_path / f"changing-{k}.jsonl"
        f.write_text("".join(x + "\n" for x in lines), encoding="utf-8")
        files.append(f)
    report = _same(files, batch_rows)
    assert report["summary"]["rows"] == 9000
    assert set(report["fields"]["v"]["types"]) >= {"float64", "int64", "string"}
    assert set(report["fields"]["pos.lat"]["types"]) == {"float64", "string"}


# -- conformance suites --------------------------------------------------------------


def _suite_lines(tmp_path: Path, prefix: str) -> list[Path]:
    """Each suite document as a field value on JSON Lines, between ordinary records."""
    out = []
    for f in sorted(JSON_SUITE.glob(prefix + "*.json")):
        body = f.read_bytes().strip()
        if b"\n" in body or b"\r" in body or not body:
            continue
        target = tmp_path / (f.stem + ".jsonl")
        target.write_bytes(b'{"k": 1, "v": ' + body + b'}\n{"k": 2}\n{"k": 3, "v": ' + body + b"}\n")
        out.append(target)
    return out


@pytest.mark.parametrize("prefix", ["y_", "n_", "i_"])
def test_json_parsing_suite_values_on_lines(tmp_path: Path, prefix: str, knobs: str) -> None:
    # source: JSON parsing test suite (RFC 8259 cases), y_/n_/i_ files: whatever the exact
    # reader accepts or reports, the fast path must say the same.
    files = _suite_lines(tmp_path, prefix)
    assert len(files) == {"y_": 93, "n_": 183, "i_": 35}[prefix]  # the one-line documents
    _same(files, 2)


def test_json_parsing_suite_documents() -> None:
    # source: JSON parsing test suite (RFC 8259 cases), y_ files as documents
    files = sorted(JSON_SUITE.glob("y_*.json"))
    assert len(files) == 95
    report = _same(files, 3)
    assert report["summary"]["errors"] == 0


def test_csv_edge_cases() -> None:
    # source: csv-edge-cases suite
    _same(sorted(CSV_SUITE.glob("*.csv")), 2)


def test_parquet_conformance_data() -> None:
    # source: Apache Parquet conformance files (parquet-conformance/data)
    files = sorted(p for p in PARQUET_SUITE.iterdir() if p.suffix == ".parquet")
    assert len(files) > 40
    _same(files, 1000)


# -- byte spans of one file in a process pool ----------------------------------------


@pytest.mark.parametrize("style", ["typed", "mixed"])
def test_spans_in_parallel_equal_one_reader(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, style: str) -> None:
    import driftline.sources.jsonsplit as jsonsplit

    monkeypatch.setattr(jsonsplit, "SPLIT_MIN_BYTES", 1)
    f = _drift_file(tmp_path / "one.jsonl", 2000, style, seed=7)
    odd = tmp_path / "odd.jsonl"  # a blank and a malformed line move every later batch start
    lines = f.read_bytes().split(b"\n")
    odd.write_bytes(b"\n".join(lines[:700] + [b"", b"{oops"] + lines[700:]))
    for target in (f, odd):
        spans = jsonsplit.plan(discover_one(target), ReadOptions(batch_rows=64), 4)
        assert len(spans) == 4 and spans[1].lines % 64 == 0
        reports = []
        for jobs, exact in ((3, False), (1, True)):
            profile = scan_paths([str(target)], read=ReadOptions(batch_rows=64, exact=exact), jobs=jobs)
            data = to_dict(profile)
            data.pop("duration_s")
            reports.append(jsonnum.dumps(data))
        assert reports[0] == reports[1]


def _csv_rows(rng: random.Random, n: int) -> list[list[str]]:
    """Rows mixing every content class and the edge strings (a quoted newline among them)."""
    rows = []
    for i in range(n):
        rows.append(
            [
                str(i),
                rng.choice(_STRINGS),
                f"{rng.uniform(-1e4, 1e4):.{rng.randrange(4)}f}",
                rng.choice(_STRINGS[11:19]),
                rng.choice(["a", "b", 'say "hi"', "x,y", "two\nlines", ""]),
            ]
        )
    return rows


def _csv_text(rows: list[list[str]], eol: str) -> str:
    import csv
    import io

    out = io.StringIO()
    csv.writer(out, lineterminator=eol).writerows([["id", "s", "amount", "stamp", "note"], *rows])
    return out.getvalue()


# Each variant: what to do to the written file, and whether the spans join (True: nothing for
# their checks to catch), must fall back to one reader (False: the reader reports something)
# or may do either (None: a quote or line end that moves rows, caught by a check or harmless).
_CSV_VARIANTS = {
    "clean": (lambda b: b, True),
    "crlf": (None, True),
    "bom": (lambda b: b"\xef\xbb\xbf" + b, True),
    "no final newline": (lambda b: b.rstrip(b"\n"), True),
    "ragged": (lambda b: b.replace(b"\n170,", b"\n170,extra,", 1), False),
    "invalid utf-8": (lambda b: b.replace(b"\n190,", b"\n190,\xff", 1), False),
    "line too long": (lambda b: b.replace(b"\n130,", b"\n130," + b"z" * 5000, 1), False),
    "stray quote": (lambda b: b.replace(b"\n30,", b'\n30x"y,', 1), None),
    "unclosed quote": (lambda b: b.replace(b"\n150,", b'\n150,"', 1), None),
    "blank lines": (lambda b: b.replace(b"\n50,", b"\n\n50,", 1), None),
    "cr alone": (lambda b: b.replace(b"\n110,", b"\r110,", 1), None),
}


@pytest.mark.parametrize(
    ("variant", "batch_rows"),
    [
        *[("clean", n) for n in (1, 7, 64, 500)],
        *[(v, n) for k, v in enumerate(sorted(_CSV_VARIANTS)) if v != "clean" for n in ((1, 7, 64, 500)[k % 4], 37)],
    ],
)
def test_csv_spans_in_parallel_equal_one_reader(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, variant: str, batch_rows: int
) -> None:
    # source: RFC 4180 section 2 (quoted fields hold commas, doubled quotes and line breaks;
    # CRLF ends records); the other variants are what writers get wrong.
    import driftline.sources.csvsplit as csvsplit
    import driftline.sources.split as split  # where spans that do not join fall back to one reader

    monkeypatch.setattr(csvsplit, "SPLIT_MIN_BYTES", 1)
    fallbacks: list[str] = []
    real_read_file = split.read_file
    monkeypatch.setattr(split, "read_file", lambda ref, opts: fallbacks.append(ref.rel) or real_read_file(ref, opts))
    change, joins = _CSV_VARIANTS[variant]
    rows = _csv_rows(random.Random(batch_rows), 200 if batch_rows == 1 else 1500)
    data = _csv_text(rows, "\r\n").encode() if variant == "crlf" else change(_csv_text(rows, "\n").encode())
    target = tmp_path / "one.csv"
    target.write_bytes(data)
    opts = ReadOptions(batch_rows=batch_rows, max_record_bytes=4000)
    if joins:
        assert len(csvsplit.plan(discover_one(target), opts, 6)) > 1
    reports = []
    for jobs, exact in ((3, False), (1, True)):
        profile = scan_paths([str(target)], read=replace(opts, exact=exact), jobs=jobs)
        data_ = to_dict(profile)
        data_.pop("duration_s")
        reports.append(jsonnum.dumps(data_))
    assert reports[0] == reports[1]
    if joins is not None:
        assert fallbacks == ([] if joins else ["one.csv"])


def test_csv_edge_cases_as_spans(monkeypatch: pytest.MonkeyPatch) -> None:
    # source: csv-edge-cases suite, each file cut into spans of one row where it has rows enough
    import driftline.sources.csvsplit as csvsplit

    monkeypatch.setattr(csvsplit, "SPLIT_MIN_BYTES", 1)
    files = sorted(CSV_SUITE.glob("*.csv"))
    for batch_rows in (1, 2):
        reports = []
        for jobs, exact in ((2, False), (1, True)):
            read = ReadOptions(batch_rows=batch_rows, exact=exact)
            profile = scan_paths([str(f) for f in files], read=read, jobs=jobs)
            data = to_dict(profile)
            data.pop("duration_s")
            reports.append(jsonnum.dumps(data))
        assert reports[0] == reports[1]


def discover_one(path: Path):  # noqa: ANN201 - a FileRef
    from driftline.sources.discover import discover

    return discover([str(path)]).files[0]


# -- CSV and Parquet string columns: distinct-value classification vs every value ---------


def test_generated_csv_and_parquet(tmp_path: Path) -> None:
    import csv

    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = random.Random(11)
    n = 6000
    cols = {
        "few": [rng.choice(_STRINGS) for _ in range(n)],  # distinct values classified once
        "many": [
            f"{rng.randrange(10**6)}.{rng.randrange(100)}" if rng.random() < 0.7 else rng.choice(_STRINGS)
            for _ in range(n)
        ],
        "stamps": [rng.choice(_STRINGS[11:19]) for _ in range(n)],
        "flag": [rng.choice(["true", "false", "", "n/a"]) for _ in range(n)],
        # distinct values of every class, dates among them: classified by their digit patterns
        "ids": [
            rng.choice(
                [
                    str(rng.randrange(10**19)),
                    f"-{rng.random():.9f}",
                    f"{rng.random():e}",
                    f"x{i}",
                    f"{rng.randrange(9999):04d}-{rng.randint(1, 12):02d}-{rng.randint(1, 31):02d}",
                    "1" * rng.randint(15, 80),
                ]
            )
            for i in range(n)
        ],
    }
    with open(tmp_path / "t.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        w.writerows(zip(*cols.values(), strict=True))
    table = pa.table({k: pa.array([None if rng.random() < 0.05 else v for v in vs]) for k, vs in cols.items()})
    pq.write_table(table, tmp_path / "t.parquet", row_group_size=2500)
    for batch_rows in (5000, 65_536):
        report = _same([tmp_path / "t.csv", tmp_path / "t.parquet"], batch_rows)
        assert report["summary"]["rows"] == 2 * n


def _stamp(rng: random.Random, shape: str) -> str:
    # years 0000 (pyarrow accepts it), impossible days, leap seconds, lowercase t/z, long fractions
    day = f"{rng.choice(['2024', '2026', '0000', '1900'])}-{rng.randint(1, 12):02d}-{rng.randint(1, 31):02d}"
    clock = f"{rng.randint(0, 23):02d}:{rng.randint(0, 59):02d}:{rng.choice(['05', '59', '60'])}"
    clock += rng.choice(["", ".5", ".123456789"])
    if shape == "rfc3339":
        return day + rng.choice("Tt") + clock + rng.choice(["Z", "z", "+05:30", "-08:00"])
    if shape == "offset":
        return day + " " + clock + rng.choice(["Z", "+0530", "-08"])
    return day + rng.choice("T ") + clock


def test_timestamp_columns(tmp_path: Path, knobs: str) -> None:
    # Columns of one timestamp shape are classified from their distinct days (strprofile).
    rng = random.Random(5)
    n = 5000
    rows = [
        {
            "rfc": _stamp(rng, "rfc3339"),
            "off": _stamp(rng, "offset"),
            "loc": _stamp(rng, "local"),
            "mixed": _stamp(rng, rng.choice(["rfc3339", "local"])),
        }
        for _ in range(n)
    ]
    for row in rows[::97]:
        row["rfc"] = None
    (tmp_path / "t.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows), encoding="utf-8")
    with open(tmp_path / "t.csv", "w", encoding="utf-8") as fh:
        fh.write("rfc,off,loc,mixed\n")
        fh.writelines(",".join(r[k] or "" for k in ("rfc", "off", "loc", "mixed")) + "\n" for r in rows)
    report = _same([tmp_path / "t.jsonl", tmp_path / "t.csv"], 2048)
    classes = report["fields"]["rfc"]["classes"]
    assert set(classes) == {"timestamp_rfc3339", "text", "empty"}  # empty: the CSV's blank cells


def test_values_read_off_the_line(tmp_path: Path, knobs: str) -> None:
    # Nulls and integer literals are read off a line's text when the key occurs once in it;
    # these lines put the key's text elsewhere too (a string value, an escaped key, another
    # depth of a name used twice) and numbers at the edges of what a double holds exactly.
    rng = random.Random(9)
    numbers = [0, -0, 0.0, -0.0, 1, 1.0, 2.5, 12, 12.0, 1e3, 2**53 - 1, 2**53, 2**53 + 1, -(2**53), 10**20, 1e20]
    out = []
    for i in range(3000):
        rec: dict[str, Any] = {"i": i}
        roll = rng.random()
        if roll < 0.2:
            rec["v"] = None
        elif roll < 0.6:
            rec["v"] = rng.choice(numbers)
        elif roll < 0.7:
            rec["note"] = "v"  # the key's text as a value; v absent
        rec["w"] = rng.choice([None, 1, 1.5, 2.0])
        rec["s"] = {"w": rng.choice([None, 3, 3.5])} if rng.random() < 0.5 else {}  # 'w' used twice
        line = json.dumps(rec)
        if rng.random() < 0.05:
            line = line.replace('"v"', '"\\u0076"')  # an escaped key
        out.append(line + ("  " if rng.random() < 0.05 else "") + "\n")
    (tmp_path / "v.jsonl").write_text("".join(out), encoding="utf-8")
    report = _same([tmp_path / "v.jsonl"], 1500)
    assert report["fields"]["v"]["nulls"] > 400 and report["fields"]["s.w"]["types"]


# -- shape tallies (core/shapetally.py): the fast path parses again, the walk tallies its records --


def _payloads(n: int, nulls: bool = True) -> list[bytes]:
    rnd = random.Random(16)
    out = []
    for i in range(n):
        kind = ["push", "issue", "release"][rnd.randrange(3)]
        rec: dict[str, Any] = {"kind": kind, "id": i, "actor": rnd.choice(["ann", "bo"])}
        if i % 9 == 0:
            rec["v"] = 1 if i % 18 else [1]  # a list that is sometimes a scalar: rows set aside
        if kind == "push":
            rec["ref"] = "main"
            if rnd.random() < 0.3:
                rec["forced"] = None if nulls else True  # present as null: still present
        elif kind == "issue":
            rec["issue"] = {"number": i, "labels": ["x"] * rnd.randrange(3), "a.b": True}  # a name quoted in its path
        else:
            rec["release"] = {"tag": f"v{i}", "big": 2**70}
        out.append(json.dumps(rec).encode())
    return out


@pytest.mark.parametrize("nulls", [True, False])
@pytest.mark.parametrize("rows", [1, 7, 200])
def test_shape_tallies_of_the_fast_path_equal_the_walk(monkeypatch: pytest.MonkeyPatch, rows: int, nulls: bool) -> None:
    # With JSON nulls in a field that varies the lines are parsed again; without, Arrow's
    # tables (and the lines set aside) answer alone.
    from driftline.observe.records import observe_records

    lines = _payloads(rows, nulls)
    if not nulls:
        monkeypatch.setattr(jsonbatch, "tally_records", None)
    got = jsonbatch.observe_json_lines(lines, file="f.jsonl", batch=0, row_start=0, first_line=1)
    assert got is not None  # the fast path answered
    walk = observe_records([jsonnum.loads(line) for line in lines], file="f.jsonl", batch=0, row_start=0, shapes=True)
    assert got[0].fields == walk.fields
    assert got[0].shapes == walk.shapes
    assert walk.shapes is not None and "kind" in walk.shapes  # a candidate in every batch


@pytest.mark.parametrize("odd", [False, True])
def test_shape_tallies_of_uniform_batches_equal_the_walk(monkeypatch: pytest.MonkeyPatch, odd: bool) -> None:
    # Every row holds the same fields: the fast path takes the values from Arrow's table, and
    # parses again only the lines it set aside (odd: v is a scalar in every tenth row, a list elsewhere).
    from driftline.observe.records import observe_records

    rnd = random.Random(7)
    lines = [
        json.dumps(
            {
                "kind": rnd.choice(["a", "b", "c"]),
                "a.b": "x",
                "ts": f"2026-01-01T00:00:{i % 60:02d}Z",
                "id": f"id-{i}",
                "s": {"y": None, "z": [1]},
                "v": 1 if odd and i % 10 == 0 else [1],
            }
        ).encode()
        for i in range(300)
    ]
    monkeypatch.setattr(jsonbatch, "tally_records", None)  # the table answers, or this fails
    got = jsonbatch.observe_json_lines(lines, file="f.jsonl", batch=0, row_start=0, first_line=1)
    assert got is not None
    walk = observe_records([json.loads(line) for line in lines], file="f.jsonl", batch=0, row_start=0, shapes=True)
    assert got[0].fields == walk.fields
    assert got[0].shapes == walk.shapes
    assert walk.shapes is not None and sorted(walk.shapes) == ["`a.b`", "kind"]  # id and ts: past 32 values
    assert sorted(walk.shapes["kind"]["a"].always) == ["`a.b`", "id", "kind", "s", "s.y", "s.z", "ts", "v"]


@pytest.mark.parametrize("batch_rows", [1, 5, 1000])
def test_shape_tallies_in_a_scan(tmp_path: Path, batch_rows: int, knobs: str) -> None:
    lines = _payloads(120)
    for n in range(3):
        (tmp_path / f"p{n}.jsonl").write_bytes(b"\n".join(lines[40 * n : 40 * n + 40]) + b"\n")
    tallies = []
    for exact in (False, True):
        with pytest.MonkeyPatch.context() as mp:
            if exact:
                mp.setenv(jsonfile.EXACT_ENV, "1")
            profile = scan_paths([str(tmp_path)], read=ReadOptions(batch_rows=batch_rows, exact=exact))
        tallies.append(([o.shapes for f in profile.files for o in f.observations], profile.shapes))
    assert tallies[0] == tallies[1]
    found = tallies[0][1]
    # forced (within push) and v (within every kind) are optional: 2 of the 10 fields whose
    # presence varies, so kind still explains the other 8 (EXPLAINED_SHARE)
    assert found is not None and (found.source, found.name) == ("field", "kind")
    assert [(s.value, s.optional) for s in found.shapes] == [
        ("issue", ("v",)),
        ("push", ("forced", "v")),
        ("release", ("v",)),
    ]
