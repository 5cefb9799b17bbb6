"""What scripts/fuzz found, each kept as a regression case (the input that broke an invariant,
shrunk by hand to what matters), with the fix it needed."""

from __future__ import annotations

from pathlib import Path

from driftline.core.options import ReadOptions
from driftline.core.stats import class_sample
from driftline.sources.discover import discover
from driftline.sources.readers import read_file


def _read(path: Path, **opts: object):
    return read_file(discover([str(path)]).files[0], ReadOptions(**opts))  # type: ignore[arg-type]


def test_ragged_csv_row_with_invalid_utf8_does_not_lose_the_file(tmp_path):
    # found by: scripts/fuzz (atheris), 120 s run: pyarrow decodes a ragged row's text as strict
    # UTF-8 before calling invalid_row_handler; the UnicodeDecodeError was "ignored", the handler
    # never ran and pyarrow gave up on the whole file ("cannot parse", 0 rows). Fixed in
    # sources/csvfile.py: undecodable bytes become U+FFFD before pyarrow sees them.
    f = tmp_path / "rag.csv"
    f.write_bytes(b"a,b\n1,2\n3,4,\xff\xfe\n5,6\n")
    res = _read(f, encoding="utf-8")  # pinned: alone, these bytes would be read as windows-1252
    assert res.rows == 2
    assert [(i.kind, i.line, i.byte_offset) for i in res.issues] == [
        ("invalid-utf8", 3, len(b"a,b\n1,2\n3,4,")),
        ("ragged-row", 3, None),
    ]


def test_latin1_csv_reports_each_line_once_and_counts_the_rest(tmp_path):
    # The same fix on a whole file in Latin-1 read as UTF-8 (pinned: found alone, it is read
    # as windows-1252, tests/sources/test_encoding.py): one problem per line for the first 20 lines,
    # then one count, and every row is profiled.
    f = tmp_path / "latin1.csv"
    f.write_bytes(b"name,city\n" + "".join(f"Ren\u00e9{i},K\u00f6ln\n" for i in range(50)).encode("latin-1"))
    res = _read(f, encoding="utf-8")
    assert res.rows == 50
    bad = [i for i in res.issues if i.kind == "invalid-utf8"]
    assert [i.line for i in bad[:20]] == list(range(2, 22))
    assert bad[20].message == "30 more lines hold invalid UTF-8; read with U+FFFD" and len(bad) == 21
    fields = {p: st for o in res.observations for p, st in o.fields.items()}
    assert fields["city"].first(class_sample("text")).value == '"K\ufffdln"'
