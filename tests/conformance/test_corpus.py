"""The real-file corpus (fixtures/corpus/): driftline's reading against a careful reading and two references.

Each file's expected rows × columns in fixtures/corpus/manifest.toml was found by opening the
file with Python's csv module in the right dialect (or json for JSON); DuckDB and pyarrow
must read the same shape, or differ exactly as the manifest documents, with its reason.
Files driftline misreads today are strict xfails naming the fix that is pending.
"""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest

import corpus_readings as corpus

ENTRIES = corpus.entries()


def _param(entry: dict[str, Any], pending_key: str = "pending") -> Any:
    marks = []
    if entry.get(pending_key):
        marks.append(pytest.mark.xfail(strict=True, reason=entry[pending_key]))
    return pytest.param(entry, id=entry["path"], marks=marks)


def _python_csv_shape(entry: dict[str, Any]) -> tuple[int, int]:
    """The careful reading, redone with Python's csv module from the dialect the manifest's pyarrow options name."""
    raw = (corpus.CORPUS / entry["path"]).read_bytes()
    options = entry.get("pyarrow", {})
    read, parse = options.get("read", {}), options.get("parse", {})
    text = raw.decode(read.get("encoding", "utf-8"))  # source: Python codecs; utf-16 follows the BOM either way
    quoting = csv.QUOTE_NONE if parse.get("quote_char") is False else csv.QUOTE_MINIMAL
    rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=parse.get("delimiter", ","), quoting=quoting))
    rows = [r for r in rows[read.get("skip_rows", 0) :] if r]  # source: Python csv docs; a blank line is []
    if options.get("invalid_rows") == "skip":
        width = max(len(r) for r in rows)
        rows = [r for r in rows if len(r) == width]
    header = 0 if read.get("autogenerate_column_names") else 1
    return len(rows) - header, len(rows[-1])


@pytest.mark.parametrize("entry", [pytest.param(e, id=e["path"]) for e in ENTRIES if not corpus.is_json(e)])
def test_expected_shape_is_pythons_csv_reading(entry: dict[str, Any]) -> None:
    # source: Python's csv module (RFC 4180 reader) with the dialect named in the manifest
    assert _python_csv_shape(entry) == corpus.expected(entry)


@pytest.mark.parametrize("entry", [pytest.param(e, id=e["path"]) for e in ENTRIES if corpus.is_json(e)])
def test_expected_shape_is_pythons_json_reading(entry: dict[str, Any]) -> None:
    import json

    text = (corpus.CORPUS / entry["path"]).read_text(encoding="utf-8")
    try:
        records = json.loads(text)  # source: RFC 8259, one document holding an array of records
    except json.JSONDecodeError:
        records = [json.loads(line) for line in text.splitlines() if line.strip()]  # JSON Lines
    keys = {k for r in records for k in r}
    assert (len(records), len(keys)) == corpus.expected(entry)


@pytest.mark.parametrize("entry", [_param(e) for e in ENTRIES])
def test_driftline_reads_the_expected_shape(entry: dict[str, Any]) -> None:
    reading, _ = corpus.read_driftline(entry)
    assert (reading.shape, reading.errors) == (corpus.expected(entry), entry.get("errors", 0))


@pytest.mark.parametrize("entry", [_param(e, "casts_pending") for e in ENTRIES if e.get("keep_string")])
def test_leading_zero_fields_stay_strings(entry: dict[str, Any]) -> None:
    import driftline

    _, profile = corpus.read_driftline(entry)
    recommendation = driftline.recommend(profile)
    targets = {name: recommendation.field(name).target.name for name in entry["keep_string"]}
    # common practice: '01' and '1' are different identifiers (FIPS, census codes), so no numeric cast
    assert targets == {name: "string" for name in entry["keep_string"]}


@pytest.mark.parametrize("entry", [pytest.param(e, id=e["path"]) for e in ENTRIES])
def test_duckdb_agrees_or_the_difference_is_documented(entry: dict[str, Any]) -> None:
    reading = corpus.read_duckdb(entry)  # source: DuckDB read_csv / read_json auto-detection
    assert corpus.agrees(entry, "duckdb", reading), reading.text()


@pytest.mark.parametrize("entry", [pytest.param(e, id=e["path"]) for e in ENTRIES])
def test_pyarrow_agrees_or_the_difference_is_documented(entry: dict[str, Any]) -> None:
    reading = corpus.read_pyarrow(entry)  # source: pyarrow.csv / pyarrow.json with explicit options
    assert corpus.agrees(entry, "pyarrow", reading), reading.text()


def test_every_corpus_file_is_in_the_manifest_and_the_readme() -> None:
    files = {str(p.relative_to(corpus.CORPUS)) for p in corpus.CORPUS.rglob("*") if p.is_file()}
    listed = {e["path"] for e in ENTRIES}
    assert files - {"README.md", "manifest.toml"} == listed
    readme = (corpus.CORPUS / "README.md").read_text(encoding="utf-8")
    assert [p for p in sorted(listed) if f"`{p}`" not in readme] == []
