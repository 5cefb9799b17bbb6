"""The JSON parsing test suite, every file its own case, read as a `.json` document.

source: JSON parsing test suite by Nicolas Seriot (RFC 8259 cases), ../shared/testdata/
json-parsing/test_parsing/: y_ files must be accepted, n_ files rejected, i_ files are
implementation-defined (the shared testdata README: "accept or report, and say which").
The outside reference for what a y_ file holds is Python's own json module.
"""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path
from typing import Any

import pytest

import driftline
from conftest import SHARED_TESTDATA
from driftline.core import paths

SUITE = SHARED_TESTDATA / "json-parsing" / "test_parsing"
FILES = sorted(SUITE.glob("*.json"))
Y = [f for f in FILES if f.name.startswith("y_")]
N = [f for f in FILES if f.name.startswith("n_")]
I = [f for f in FILES if f.name.startswith("i_")]  # noqa: E741 - the suite's own prefix

# The implementation-defined files, and what driftline does with each: accepted (profiled,
# no error) or reported (a malformed-json error with its position; the file adds no rows).
# orjson (RFC 8259 strict) refuses numbers outside binary64, lone or broken UTF-16
# surrogates, and text that is not UTF-8 (Latin-1, invalid bytes). UTF-16 text, with a BOM
# or found from the NULs of its ASCII characters, is transcoded first and read with an
# 'encoding' warning (sources/encoding.py), as Python's json.loads reads it from bytes
# (json.detect_encoding, after RFC 4627 section 3).
I_OUTCOME = {
    "i_number_double_huge_neg_exp.json": "accepted",  # 123.456e-789 underflows to 0.0
    "i_number_huge_exp.json": "reported",
    "i_number_neg_int_huge_exp.json": "reported",
    "i_number_pos_double_huge_exp.json": "reported",
    "i_number_real_neg_overflow.json": "reported",
    "i_number_real_pos_overflow.json": "reported",
    "i_number_real_underflow.json": "accepted",
    "i_number_too_big_neg_int.json": "accepted",  # big integers stay exact (decimal(39,0))
    "i_number_too_big_pos_int.json": "accepted",
    "i_number_very_big_negative_int.json": "accepted",
    "i_object_key_lone_2nd_surrogate.json": "reported",
    "i_string_1st_surrogate_but_2nd_missing.json": "reported",
    "i_string_1st_valid_surrogate_2nd_invalid.json": "reported",
    "i_string_UTF-16LE_with_BOM.json": "accepted",
    "i_string_UTF-8_invalid_sequence.json": "reported",
    "i_string_UTF8_surrogate_U+D800.json": "reported",
    "i_string_incomplete_surrogate_and_escape_valid.json": "reported",
    "i_string_incomplete_surrogate_pair.json": "reported",
    "i_string_incomplete_surrogates_escape_valid.json": "reported",
    "i_string_invalid_lonely_surrogate.json": "reported",
    "i_string_invalid_surrogate.json": "reported",
    "i_string_invalid_utf-8.json": "reported",
    "i_string_inverted_surrogates_U+1D11E.json": "reported",
    "i_string_iso_latin_1.json": "reported",
    "i_string_lone_second_surrogate.json": "reported",
    "i_string_lone_utf8_continuation_byte.json": "reported",
    "i_string_not_in_unicode_range.json": "reported",
    "i_string_overlong_sequence_2_bytes.json": "reported",
    "i_string_overlong_sequence_6_bytes.json": "reported",
    "i_string_overlong_sequence_6_bytes_null.json": "reported",
    "i_string_truncated-utf-8.json": "reported",
    "i_string_utf16BE_no_BOM.json": "accepted",
    "i_string_utf16LE_no_BOM.json": "accepted",
    "i_structure_500_nested_arrays.json": "accepted",
    "i_structure_UTF-8_BOM_empty_object.json": "accepted",  # the BOM is a warning, then {}
}

# n_ files that hold no JSON value at all (only whitespace, or only a BOM). RFC 8259 §2
# requires one value; driftline reports these with their own kind, 'empty', at line 1
# byte 0, rather than as a parse error, as it does for every empty file of any format.
N_EMPTY = {"n_single_space.json", "n_structure_no_data.json", "n_structure_UTF8_BOM_no_data.json"}


def _no_constants(name: str) -> Any:
    raise ValueError(f"{name} is not JSON (RFC 8259 §6)")


def python_view(raw: bytes) -> tuple[int, Counter[str]]:
    """(rows, values present per field path) of a JSON document, via Python's json module."""
    doc = json.loads(raw, parse_constant=_no_constants)
    records = doc if isinstance(doc, list) else [doc]
    present: Counter[str] = Counter()

    def walk(v: Any, path: str) -> None:
        present[path] += 1
        if isinstance(v, dict):
            for k, sub in v.items():
                walk(sub, paths.child(path, k))
        elif isinstance(v, list):
            for sub in v:
                walk(sub, paths.element(path))

    for rec in records:
        if isinstance(rec, dict):
            for k, sub in rec.items():
                walk(sub, paths.child(None, k))
        else:
            walk(rec, paths.ROOT)
    return len(records), present


def _only_file(f: Path) -> driftline.Profile:
    profile = driftline.scan(f)
    assert [(x.rel, x.format) for x in profile.files] == [(f.name, "json")]
    return profile


def test_the_suite_is_all_there():
    # source: JSON parsing test suite, test_parsing/ as shipped: 95 y_, 188 n_, 35 i_ files
    assert (len(Y), len(N), len(I)) == (95, 188, 35)
    assert sorted(f.name for f in I) == sorted(I_OUTCOME)


@pytest.mark.timeout(10)
@pytest.mark.parametrize("f", Y, ids=lambda f: f.name)
def test_y_file_is_profiled_with_no_error(f: Path):
    # source: JSON parsing test suite (RFC 8259 cases), y_ files must be accepted
    profile = _only_file(f)
    fr = profile.files[0]
    assert fr.errors == 0, [i.message for i in fr.issues]
    rows, present = python_view(f.read_bytes())
    assert fr.rows == rows
    seen = {p: st.present for p, st in profile.stats.items()}
    assert {p: n for p, n in seen.items() if n} == dict(present)
    # a path with nothing in it is the element of lists that were always empty (type unknown)
    assert all(p.endswith("[]") and profile.stats[p[:-2]].items == 0 for p, n in seen.items() if not n)


@pytest.mark.timeout(10)
@pytest.mark.parametrize("f", N, ids=lambda f: f.name)
def test_n_file_is_reported_with_its_name_and_position(f: Path):
    # source: JSON parsing test suite (RFC 8259 cases), n_ files must be rejected
    fr = _only_file(f).files[0]
    size = f.stat().st_size
    if f.name in N_EMPTY:
        assert [i.kind for i in fr.issues if i.kind != "bom"] == ["empty"]
    else:
        assert [(i.kind, i.severity) for i in fr.issues if i.kind != "bom"] == [("malformed-json", "error")]
    issue = next(i for i in fr.issues if i.kind != "bom")
    assert issue.file == f.name
    assert issue.line is not None and issue.line >= 1
    assert issue.byte_offset is not None and 0 <= issue.byte_offset <= size
    assert fr.rows == 0  # nothing from a malformed document is profiled


@pytest.mark.timeout(10)
@pytest.mark.parametrize("f", I, ids=lambda f: f"{f.name}-{I_OUTCOME.get(f.name)}")
def test_i_file_never_crashes_and_does_what_the_table_says(f: Path):
    # source: JSON parsing test suite (RFC 8259 cases), i_ files are implementation-defined
    fr = _only_file(f).files[0]
    if I_OUTCOME[f.name] == "accepted":
        assert fr.errors == 0
        assert fr.rows == python_view(f.read_bytes())[0]
    else:
        assert [(i.kind, i.severity) for i in fr.issues if i.kind != "bom"] == [("malformed-json", "error")]
        issue = fr.issues[-1]
        assert issue.line is not None and issue.byte_offset is not None and fr.rows == 0


@pytest.mark.timeout(10)
def test_100000_opening_arrays_are_reported_without_recursion_error():
    # source: JSON parsing test suite, n_structure_100000_opening_arrays.json (depth 100,000)
    f = SUITE / "n_structure_100000_opening_arrays.json"
    assert f.read_bytes().count(b"[") == 100_000
    fr = _only_file(f).files[0]
    assert [i.kind for i in fr.issues] == ["malformed-json"]
    assert "recursion" in fr.issues[0].message.lower() or "depth" in fr.issues[0].message.lower()


@pytest.mark.timeout(60)
def test_the_whole_suite_in_one_scan_profiles_every_accepted_file():
    # One scan of the folder: the rejected files do not stop or disturb the others.
    profile = driftline.scan(SUITE)
    by_name = {fr.rel: fr for fr in profile.files}
    assert len(by_name) == len(FILES)
    for f in Y:
        assert by_name[f.name].errors == 0 and by_name[f.name].rows == python_view(f.read_bytes())[0]
    for f in N:
        assert by_name[f.name].rows == 0 and by_name[f.name].issues
    accepted = [f for f in I if I_OUTCOME[f.name] == "accepted"]
    assert profile.rows == sum(python_view(f.read_bytes())[0] for f in Y + accepted)
    assert profile.error_count == len(N) - len(N_EMPTY) + sum(v == "reported" for v in I_OUTCOME.values())
