"""driftline apply's fast ways and its reference ways write the same bytes.

Every apply here runs twice with the same rules: as shipped (JSON Lines parsed by Arrow where
sources/jsonlined proves it exact, casts that skip the class masks when every value takes a
plain form) and with DRIFTLINE_EXACT set (every line through orjson, every column through the
class masks).  The typed table, the quarantine, the rejected rows and the reconciliation must be
the same bytes: the same values, the same counts per rule, the same rows and lines.  Batches
are small and the fast path's minimum batch is lowered, so the fast path is really taken and
falls back in the middle of files.
"""

from __future__ import annotations

import importlib
import itertools
import json
import random
import shutil
from pathlib import Path

import orjson
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest

import driftline
from conftest import SHARED_TESTDATA
from driftline.applying.output import RECONCILIATION_NAME
from driftline.observe.fast.strprofile import EXACT_ENV
from driftline.recommendation.raw import as_variant
from driftline.sources import jsonlined

cast_module = importlib.import_module("driftline.recommendation.apply")  # the module, not a name it exports

JSON_SUITE = SHARED_TESTDATA / "json-parsing" / "test_parsing"
CSV_SUITE = SHARED_TESTDATA / "csv-edge-cases" / "csvs"


@pytest.fixture(autouse=True)
def _fast_path_on_small_batches(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(jsonlined, "FAST_MIN_ROWS", 1)
    monkeypatch.setattr(cast_module, "THREAD_MIN_ROWS", 1)  # columns on threads for every batch
    monkeypatch.delenv(EXACT_ENV, raising=False)


def _outputs(root: Path, out: Path, exact: bool, batch_rows: int) -> dict[str, bytes]:
    """Every file apply writes (or the error it gives), with rules from one scan of root."""
    rules = driftline.scan(root).recommend()
    with pytest.MonkeyPatch.context() as mp:
        if exact:
            mp.setenv(EXACT_ENV, "1")
        try:
            driftline.apply(root, out=out, rules=rules, batch_rows=batch_rows)
        except driftline.DriftlineError as exc:
            return {"error": str(exc).encode()}
    return {str(f.relative_to(out)): f.read_bytes() for f in sorted(out.rglob("*")) if f.is_file()}


def _same(root: Path, tmp: Path, batch_rows: int = 3) -> dict[str, bytes]:
    fast = _outputs(root, tmp / "fast", False, batch_rows)
    exact = _outputs(root, tmp / "exact", True, batch_rows)
    assert sorted(fast) == sorted(exact)
    assert [k for k in fast if fast[k] != exact[k]] == []
    return fast


def _reconciliation(outputs: dict[str, bytes]) -> dict:
    return json.loads(outputs[RECONCILIATION_NAME])


# -- real data ---------------------------------------------------------------------------------


def test_the_demo(demo_dir: Path, tmp_path: Path) -> None:
    got = _same(demo_dir / "landing", tmp_path, batch_rows=5)
    assert _reconciliation(got)["matches"] is True


@pytest.mark.skipif(not JSON_SUITE.is_dir(), reason="JSON parsing suite not available")
def test_the_json_parsing_suite_as_json_lines(tmp_path: Path) -> None:
    """Each case of the suite (source: JSONTestSuite, y_/n_/i_ files) on one line of its own
    file, and all of them in one file: Arrow and orjson must agree on every line kept."""
    root = tmp_path / "in"
    root.mkdir()
    lines = []
    for case in sorted(JSON_SUITE.glob("*.json")):
        data = case.read_bytes()
        if b"\n" in data.rstrip(b"\n") or b"\r" in data:
            continue
        if data.count(b"[") + data.count(b"{") > 200:
            continue  # nested past what orjson writes back (255 levels): JSON text of such values fails either way
        lines.append(data.rstrip(b"\n"))
        (root / f"{case.stem}.jsonl").write_bytes(data.rstrip(b"\n") + b"\n")
    assert len(lines) > 250
    objects = [line for line in lines if line.lstrip().startswith(b"{")]
    for name, chosen in (("all", lines), ("objects", objects)):
        folder = tmp_path / name
        folder.mkdir()
        (folder / "cases.jsonl").write_bytes(b"\n".join(chosen) + b"\n")
        _same(folder, tmp_path / f"{name}-out", batch_rows=2)
    # One file per case: the same rules for all (a schema of every case at once).
    _same(root, tmp_path / "each-out", batch_rows=2)


@pytest.mark.skipif(not CSV_SUITE.is_dir(), reason="CSV edge-case suite not available")
def test_the_csv_edge_case_suite(tmp_path: Path) -> None:
    for case in sorted(CSV_SUITE.glob("*.csv")):
        folder = tmp_path / case.stem / "in"
        folder.mkdir(parents=True)
        shutil.copy(case, folder / case.name)
        _same(folder, tmp_path / case.stem, batch_rows=2)


# -- made-up files with the cases each shortcut must leave to the reference way ------------------


def _jsonl(path: Path, records: list[str]) -> Path:
    path.write_text("\n".join(records) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("batch_rows", [2, 7, 1000])
def test_json_lines_that_arrow_would_read_otherwise(tmp_path: Path, batch_rows: int) -> None:
    root = tmp_path / "in"
    root.mkdir()
    clean = [
        f'{{"id": {i}, "t": "2026-01-0{i % 9 + 1}T10:00:0{i % 10}Z", "x": {i}.25, "p": {{"lat": {i}.5}}, '
        f'"tags": ["a{i}"], "day": "2026-02-1{i % 10}", "n": "{i}"}}'
        for i in range(20)
    ]
    # 1 and 1.0 in one field (Arrow reads both as double), in a struct and in a list
    mixed = [
        '{"id": 20, "x": 3, "p": {"lat": 7}, "tags": ["b"], "v": [1.5, 2]}',
        '{"id": 21, "x": 3.0, "p": {"lat": 7.0}, "v": [2.0]}',
        '{"id": 22, "x": 1e2, "v": [1E2, 12345678901234567890123]}',
    ]
    odd = [
        "",
        "   ",
        '{"id": 23, "x": NaN}',
        '{"id": 24} {"id": 25}',
        '{"id": 26, "t": "2026-01-01t10:00:00z", "day": "2026-02-30", "n": "007"}',
        '{"id": 27, "t": "2026-06-30T23:59:60Z", "n": "n/a", "day": ""}',
        '{"id": 28, "t": "2026-01-01T10:00:00.123456789Z", "n": " 12 "}',
        "not json",
        '{"id": 29, "id": 30}',
        '{"id": 31, "s": "\\ud800"}',
    ]
    _jsonl(root / "clean.jsonl", clean)
    _jsonl(root / "mixed.jsonl", clean[:5] + mixed + clean[5:])
    _jsonl(root / "odd.jsonl", clean[:4] + odd + clean[4:])
    (root / "bom.jsonl").write_bytes(b"\xef\xbb\xbf" + "\r\n".join(clean[:6]).encode() + b"\r\n")
    got = _same(root, tmp_path, batch_rows=batch_rows)
    doc = _reconciliation(got)
    assert doc["matches"] is True and "t" in {e["path"] for e in doc["effects"]}


def test_json_lines_lines_are_the_lines_python_counts(tmp_path: Path) -> None:
    """The line of each row, fast and line by line, is its 1-based position among the file's lines
    (# source: Python's bytes.split on LF; a line that orjson rejects is no row)."""
    text = b'{"a": 1.5}\n\n{"a": 2.5}\r\n  \n{"a": 2} {"a": 3}\n{"a": "x"}\n{"a": 4}\n'
    want_lines = [n for n, line in enumerate(text.split(b"\n"), 1) if line.strip() and _parses(line)]
    for fast in (True, False):
        parts = list(jsonlined.lined_records(text, 2, fast=fast))
        assert [n for p in parts for n in p.lines] == want_lines == [1, 3, 6, 7]
    first = next(jsonlined.lined_records(text, 2, fast=True))
    assert first.table is not None and first.table.column("a").to_pylist() == [1.5, 2.5]


def _parses(line: bytes) -> bool:
    try:
        orjson.loads(line)
    except orjson.JSONDecodeError:
        return False
    return True


def test_integer_literals_among_doubles_leave_arrow_aside() -> None:
    # Arrow reads 2 as 2.0 beside 2.5; the line-by-line parse keeps the integer (# source: RFC 8259 section 6)
    parts = list(jsonlined.lined_records(b'{"a": 2.5}\n{"a": 2}\n', 10))
    assert [p.table for p in parts] == [None] and parts[0].records == [{"a": 2.5}, {"a": 2}]
    parts = list(jsonlined.lined_records(b'{"a": 2.5}\n{"a": 2.0}\n', 10))
    assert parts[0].table is not None and parts[0].records is None


@pytest.mark.parametrize("batch_rows", [2, 1000])
def test_csv_cells_plain_and_not(tmp_path: Path, batch_rows: int) -> None:
    rng = random.Random(7)
    root = tmp_path / "in"
    root.mkdir()
    rows = ["i,d,f,b,t,u,s"]
    for k in range(40):
        rows.append(
            f"{rng.randint(-(10**6), 10**6)},2026-0{k % 9 + 1}-1{k % 10},{rng.uniform(-5, 5):.3f},"
            f"{rng.choice(['true', 'False', 'TRUE'])},2026-01-01 10:00:{k % 60:02d},2026-01-01T10:00:00Z,x{k}"
        )
    plain = root / "plain.csv"
    plain.write_text("\n".join(rows) + "\n")
    odd = (
        rows[:10]
        + [
            '007,2026-02-30,0.000,yes,2026-01-01 10:00:60,2026-01-01t10:00:00z,"two\nlines"',
            'n/a,, 1.5 ,NULL,2026-01-01 10:00:00.1234567,2026-01-01T10:00:00+05:30,"a ""q"""',
            "1,2,3",  # a ragged row: set aside by the reader
            "  ,\u2003,1e400,?,,,",
            "9223372036854775807,2026-01-01,1e-400,false,2026-01-01T10:00:00,2026-01-01 10:00:00Z,-",
        ]
        + rows[10:]
    )
    (root / "odd.csv").write_text("\n".join(odd) + "\n")
    for name in ("plain", "odd"):
        one = tmp_path / name / "in"
        one.mkdir(parents=True)
        shutil.copy(root / f"{name}.csv", one)
        _same(one, tmp_path / name, batch_rows=batch_rows)
    got = _same(root, tmp_path / "both", batch_rows=batch_rows)
    assert _reconciliation(got)["rows"]["in"] >= 80


def test_blank_cells_are_what_python_strips() -> None:
    """A CSV cell is blank when Python's str.strip() leaves nothing (# source: Python str.isspace,
    the Unicode White_Space set): every code point alone, and mixed with others."""
    cps = [chr(i) for i in range(0x110000) if not 0xD800 <= i <= 0xDFFF]
    cells = cps + [" \u3000\t", "a ", " \u00a0b", "", "\u200b"]
    variant = as_variant(pa.array(cells, pa.string()), text=True)
    got = pc.is_null(variant).to_pylist()
    assert got == [c.strip() == "" for c in cells]
    assert sum(got) == sum(c.isspace() for c in cps) + 2  # and "", " \u3000\t"


def test_line_numbers_by_byte_search_are_pythons() -> None:
    """The non-blank lines found by byte searches are those bytes.strip() leaves something of
    (# source: Python's bytes.split and bytes.strip), for every file of up to 4 lines from an
    alphabet of the awkward ones."""
    alphabet = [b"{}", b"", b" ", b"\r", b"\t{}", b"{} ", b"\x0c", b"\x1c", b"\x0b"]
    checked = 0
    for k in range(5):
        for combo in itertools.product(alphabet, repeat=k):
            for end in (b"", b"\n", b"\n\n"):
                data = b"\n".join(combo) + end
                text = data.split(b"\n")
                assert list(jsonlined._non_blank(data, text)) == [i for i, s in enumerate(text, 1) if s.strip()]
                checked += 1
    assert checked == 3 * sum(9**k for k in range(5))


@pytest.mark.parametrize("encoding", ["utf-8-sig", "utf-16"])
def test_quarantine_lines_of_json_lines_with_a_byte_order_mark(tmp_path: Path, encoding: str) -> None:
    """The line of a quarantined value is its line in the text (# source: Python's codecs and
    str.split on LF), whatever the encoding: a byte order mark is no part of the first line."""
    root = tmp_path / "in"
    root.mkdir()
    text = '{"a": 1}\n{"a": "x"}\n\n{"a": 2}\n'
    (root / "f.jsonl").write_bytes(text.encode(encoding))
    driftline.apply(root, out=tmp_path / "out")
    got = pq.read_table(tmp_path / "out" / "_quarantine" / "part-0.parquet").select(["row", "line", "value"])
    want = [n for n, line in enumerate(text.split("\n"), 1) if line.strip()]
    assert got.to_pylist() == [{"row": 0, "line": want[0], "value": "1"}, {"row": 2, "line": want[2], "value": "2"}]
    assert want == [1, 2, 4]


def test_jobs_after_a_run_in_process_give_the_same_bytes(tmp_path: Path) -> None:
    """A run in this process starts the cast threads; worker processes forked after it must
    start their own (a forked child has none of its parent's threads) and write the same bytes."""
    root = tmp_path / "in"
    for part in ("p=1", "p=2"):
        (root / part).mkdir(parents=True)
        rows = "\n".join(f"{i},{i}.5,2026-01-0{i % 9 + 1}" for i in range(50))
        (root / part / "a.csv").write_text("n,x,d\n" + rows + "\n")
    one = driftline.apply(root, out=tmp_path / "one")
    two = driftline.apply(root, out=tmp_path / "two", jobs=2)
    assert one.matches and two.matches

    def tree(d: Path) -> dict[str, bytes]:
        return {str(f.relative_to(d)): f.read_bytes() for f in sorted(d.rglob("*.parquet"))}

    assert tree(tmp_path / "one") == tree(tmp_path / "two") and len(tree(tmp_path / "one")) == 6


def test_a_rejected_row_leaves_the_other_values_counted_once(tmp_path: Path) -> None:
    """A batch with a row that cannot be cast is cast row by row; what the whole batch's attempt
    counted before failing is not counted again (# common practice: each value quarantined once)."""
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    (tmp_path / "a" / "f.jsonl").write_text('{"a": "n/a", "b": 1}\n{"a": 2, "b": 2}\n')
    (tmp_path / "b" / "f.jsonl").write_text('{"a": "n/a", "b": 1}\n{"a": 2, "b": null}\n{"a": "n/a", "b": 3}\n')
    rec = driftline.scan(tmp_path / "a").recommend()
    for exact in (False, True):
        with pytest.MonkeyPatch.context() as mp:
            if exact:
                mp.setenv(EXACT_ENV, "1")
            got = driftline.apply(tmp_path / "b", out=tmp_path / f"out{exact}", rules=rec)
        assert got.reconciliation["rows"] == {"in": 3, "written": 2, "rejected": 1, "balanced": True}
        (effect,) = got.reconciliation["effects"]
        assert (effect["path"], effect["cause"], effect["quarantined"]) == ("a", "null_token", 2)
        table = pq.read_table(tmp_path / f"out{exact}" / "_quarantine" / "part-0.parquet")
        assert table.select(["row", "line"]).to_pylist() == [{"row": 0, "line": 1}, {"row": 2, "line": 3}]
