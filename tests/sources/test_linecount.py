"""Nothing lost without a word: every row on its line, and the lines of a file reconciled.

The reference for lines and records is Python's csv module (RFC 4180 quoting; `line_num`
counts the physical lines read), and for JSON Lines the JSON Lines text format (one value
per LF-terminated line) with Python's json module.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import driftline
from driftline.core.options import ReadOptions
from driftline.sources import csvfile, jsonfile
from driftline.sources.discover import discover
from driftline.sources.linecount import LineTally
from driftline.sources.readers import read_file

RFC4180 = "delimiter=comma,quote=double,header=yes,skip=0"  # source: RFC 4180 section 2


def read(path: Path, **opts: object):
    return read_file(discover([str(path)]).files[0], ReadOptions(**opts))


def python_records(data: bytes, ncols: int) -> tuple[int, list[int], dict[int, int]]:
    """(rows, start lines of ragged records, start line of each row by index), as Python's csv
    module reads the file: a blank line is a record of no fields (skipped), a record of another
    field count is ragged.  source: Python csv module, csv.reader.line_num"""
    reader = csv.reader(io.StringIO(data.decode("utf-8"), newline=""))
    rows, ragged, starts = 0, [], {}
    prev = 0
    for rec in reader:
        start, prev = prev + 1, reader.line_num
        if rec == []:
            continue
        if start == 1:
            continue  # the header
        if len(rec) != ncols:
            ragged.append(start)
            continue
        starts[rows] = start
        rows += 1
    return rows, ragged, starts


def quote(cell: str) -> str:
    if cell == "" or any(c in cell for c in ',"\r\n'):
        return '"' + cell.replace('"', '""') + '"'
    return cell


cells = st.lists(st.sampled_from(["a", "1", " ", ",", '"', "\n", "\r\n", "é"]), max_size=6).map("".join)
rows_st = st.lists(
    st.one_of(
        st.tuples(st.just("row"), st.lists(cells, min_size=1, max_size=5)),
        st.tuples(st.just("blank"), st.sampled_from(["", "\r"]).map(lambda s: [s])),
    ),
    max_size=40,
)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    rows=rows_st,
    crlf=st.booleans(),
    batch_rows=st.sampled_from([1, 3, 1000]),
    mark=st.integers(0, 39),
    last_newline=st.booleans(),
)
def test_rows_and_ragged_rows_are_on_pythons_lines_and_the_lines_add_up(
    tmp_path_factory, rows, crlf, batch_rows, mark, last_newline
):
    end = "\r\n" if crlf else "\n"
    ncols = 3
    lines = ["a,b,c"]
    good = 0
    for kind, fields in rows:
        if kind == "blank":  # '' or '\r' (an empty CRLF line in an LF file); no lone CR, which Python counts as a line
            lines.append("" if crlf else fields[0])
            continue
        if len(fields) == ncols:
            # a column of integers, and one 'x' in the row numbered mark: its type-conflict event names its line
            fields = [str(good) if good != mark else "x", *fields[1:]]
            good += 1
        text = ",".join(quote(f) for f in fields)
        lines.append(text if text else '""')
    data = (end.join(lines) + (end if last_newline else "")).encode()
    path = tmp_path_factory.mktemp("csv") / "f.csv"
    path.write_bytes(data)
    want_rows, want_ragged, starts = python_records(data, ncols)
    # The dialect is pinned as Python's reader reads it (RFC 4180 quotes, a header): tiny random
    # files can be read another way with as much evidence, and the lines are what is tested here.
    res = read(path, batch_rows=batch_rows, csv_dialects=(RFC4180,))
    assert res.rows == want_rows
    assert [i.line for i in res.issues if i.kind == "ragged-row"] == want_ragged
    assert [i.kind for i in res.issues if i.kind not in ("ragged-row", "crlf")] == []  # nothing unaccounted
    if 0 < mark < want_rows:
        profile = driftline.scan(path, batch_rows=batch_rows, csv_dialect=RFC4180)
        (event,) = [e for e in profile.events if e.path == "a" and e.kind == "type-conflict"]
        assert (event.row, event.line) == (mark, starts[mark])


def test_blank_lines_and_multiline_cells_do_not_move_the_line_of_a_row(tmp_path):
    data = b'a,b\n1,x\n\n2,"p\n\nq"\n\r\n2,3,4\nz,y\n'
    path = tmp_path / "f.csv"
    path.write_bytes(data)
    res = read(path)
    # source: the file as written: line 3 blank, lines 4-6 one row, line 7 blank (an empty CRLF
    # line), line 8 ragged, line 9 the row where 'a' turns to text
    assert [(i.kind, i.line) for i in res.issues] == [("ragged-row", 8)]
    assert res.rows == 3
    profile = driftline.scan(path)
    assert [(e.kind, e.path, e.row, e.line) for e in profile.events] == [("type-conflict", "a", 2, 9)]


def test_a_csv_with_cr_line_ends_is_read_whole_and_nothing_is_unaccounted(tmp_path):
    # A spreadsheet export with CR-only line ends was read as 0 rows, with no problem and exit 0.
    path = tmp_path / "mac.csv"
    path.write_bytes(b"a,b\r1,2\r3,4\r5,6\r")
    # source: Python's csv module reads 3 rows of 2 fields after the header (it takes CR as a line end)
    assert len(list(csv.reader(io.StringIO(path.read_text(), newline="")))) == 4
    res = read(path)
    assert res.rows == 3
    assert [i.kind for i in res.issues if i.severity == "error"] == []
    gz = tmp_path / "mac.csv.gz"  # the same, compressed: the lines are counted after decoding
    gz.write_bytes(gzip.compress(path.read_bytes()))
    res = read(gz)
    assert (res.rows, [i.kind for i in res.issues if i.severity == "error"]) == (3, [])


def test_a_stray_cr_in_an_unquoted_field_is_named(tmp_path):
    path = tmp_path / "f.csv"
    path.write_bytes(b"a,b\n1,2\n3\r4,5\n6,7\n")  # Arrow ends a row at the CR: '3' and '4,5'
    res = read(path)
    assert [(i.kind, i.line) for i in res.issues] == [("ragged-row", 3), ("cr-line-ends", 3)]
    assert res.rows == 3  # 1,2 then 4,5 (the second half of line 3) then 6,7


def test_crs_that_only_make_empty_lines_and_crs_in_quotes_are_no_problem(tmp_path):
    path = tmp_path / "f.csv"
    # "\r\r\n": a doubled CR before each line feed; a CR at the start of a line; CRs in quotes
    path.write_bytes(b'a,b\r\r\n1,"x\ry"\r\r\n\r2,"z\r"\r\n3,"\r\rq"\n')
    res = read(path)
    assert res.rows == 3
    assert [i.kind for i in res.issues if i.severity == "error"] == []


def test_rows_lost_inside_the_reader_are_reported(tmp_path, monkeypatch):
    # A reader that drops the last row of each batch (a stand-in for a bug): the lines say so.
    path = tmp_path / "f.csv"
    path.write_bytes(b"a,b\n" + b"".join(b"%d,%d\n" % (i, i) for i in range(10)))
    observe = csvfile.CsvState.observe
    monkeypatch.setattr(
        csvfile.CsvState, "observe", lambda self, cells: observe(self, cells.slice(0, cells.num_rows - 1))
    )
    res = read(path, batch_rows=4)
    assert res.rows == 7
    (issue,) = res.issues
    assert (issue.kind, issue.severity) == ("unaccounted-lines", "error")
    assert issue.message == (
        "11 lines counted apart from the reader, 8 accounted for (header to line 1, 7 rows, "
        "0 lines of set-aside rows, 0 blank lines): 3 lines unaccounted for; rows may be missing"
    )


# -- JSON Lines ------------------------------------------------------------------------------------

jsonl_lines = st.lists(
    st.one_of(
        st.integers(0, 99).map(lambda i: json.dumps({"a": i})),
        st.sampled_from(["", " ", "\t", "\r", " \r"]),  # blank: whitespace only
        st.sampled_from(["{bad", '{"a": 1} 2', "[1,"]),  # malformed
    ),
    max_size=60,
)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(lines=jsonl_lines, last_newline=st.booleans(), big=st.booleans())
def test_jsonl_lines_add_up(tmp_path_factory, lines, last_newline, big):
    if big:  # past 256 lines the columnar path reads them
        lines = lines * 8
    data = ("\n".join(lines) + ("\n" if last_newline else "")).encode()
    path = tmp_path_factory.mktemp("jl") / "f.jsonl"
    path.write_bytes(data)
    want = []
    for n, line in enumerate(data.split(b"\n"), start=1):  # source: JSON Lines text format, json module
        if not line.strip():
            continue
        try:
            json.loads(line)
            want.append(("row", n))
        except ValueError:
            want.append(("bad", n))
    res = read(path)
    assert res.rows == sum(1 for k, _ in want if k == "row")
    assert [i.line for i in res.issues if i.kind == "malformed-json"] == [n for k, n in want if k == "bad"]
    assert [i.kind for i in res.issues if i.kind not in ("malformed-json", "crlf", "empty")] == []


def test_jsonl_rows_lost_inside_the_reader_are_reported(tmp_path, monkeypatch):
    path = tmp_path / "f.jsonl"
    # more lines than jsonfile.GROUP_MAX_ROWS: the file takes the columnar path, not the grouped walk
    path.write_bytes(b"".join(b'{"a": %d}\n' % i for i in range(1100)))
    real = jsonfile.observe_json_lines

    def drop_one(lines, **kw):  # a stand-in for a bug in the columnar path: one line read as no row
        return real(lines[:-1], **kw)

    monkeypatch.setattr(jsonfile, "observe_json_lines", drop_one)
    res = read(path)
    assert res.rows == 1099
    (issue,) = res.issues
    assert issue.message == (
        "1,100 lines counted apart from the reader, 1,099 accounted for (1,099 rows, 0 lines "
        "reported, 0 blank lines): 1 lines unaccounted for; rows may be missing"
    )


def test_a_blank_line_longer_than_the_limit_is_only_the_readers_too_large_line(tmp_path):
    path = tmp_path / "f.jsonl"
    path.write_bytes(b'{"a": 1}\n' + b" " * 5000 + b"\n\n")
    res = read(path, max_record_bytes=1000)
    assert [(i.kind, i.line) for i in res.issues] == [("too-large", 2)]  # not also counted as blank


def test_the_tally_counts_across_any_read_size():
    # The same counts whatever the pieces: a blank line or a CR split between two reads.
    data = b"a,b\r\n\r\n1,2\n\n\r\n3\r\r4\n\r5\n\r"
    whole = LineTally(io.BytesIO(data), "csv")
    whole.read()
    whole.end()
    for size in range(1, len(data) + 1):
        t = LineTally(io.BytesIO(data), "csv")
        while t.read(size):
            pass
        t.end()
        assert (
            (t.lines(), list(t.blanks), t.splitting_cr, t.first_cr_line)
            == (whole.lines(), list(whole.blanks), whole.splitting_cr, whole.first_cr_line)
            == (8, [2, 4, 5, 8], 1, 6)
        )


@pytest.mark.parametrize("codec", ["gzip", "bz2", "xz", "zstd"])
def test_compressed_text_is_reconciled_after_decoding(tmp_path, codec):
    import lzma

    from hostile_inputs import compress

    data = b"a,b\n1,2\n\n3,4,5\n6,7\n"
    path = tmp_path / f"f.csv.{ {'gzip': 'gz', 'bz2': 'bz2', 'xz': 'xz', 'zstd': 'zst'}[codec] }"
    path.write_bytes(lzma.compress(data) if codec == "xz" else compress(data, codec))
    res = read(path)
    assert res.rows == 2 and [(i.kind, i.line) for i in res.issues] == [("ragged-row", 4)]
