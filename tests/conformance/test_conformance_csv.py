"""CSV edge cases, every file its own case, against the expected rows beside it.

source: csv-spectrum edge cases (../shared/testdata/csv-edge-cases/csvs/ with the rows
each file should yield in json/), RFC 4180 quoting: quoted commas, escaped quotes ("" in a
quoted field), newlines inside quotes, CRLF, UTF-8, empty fields.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import driftline
from conftest import SHARED_TESTDATA
from driftline.core import paths

SUITE = SHARED_TESTDATA / "csv-edge-cases"
CSVS = sorted((SUITE / "csvs").glob("*.csv"))


def expected_rows(csv: Path) -> list[dict[str, str]]:
    doc = json.loads((SUITE / "json" / (csv.stem + ".json")).read_text(encoding="utf-8"))
    # location_coordinates.json holds its single row as a bare object, not a one-element array
    return doc if isinstance(doc, list) else [doc]


def test_the_suite_is_all_there():
    # source: csv-spectrum as shipped: 12 CSV files, each with its JSON
    assert len(CSVS) == 12
    assert all((SUITE / "json" / (c.stem + ".json")).is_file() for c in CSVS)


@pytest.mark.timeout(10)
@pytest.mark.parametrize("csv", CSVS, ids=lambda f: f.name)
def test_rows_and_columns_agree_with_the_expected_json(csv: Path):
    expected = expected_rows(csv)
    profile = driftline.scan(csv)
    fr = profile.files[0]
    assert (fr.rel, fr.format) == (csv.name, "csv")
    assert fr.errors == 0, [i.message for i in fr.issues]
    assert fr.rows == len(expected)
    columns = list(expected[0])
    assert all(list(row) == columns for row in expected)
    assert sorted(profile.stats) == sorted(paths.child(None, c) for c in columns)
    for c in columns:
        st = profile.stats[paths.child(None, c)]
        values = [row[c] for row in expected]
        # every cell is text, its longest value as long as the expected one (quotes
        # removed, "" unescaped, embedded newlines kept), and empty cells are nulls
        assert st.text == len(values)
        assert st.max_length == max(len(v) for v in values), c
        assert st.nulls == sum(v == "" for v in values), c


@pytest.mark.timeout(10)
@pytest.mark.parametrize("csv", [c for c in CSVS if b"\r\n" in c.read_bytes()], ids=lambda f: f.name)
def test_crlf_files_read_like_their_lf_twins_without_a_word(csv: Path):
    # source: RFC 4180 §2 rule 1, CRLF ends each record: the standard line end, so no warning
    # (the dialect records it); the suite pairs x.csv with x_crlf.csv
    fr = driftline.scan(csv).files[0]
    assert [i.kind for i in fr.issues] == []
    assert fr.dialect is not None and fr.dialect.line_end == "CRLF"
    twin = SUITE / "csvs" / csv.name.replace("_crlf", "")
    assert fr.rows == driftline.scan(twin).files[0].rows == len(expected_rows(csv))


@pytest.mark.timeout(30)
def test_the_whole_suite_in_one_scan():
    profile = driftline.scan(SUITE / "csvs")
    assert [f.rel for f in profile.files] == [c.name for c in CSVS]
    assert profile.rows == sum(len(expected_rows(c)) for c in CSVS)
    assert profile.error_count == 0
