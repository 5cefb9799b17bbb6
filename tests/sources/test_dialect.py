"""The CSV dialect finder and the reader that honours it, on files that mimic real failures.

Each regression builds a small file like the real one that failed (issue 13, failures 1-4)
and checks rows x columns against a reader outside the project, given the dialect
explicitly: Python's csv module, pyarrow.csv or DuckDB's read_csv.
"""

from __future__ import annotations

import csv
import io
import json
import random
import subprocess
import sys
from pathlib import Path

import pyarrow as pa
import pyarrow.csv as pcsv
import pytest

import driftline
from conftest import ROOT
from driftline.core import paths
from driftline.core.options import ReadOptions
from driftline.core.stats import class_sample
from driftline.core.textfile import Dialect
from driftline.results.report import dumps, load_report
from driftline.sources import csvsplit
from driftline.sources.dialect import find_dialect, parse_pin, pin_for
from driftline.sources.discover import discover
from driftline.sources.readers import read_file

EXE = [sys.executable, "-m", "driftline.cli"]


def read_one(path: Path, **opts: object) -> driftline.Profile:
    return driftline.scan(path, **opts)  # type: ignore[arg-type]


def reference_rows(data: bytes, **dialect: object) -> list[list[str]]:
    """Python's csv module with the dialect given explicitly; blank lines dropped as every
    reader here drops them."""
    text = data.decode("utf-8")
    return [r for r in csv.reader(io.StringIO(text, newline=""), **dialect) if r]  # type: ignore[arg-type]


def field_names(p: driftline.Profile) -> list[str]:
    """The columns seen (sorted, as a profile keeps them)."""
    return sorted(p.fields)


# -- failure 1: CR-only line ends --------------------------------------------------------------


def _survey_rows(n: int, rng: random.Random) -> list[list[str]]:
    return [
        [
            str(i),
            rng.choice(["north", "south", "east, upper"]),
            f"{rng.uniform(0, 100):.2f}",
            f"19{rng.randint(70, 99)}-0{rng.randint(1, 9)}-1{rng.randint(0, 9)}",
            rng.choice(["Y", "N", ""]),
            str(rng.randint(0, 5000)),
            rng.choice(["ok", "late", 'said "no"']),
            f"note {i}",
        ]
        for i in range(n)
    ]


def _write_csv(rows: list[list[str]], line_end: str, **kw: object) -> bytes:
    out = io.StringIO()
    csv.writer(out, lineterminator=line_end, **kw).writerows(rows)  # type: ignore[arg-type]
    return out.getvalue().encode("utf-8")


def test_cr_only_file_reads_all_its_rows(tmp_path: Path):
    # failure 1: an old spreadsheet export with CR line ends read as 0 rows and 0 fields
    header = ["id", "region", "score", "day", "flag", "count", "status", "note"]
    data = _write_csv([header, *_survey_rows(519, random.Random(1))], "\r")
    assert b"\n" not in data
    f = tmp_path / "export.csv"
    f.write_bytes(data)
    # source: Python's csv module ends a record at a lone CR too (csv docs, "Dialects and Formatting Parameters")
    ref = reference_rows(data)
    assert (len(ref) - 1, len(ref[0])) == (519, 8)
    p = read_one(f)
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (519, sorted(header))
    assert fr.errors == 0
    assert [i.kind for i in fr.issues] == ["cr"]
    assert (fr.dialect.line_end, fr.dialect.delimiter, fr.dialect.header) == ("CR", ",", "yes")
    # quoted cells came back whole: the longest status is 'said "no"' as the reference reads it
    assert p.fields["status"].stats.max_length == max(len(r[6]) for r in ref[1:])
    assert p.fields["region"].stats.max_length == max(len(r[1]) for r in ref[1:])
    # line numbers stay exact: CR became LF byte for byte, so row k is on line k + 2
    sample = p.fields["note"].stats.samples[class_sample("text")][0]
    assert (sample.row, sample.line) == (0, 2)


def test_crlf_and_lf_twins_of_a_cr_file_read_the_same(tmp_path: Path):
    header = ["id", "region", "score", "day", "flag", "count", "status", "note"]
    rows = [header, *_survey_rows(50, random.Random(2))]
    for end, name in (("\r", "cr.csv"), ("\r\n", "crlf.csv"), ("\n", "lf.csv")):
        (tmp_path / name).write_bytes(_write_csv(rows, end))
    p = driftline.scan(tmp_path)
    assert [(f.rel, f.rows, f.dialect.line_end) for f in p.files] == [
        ("cr.csv", 50, "CR"),
        ("crlf.csv", 50, "CRLF"),
        ("lf.csv", 50, "LF"),
    ]
    assert p.events == ()


# -- failure 2: a delimiter guessed from the first line -----------------------------------------


def test_pipe_file_whose_json_column_holds_commas(tmp_path: Path):
    # failure 2: read with ',' as 1 column and 756 "ragged" lines; the header holds no comma
    rng = random.Random(3)
    lines = ["id|kind|payload|at"]
    for i in range(1095):
        payload = json.dumps(
            {"k": i, "tags": ["a", "b"][: rng.randint(0, 2)], "v": rng.random()},
            separators=(",", ":") if i % 2 else (", ", ": "),
        )
        lines.append(f"{i}|{rng.choice(['open', 'close'])}|{payload}|2024-03-{1 + i % 28:02d}")
    data = ("\n".join(lines) + "\n").encode()
    f = tmp_path / "events.csv"
    f.write_bytes(data)
    ref = reference_rows(data, delimiter="|", quoting=csv.QUOTE_NONE)
    assert {len(r) for r in ref} == {4}
    p = read_one(f)
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (len(ref) - 1, sorted(ref[0])) == (1095, ["at", "id", "kind", "payload"])
    assert fr.errors == 0 and fr.issues == ()
    assert fr.dialect.delimiter == "|"
    assert p.fields["payload"].stats.max_length == max(len(r[2]) for r in ref[1:])


def test_semicolon_file_with_decimal_commas(tmp_path: Path):
    # common practice: European spreadsheet exports use ';' between fields and ',' in numbers
    data = b"name;price;qty\n" + b"".join(b"item %d;%d,%02d;%d\n" % (i, i, i % 100, i % 7) for i in range(300))
    f = tmp_path / "prices.csv"
    f.write_bytes(data)
    ref = reference_rows(data, delimiter=";")
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (len(ref) - 1, sorted(ref[0]))
    assert p.files[0].dialect.delimiter == ";"


# -- failure 3: quoting assumed where there is none ----------------------------------------------


def _titles(n: int, rng: random.Random) -> tuple[list[str], int]:
    """Titles, some starting with a quote (a nickname, a quoted word, an unbalanced one)."""
    out, quoted = [], 0
    for i in range(n):
        r = rng.random()
        if r < 0.004:
            title, quoted = f"\"Weird {i}' and more", quoted + 1  # opens a quote it never closes
        elif r < 0.007:
            title, quoted = f'"Heroes" season {i % 9}', quoted + 1
        else:
            title = f"Title {i}: a story of {rng.choice(['love', 'war', 'peace'])}"
        out.append(title)
    return out, quoted


@pytest.mark.parametrize("name", ["titles.tsv", "titles.csv"])
def test_unquoted_tsv_of_titles_keeps_every_row(tmp_path: Path, name: str):
    # failure 3: 27 rows folded into other cells by quote handling, 3,966 rows instead of 3,993.
    # As titles.csv the extension says nothing about quoting: the rows decide.
    titles, quoted = _titles(3993, random.Random(4))
    assert quoted >= 20
    data = ("id\ttitle\tyear\n" + "".join(f"{i}\t{t}\t{1950 + i % 70}\n" for i, t in enumerate(titles))).encode()
    f = tmp_path / name
    f.write_bytes(data)
    # source: IANA text/tab-separated-values: fields hold no tab or line end, and no quoting
    ref = reference_rows(data, delimiter="\t", quoting=csv.QUOTE_NONE)
    assert (len(ref) - 1, {len(r) for r in ref}) == (3993, {3})
    p = read_one(f)
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (3993, sorted(ref[0])) == (3993, ["id", "title", "year"])
    assert fr.errors == 0
    assert (fr.dialect.delimiter, fr.dialect.quote) == ("\t", None)
    # a title that starts with a quote is kept as written, quote and all
    assert p.fields["title"].stats.max_length == max(len(r[1]) for r in ref[1:])
    assert p.fields["year"].stats.types == {"int64": 3993}
    # and pyarrow, told there is no quoting, reads the same rows
    table = pcsv.read_csv(io.BytesIO(data), parse_options=pcsv.ParseOptions(delimiter="\t", quote_char=False))
    assert table.num_rows == fr.rows


def test_quoted_csv_keeps_its_quoting(tmp_path: Path):
    # source: RFC 4180 section 2 rules 5-7: quoted fields with delimiters, doubled quotes, line breaks
    rows = [["name", "comment", "n"]] + [[f"Doe, J{i}", f'said "hi"\nthen left {i}', str(i)] for i in range(200)]
    data = _write_csv(rows, "\n")
    f = tmp_path / "q.csv"
    f.write_bytes(data)
    ref = reference_rows(data)
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (len(ref) - 1, sorted(ref[0])) == (200, sorted(rows[0]))
    assert p.files[0].dialect.quote == '"'
    assert p.fields["comment"].stats.max_length == max(len(r[1]) for r in ref[1:])


# -- failure 4: the header ------------------------------------------------------------------------

HEADER_11 = ["station", "year", "month", "day", "tmax", "tmin", "prcp", "snow", "snwd", "wind", "flag"]


def test_header_only_file_keeps_its_columns(tmp_path: Path):
    # failure 4a: 11 names, no rows, showed 0 fields
    data = (",".join(HEADER_11) + "\n").encode()
    f = tmp_path / "empty-export.csv"
    f.write_bytes(data)
    # source: pyarrow.csv reads a header-only file as a table of its columns and no rows
    table = pcsv.read_csv(io.BytesIO(data))
    assert (table.num_rows, table.column_names) == (0, HEADER_11)
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (0, sorted(HEADER_11))
    assert p.files[0].errors == 0
    assert all(s.stats.present == 0 for s in p.fields.values())


def _numeric_export(first: tuple[int, int], rows: int, seed: int) -> bytes:
    rng = random.Random(seed)
    out = [",".join([str(first[0]), str(first[1]), *(f"{rng.uniform(0, 9):.3f}" for _ in range(9))])]
    for _ in range(rows - 1):
        out.append(
            ",".join(
                [
                    str(rng.randint(10_000, 200_000)),
                    str(rng.randint(1_000, 20_000)),
                    *(f"{rng.uniform(0, 9):.3f}" for _ in range(9)),
                ]
            )
        )
    return ("\n".join(out) + "\n").encode()


def test_headerless_numeric_exports_get_positional_names_and_a_warning(tmp_path: Path):
    # failure 4b: the first row became the names (155190, 15519), and two exports of the same
    # table gave 11 bogus new/gone events
    (tmp_path / "part-1.csv").write_bytes(_numeric_export((155190, 15519), 400, 5))
    (tmp_path / "part-2.csv").write_bytes(_numeric_export((20001, 3001), 300, 6))
    p = driftline.scan(tmp_path)
    names = [f"column_{i}" for i in range(1, 12)]
    for f, rows in zip(p.files, (400, 300), strict=True):
        # source: pyarrow.csv with autogenerate_column_names reads every line as a row
        table = pcsv.read_csv(f"{tmp_path}/{f.rel}", read_options=pcsv.ReadOptions(autogenerate_column_names=True))
        assert (f.rows, table.num_rows, table.num_columns) == (rows, rows, 11)
        assert [(i.kind, i.severity, i.line) for i in f.issues] == [("no-header", "warning", 1)]
        assert f.dialect.header == "no"
    assert field_names(p) == sorted(names)
    assert p.events == ()
    assert p.fields["column_1"].stats.types == {"int64": 700}
    # the first row is data: its value is the first sample, on line 1
    first = p.fields["column_1"].stats.samples[class_sample("integer")][0]
    assert (first.file, first.row, first.line, first.value) == ("part-1.csv", 0, 1, '"155190"')


def test_row_name_export_reads_every_row(tmp_path: Path):
    # failure 4c: a header one name shorter than its rows (R's write.table) lost all 861 rows,
    # exit 2 and no JSON report
    rng = random.Random(7)
    header = ["mpg", "cyl", "disp", "hp", "drat", "wt", "qsec"]
    lines = [" ".join(f'"{h}"' for h in header)]
    for i in range(861):
        lines.append(" ".join([f'"car {i}"', *(f"{rng.uniform(1, 300):.2f}" for _ in header)]))
    data = ("\n".join(lines) + "\n").encode()
    f = tmp_path / "cars.csv"
    f.write_bytes(data)
    ref = reference_rows(data, delimiter=" ")
    assert (len(ref[0]), {len(r) for r in ref[1:]}, len(ref) - 1) == (7, {8}, 861)
    out = tmp_path / "report.json"
    res = subprocess.run([*EXE, "scan", str(f), "--json", str(out), "--quiet"], capture_output=True, timeout=120)
    assert res.returncode == 0, res.stderr
    p = load_report(out)
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (861, sorted(["row_name", *header]))
    assert [(i.kind, i.severity) for i in fr.issues] == [("row-names", "warning")]
    assert (fr.dialect.delimiter, fr.dialect.header) == (" ", "row-names")
    assert p.fields["row_name"].stats.max_length == max(len(r[0]) for r in ref[1:])


def test_row_name_csv_as_r_writes_it_with_an_empty_first_name(tmp_path: Path):
    # R's write.csv writes "" as the first name: header and rows have the same width
    data = b'"","a","b"\n' + b"".join(b'"r%d",%d,%d\n' % (i, i, 2 * i) for i in range(20))
    f = tmp_path / "r.csv"
    f.write_bytes(data)
    ref = reference_rows(data)
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (len(ref) - 1, sorted(paths.child(None, n) for n in ref[0]))
    assert ref[0] == ["", "a", "b"]


def _stray_file(path: Path, header: bytes, quoted_body: bool, target: int = 8 * 2**20) -> bytes:
    rows = []
    size, i = len(header), 0
    while size < target:
        row = (b'%d,"Doe, J%d",%d.5\n' if quoted_body else b"%d,J%d,%d.5\n") % (i, i, i)
        rows.append(row)
        size += len(row)
        i += 1
    data = header + b"".join(rows)
    path.write_bytes(data)
    return data


@pytest.mark.timeout(20)
@pytest.mark.parametrize(
    ("header", "quoted_body"),
    [
        (b'id,"name,value\n', False),  # opens a quote at a field's start and never closes it
        (b'id,"name,value\n', True),  # … above rows that do use quoting
        (b'id,size (5"),value\n', False),  # a quote inside a field: an ordinary character (RFC 4180 §2 rule 5)
    ],
)
def test_stray_quote_in_the_header_neither_swallows_the_file_nor_takes_quadratic_time(
    tmp_path: Path, header: bytes, quoted_body: bool
):
    # failure 4d: one stray quote made the whole 8 MB file the header, in 25 s, then a failure.
    # The per-call budget (pytest-timeout) bounds the time; the rows are checked exactly.
    f = tmp_path / "stray.csv"
    data = _stray_file(f, header, quoted_body)
    body = data[len(header) :]
    ref = reference_rows(body) if quoted_body else reference_rows(body, quoting=csv.QUOTE_NONE)
    assert {len(r) for r in ref} == {3}
    p = read_one(f)
    fr = p.files[0]
    assert fr.rows == len(ref) and len(p.fields) == 3
    assert fr.errors == 0
    assert p.fields["id"].stats.types == {"int64": len(ref)}
    if quoted_body:
        assert [i.kind for i in fr.issues] == ["stray-quote"]
        assert field_names(p) == ['"name', "id", "value"] and fr.dialect.quote == '"'
        assert p.fields['"name'].stats.max_length == max(len(r[1]) for r in ref)


# -- preamble, pins, reports ---------------------------------------------------------------------


def test_preamble_lines_are_skipped_and_line_numbers_stay_exact(tmp_path: Path):
    data = b"# exported by a logger, v2.1\n# site: north, unit 4\nDaily readings\n\ntime;temp;rh\n" + b"".join(
        b"2024-01-%02d;%d.5;%d\n" % (d, d, 40 + d) for d in range(1, 29)
    )
    f = tmp_path / "logger.csv"
    f.write_bytes(data)
    # source: DuckDB read_csv with skip=4 (explicit) reads the table under the preamble
    import duckdb

    con = duckdb.connect()
    n, cols = con.execute(
        f"select count(*), (select count(*) from (describe select * from read_csv('{f}', "
        f"skip=4, delim=';', header=true))) from read_csv('{f}', skip=4, delim=';', header=true)"
    ).fetchone()
    p = read_one(f)
    fr = p.files[0]
    assert (fr.rows, len(p.fields)) == (n, cols) == (28, 3)
    assert field_names(p) == ["rh", "temp", "time"]
    assert fr.dialect.skip == 4 and [i.kind for i in fr.issues] == ["preamble"]
    first = p.fields["temp"].stats.samples[class_sample("decimal")][0]
    assert (first.row, first.line) == (0, 6)  # 4 preamble lines, the header on line 5


def test_a_pin_overrides_the_finding_for_matching_files_only(tmp_path: Path):
    data = b"1,2,3\n4,5,6\n"
    (tmp_path / "a.csv").write_bytes(data)
    (tmp_path / "b.csv").write_bytes(data)
    p = driftline.scan(tmp_path, csv_dialect="a.csv:header=yes")
    a, b = p.files
    assert (a.rows, a.dialect.header, a.dialect.pinned) == (1, "yes", ("header",))
    assert (b.rows, b.dialect.header, b.dialect.pinned) == (2, "no", ())


def test_pins_parse_and_combine():
    assert parse_pin("day=1/*.csv:delimiter=tab").glob == "day=1/*.csv"
    pin = pin_for("x/legacy.csv", ["quote=none", "legacy.csv:delimiter=pipe", "other.csv:header=no"], ";")
    assert (pin.delimiter, pin.quote, pin.header, pin.keys()) == ("|", None, None, ("delimiter", "quote"))
    with pytest.raises(driftline.PolicyError, match="unknown key 'sep'"):
        parse_pin("sep=pipe")
    with pytest.raises(driftline.PolicyError, match="expected"):
        ReadOptions(csv_dialects=("nonsense",))


def test_old_delimiter_option_still_fixes_the_delimiter(tmp_path: Path):
    (tmp_path / "a.csv").write_bytes(b"a;b,c\n1;2,3\n4;5,6\n")
    assert field_names(driftline.scan(tmp_path, delimiter=";")) == ["a", "b,c"]
    assert field_names(driftline.scan(tmp_path, delimiter="comma")) == ["a;b", "c"]
    assert driftline.scan(tmp_path, delimiter=";").files[0].dialect.pinned == ("delimiter",)


def test_dialect_round_trips_through_the_report_and_shows_in_the_terminal(tmp_path: Path):
    (tmp_path / "p.csv").write_bytes(b"a|b\r" + b"".join(b"%d|x%d\r" % (i, i) for i in range(30)))
    out = tmp_path / "r.json"
    res = subprocess.run(
        [*EXE, "scan", str(tmp_path / "p.csv"), "--json", str(out)], capture_output=True, text=True, timeout=120
    )
    assert res.returncode == 0, res.stderr
    assert "dialect: '|' \"-quoted, header, CR (confidence" in res.stdout
    doc = json.loads(out.read_text())
    assert doc["files"][0]["dialect"]["line_end"] == "CR"
    p = load_report(out)
    assert p.files[0].dialect == driftline.scan(tmp_path / "p.csv").files[0].dialect
    assert dumps(p) == out.read_bytes()  # the report round-trips byte for byte


def test_report_validates_against_the_schema(tmp_path: Path):
    import jsonschema

    (tmp_path / "h.csv").write_bytes(b"1,2\n3,4\n")
    (tmp_path / "j.jsonl").write_bytes(b'{"a": 1}\n')
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text())
    doc = json.loads(dumps(driftline.scan(tmp_path)))
    jsonschema.validate(doc, schema)
    assert [f["dialect"] and f["dialect"]["header"] for f in doc["files"]] == ["no", None]


def test_csv_dialect_option_on_the_cli(tmp_path: Path):
    (tmp_path / "a.csv").write_bytes(b"x|y\n1|2\n")
    res = subprocess.run(
        [*EXE, "scan", str(tmp_path), "--json", "-", "--quiet", "--csv-dialect", "*.csv:delimiter=pipe,header=no"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert res.returncode == 0, res.stderr
    f = json.loads(res.stdout)["files"][0]
    assert (f["rows"], f["dialect"]["header"], f["dialect"]["pinned"]) == (2, "no", ["delimiter", "header"])
    bad = subprocess.run(
        [*EXE, "scan", str(tmp_path), "--csv-dialect", "header=maybe"], capture_output=True, text=True, timeout=120
    )
    assert bad.returncode == 2 and "error: --csv-dialect 'header=maybe'" in bad.stderr
    assert "Traceback" not in bad.stderr


# -- the finder on its own, and the spans ----------------------------------------------------------


def test_the_sample_is_bounded_and_the_first_line_read_whole(tmp_path: Path):
    from driftline.sources.csvfile import read_sample
    from driftline.sources.dialect import SAMPLE_BYTES

    long_header = b",".join(b"c%d" % i for i in range(200_000)) + b"\n"
    stream = io.BytesIO(long_header + b"1,2\n" * 400_000)
    sample, at_end = read_sample(stream, 64 * 2**20)
    assert not at_end and len(long_header) <= len(sample) <= len(long_header) + SAMPLE_BYTES
    sample, at_end = read_sample(io.BytesIO(b"a,b\n" * 10), 100)
    assert (sample, at_end) == (b"a,b\n" * 10, True)


@pytest.mark.parametrize(
    ("data", "shape"),
    [
        (b"a,b\n1,2\n", "',' \"-quoted, header, LF"),
        (b"a\tb\n1\t2\n", 'TAB "-quoted, header, LF'),
        (b"a;b;c\r\n1;2;3\r\n", "';' \"-quoted, header, CRLF"),
        (b"x|y\r1|2\r3|4\r", "'|' \"-quoted, header, CR"),
        (b"a,b\n'x, y',1\n'p, q',2\n", "',' '-quoted, header, LF"),
    ],
)
def test_shapes(data: bytes, shape: str):
    assert find_dialect(data, at_end=True).dialect.shape() == shape


def test_dialect_json_round_trip():
    d = Dialect("|", None, "\\", "CR", "row-names", 3, 0.5, 100, ("quote",))
    assert Dialect.from_json(json.loads(json.dumps(d.to_json()))) == d


@pytest.mark.parametrize("kind", ["headerless", "preamble", "row-names"])
def test_spans_of_unusual_headers_join_as_one_reader(tmp_path: Path, kind: str):
    rng = random.Random(9)
    body = b"".join(b"%d,%d,%s\n" % (i, rng.randint(0, 99), rng.choice([b"x", b'"a,b"', b""])) for i in range(3000))
    head = {"headerless": b"", "preamble": b"exported 2024-03-01\nreadings\nk,v,w\n", "row-names": b"v,w\n"}[kind]
    f = tmp_path / "s.csv"
    f.write_bytes(head + body)
    ref = discover([str(f)]).files[0]
    opts = ReadOptions(batch_rows=500)
    spans = csvsplit.plan(ref, opts, 3)
    assert len(spans) > 1
    results = [csvsplit.read_span(s, opts) for s in spans]
    assert csvsplit._joined(results)
    assert csvsplit.assemble(ref, results, opts) == read_file(ref, opts)


def test_unusual_dialects_are_left_to_one_reader(tmp_path: Path):
    for name, data in (("cr.csv", b"a,b\r1,2\r"), ("bare.tsv", b"a\tb\n1\t2\n")):
        (tmp_path / name).write_bytes(data * 2)
        assert csvsplit.plan(discover([str(tmp_path / name)]).files[0], ReadOptions(), 2) == []


def test_binary_cells_stay_bytes_with_no_quotes(tmp_path: Path):
    # pyarrow told quote_char=False keeps a lone quote as a character (pyarrow.csv.ParseOptions)
    data = b'a\tb\n"x\t1\n"y\t2\nz\t3\n'
    t = pcsv.read_csv(
        io.BytesIO(data),
        parse_options=pcsv.ParseOptions(delimiter="\t", quote_char=False),
        convert_options=pcsv.ConvertOptions(column_types={"a": pa.string(), "b": pa.string()}),
    )
    (tmp_path / "q.tsv").write_bytes(data)
    p = read_one(tmp_path / "q.tsv")
    assert p.files[0].rows == t.num_rows == 3
    assert p.fields["a"].stats.max_length == max(len(v) for v in t.column("a").to_pylist())


def test_raw_batches_for_apply_read_the_dialect_as_the_scan_does(tmp_path: Path):
    from driftline.recommendation.raw import raw_batches

    data = b"".join(b"%d|x%d\r" % (155190 + i, i) for i in range(40))
    f = tmp_path / "h.csv"
    f.write_bytes(data)
    ref = reference_rows(data, delimiter="|")
    (batch,) = [b.batch for b in raw_batches(f)]
    scanned = driftline.scan(f)
    assert (
        (batch.num_rows, batch.schema.names)
        == (len(ref), ["column_1", "column_2"])
        == (scanned.files[0].rows, sorted(scanned.fields))
    )


def test_comment_lines_between_rows_are_skipped_with_exact_line_numbers(tmp_path: Path):
    # numpy's umath validation sets put '## section ##' lines between data rows
    lines = ["dtype,input,output,ulperrortol"]
    for section in range(6):
        lines.append(f"## section {section} ##")
        lines += [f"np.float32,0x{section:02x}{i:06x},0x3f800000,{i % 4}" for i in range(30)]
    data = ("\n".join(lines) + "\n").encode()
    f = tmp_path / "validation.csv"
    f.write_bytes(data)
    # source: DuckDB read_csv with comment='#' given explicitly
    import duckdb

    n = duckdb.connect().execute(f"select count(*) from read_csv('{f}', comment='#', header=true)").fetchone()[0]
    p = driftline.scan(f, batch_rows=7)
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (n, ["dtype", "input", "output", "ulperrortol"]) == (180, field_names(p))
    assert [(i.kind, i.line) for i in fr.issues] == [("comments", 2)]
    assert "6 comment lines" in fr.issues[0].message and fr.dialect.comment == "#"
    # every row's line is its line in the file: the first row of each section follows its comment
    want = {v: k + 1 for k, v in enumerate(lines)}
    for o in fr.observations:
        for ex in o.fields["input"].samples.get(class_sample("text"), ()):
            assert ex.line == next(k for v, k in want.items() if v.split(",")[1:2] == [json.loads(ex.value)])


def test_header_with_a_trailing_delimiter_above_rows_without_one(tmp_path: Path):
    # statsmodels' unemp.csv: 'Series id,Year,Period,Value,' above rows of four fields
    data = b"Series id,Year,Period,Value,\n" + b"".join(
        b"LNS1,%d,Q0%d,5.%d\n" % (1959 + i // 4, 1 + i % 4, i % 10) for i in range(40)
    )
    f = tmp_path / "u.csv"
    f.write_bytes(data)
    ref = reference_rows(data)
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (len(ref) - 1, sorted(ref[0][:4]))
    assert p.files[0].errors == 0


def test_a_count_line_above_the_header_is_a_preamble(tmp_path: Path):
    # scikit-learn's boston_house_prices.csv: '506,13,,,…' (as wide as the rows) above the names
    rng = random.Random(11)
    rows = [",".join(f"{rng.uniform(0, 50):.3f}" for _ in range(5)) for _ in range(60)]
    data = (
        "60,5,,,\n" + ",".join(f'"{n}"' for n in ["CRIM", "ZN", "INDUS", "NOX", "MEDV"]) + "\n" + "\n".join(rows) + "\n"
    ).encode()
    f = tmp_path / "b.csv"
    f.write_bytes(data)
    # source: DuckDB read_csv with skip=1 and header=true given explicitly
    import duckdb

    (n,) = duckdb.connect().execute(f"select count(*) from read_csv('{f}', skip=1, header=true)").fetchone()
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (n, ["CRIM", "INDUS", "MEDV", "NOX", "ZN"]) == (60, field_names(p))
    assert p.files[0].dialect.skip == 1


def test_years_as_column_names_stay_a_header(tmp_path: Path):
    # a wide table of yearly values (as statistics offices publish them): the header holds years
    data = b"country,1960,1961,1962\n" + b"".join(b"c%d,%d.25,,%d.5\n" % (i, i, i) for i in range(30))
    f = tmp_path / "wide.csv"
    f.write_bytes(data)
    ref = reference_rows(data)
    p = read_one(f)
    assert (p.files[0].rows, field_names(p)) == (len(ref) - 1, sorted(ref[0]))
    assert p.files[0].dialect.header == "yes"


def test_undecodable_bytes_in_a_preamble_keep_rows_and_lines_exact(tmp_path: Path):
    # the preamble and header are skipped line by line: U+FFFD for a bad byte changes their length
    data = b"exported by caf\xe9 tool\n\nk,v\n" + b"".join(b"%d,x%d\n" % (i, i) for i in range(25))
    f = tmp_path / "p.csv"
    f.write_bytes(data)
    ref = reference_rows(data[data.index(b"k,v") :])
    p = read_one(f, encoding="utf-8")  # pinned: found per file, one bad byte alone reads as windows-1252
    fr = p.files[0]
    assert (fr.rows, field_names(p)) == (len(ref) - 1, ["k", "v"]) == (25, field_names(p))
    assert [(i.kind, i.line) for i in fr.issues] == [("preamble", 1), ("invalid-utf8", 1)]
    assert p.fields["k"].stats.samples[class_sample("integer")][0].line == 4


def test_rows_starting_with_a_hash_as_wide_as_the_others_are_data(tmp_path: Path):
    data = b"tag,n\n#python,5\n#rust,3\nplain,1\n# a note\n"
    f = tmp_path / "tags.csv"
    f.write_bytes(data)
    ref = reference_rows(data)
    p = read_one(f)
    # the csv module reads 5 rows below the header; '# a note' is one of them, a ragged one here
    assert len(ref) - 1 == 4 and p.files[0].dialect.comment is None
    assert p.files[0].rows == 3 and [(i.kind, i.line) for i in p.files[0].issues] == [("ragged-row", 5)]


def test_a_pinned_skip_of_zero_is_kept(tmp_path: Path):
    # a header of 3 names above one row of 5 empty fields: with skip=0 pinned the first line is
    # the header and the row is ragged, as Python's csv module reads it (RFC 4180 section 2)
    f = tmp_path / "p.csv"
    f.write_bytes(b"a,b,c\n,,,,")
    assert [len(r) for r in reference_rows(f.read_bytes())] == [3, 5]
    p = read_one(f, csv_dialect="header=yes,skip=0")
    fr = p.files[0]
    assert (fr.rows, fr.dialect.skip, [i.kind for i in fr.issues]) == (0, 0, ["ragged-row"])


def test_no_line_is_skipped_as_a_preamble_above_a_table_without_rows(tmp_path: Path):
    # two lines of different widths and no more: nothing shows the first is a title, so it is
    # the header (common practice: RFC 4180 section 2 puts an optional header on the first line)
    f = tmp_path / "p.csv"
    f.write_bytes(b"a,b,c\n,")
    fr = read_one(f).files[0]
    assert (fr.dialect.skip, fr.dialect.header) == (0, "yes")


def test_no_header_is_noted_only_when_guessed(tmp_path: Path):
    # source: RFC 4180 section 2 item 3 (the header line is optional) and section 3 (the
    # sender says header=present or absent): a pinned header=no is that word, a guess is noted.
    (tmp_path / "a.csv").write_bytes(b"1,2\r\n3,4\r\n5,6\r\n")
    guessed = driftline.scan(tmp_path).files[0]
    assert [(i.kind, i.severity, i.line) for i in guessed.issues] == [("no-header", "warning", 1)]
    pinned = driftline.scan(tmp_path, csv_dialect="header=no").files[0]
    assert (pinned.dialect.header, pinned.rows, pinned.issues) == ("no", 3, ())


def test_a_utf8_bom_in_csv_is_recorded_not_warned_of(tmp_path: Path):
    # source: RFC 4180 says nothing of a byte order mark; the Unicode Standard (section 23.8)
    # allows U+FEFF as a UTF-8 signature. Python's utf-8-sig codec writes it, as spreadsheets do.
    (tmp_path / "a.csv").write_bytes("id,name\r\n1,René\r\n".encode("utf-8-sig"))
    f = driftline.scan(tmp_path).files[0]
    assert f.issues == ()
    assert (f.encoding.name, f.encoding.evidence) == ("utf-8", "bom")  # the report keeps the mark's evidence
    assert sorted(f.observations[0].fields) == ["id", "name"]  # the mark is not part of the first name
