"""sources/registry.py: one record per format; every suffix, sniff and reader goes through it.

Also the Format literal (a misspelt name is a type error) and recommendation/raw reading the same
rows as the scan's readers, since it now reads through them (readers.read_values).
"""

from __future__ import annotations

import ast
import csv as pycsv
import gzip
import json
import subprocess
import sys
from collections import Counter
from pathlib import Path
from typing import get_args

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import driftline
from conftest import ROOT, SHARED_TESTDATA
from driftline.core.dataformat import FORMATS, Format
from driftline.recommendation.raw import TEXT, iter_records, raw_batches
from driftline.sources.discover import discover
from driftline.sources.registry import FORMAT_BY_SUFFIX, SPECS, detect_format, sniff_format, suffix_list

CSV_SUITE = SHARED_TESTDATA / "csv-edge-cases"

# Every file name suffix discovery reads, with the format it must give: the README's list of
# formats read (JSON Lines .jsonl/.ndjson, JSON, CSV, TSV, Parquet), and the spellings the
# tools that write them use.  # common practice: .ndjson (ndjson spec), .jsonlines
# (jsonlines.org), .tab (TSV as spreadsheets save it), .pq/.parq (Parquet writers)
EXPECTED_SUFFIXES: dict[str, Format] = {
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
    ".jsonlines": "jsonl",
    ".json": "json",
    ".csv": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".parq": "parquet",
}
COMPRESSED = {".gz": "gzip", ".gzip": "gzip", ".bz2": "bz2", ".zst": "zstd", ".zstd": "zstd", ".xz": "xz"}


def test_the_registry_names_exactly_the_format_literal():
    assert tuple(SPECS) == FORMATS == get_args(Format) == ("jsonl", "json", "csv", "tsv", "parquet")
    assert all(name == spec.name for name, spec in SPECS.items())


def test_every_suffix_is_in_the_registry_once():
    assert FORMAT_BY_SUFFIX == EXPECTED_SUFFIXES
    every = [sfx for spec in SPECS.values() for sfx in spec.suffixes]
    assert len(every) == len(set(every))


def test_each_format_is_read_one_way():
    # a stream reader or a random-access one, never both, never neither
    for spec in SPECS.values():
        assert (spec.read is None) != (spec.read_path is None), spec.name
    # spans are for the line-based text formats only (jsonsplit, csvsplit)
    assert sorted(n for n, s in SPECS.items() if s.split is not None) == ["csv", "jsonl", "tsv"]
    # RFC 8259 section 8.1: JSON text exchanged between systems is UTF-8 (Unicode only)
    assert sorted(n for n, s in SPECS.items() if s.json_text) == ["json", "jsonl"]


def _sample(fmt: Format, path: Path) -> bytes:
    if fmt == "parquet":
        pq.write_table(pa.table({"a": [1, 2]}), path)
        return path.read_bytes()
    return {
        "jsonl": b'{"a": 1}\n{"a": 2}\n',
        "json": b'[{"a": 1}, {"a": 2}]',
        "csv": b"a,b\n1,2\n2,3\n",
        "tsv": b"a\tb\n1\t2\n2\t3\n",
    }[fmt]


@pytest.mark.parametrize("suffix", sorted(EXPECTED_SUFFIXES))
def test_discovery_reads_each_suffix_as_its_format(tmp_path: Path, suffix: str):
    fmt = EXPECTED_SUFFIXES[suffix]
    f = tmp_path / f"part-0{suffix.upper() if suffix == '.csv' else suffix}"  # suffixes are matched case-blind
    f.write_bytes(_sample(fmt, f))
    [ref] = discover([str(tmp_path)]).files
    assert (ref.rel, ref.format, ref.compression) == (f.name, fmt, None)
    assert (ref.path, ref.is_remote) == (str(f), False)  # a local file's location is its absolute path
    res = driftline.scan(tmp_path).files[0]
    assert (res.format, res.rows, res.errors) == (fmt, 2, 0)


@pytest.mark.parametrize("suffix", sorted(COMPRESSED))
@pytest.mark.parametrize("inner", [".jsonl", ".tsv", ".ndjson"])
def test_a_compression_suffix_leaves_the_format_to_the_one_before_it(tmp_path: Path, suffix: str, inner: str):
    name = f"a{inner}{suffix}"
    assert detect_format(name) == EXPECTED_SUFFIXES[inner]
    (tmp_path / name).write_bytes(gzip.compress(b"{}\n"))  # content aside: the name decides
    [ref] = discover([str(tmp_path)]).files
    assert (ref.format, ref.compression) == (EXPECTED_SUFFIXES[inner], COMPRESSED[suffix])


@pytest.mark.parametrize("fmt", FORMATS)
def test_a_nameless_file_is_sniffed_as_its_format(tmp_path: Path, fmt: Format):
    # the first bytes tell: '{' a JSON Lines record, '[' a JSON array (RFC 8259 section 2),
    # a tab or a comma in the first line, "PAR1" (Apache Parquet file format)
    f = tmp_path / "part-00000"
    data = _sample(fmt, tmp_path / "x")
    f.write_bytes(data)
    assert sniff_format(str(f)) == fmt
    g = tmp_path / "part-00001"
    g.write_bytes(gzip.compress(data))  # source: RFC 1952, the magic number 1f 8b
    assert detect_format(str(g)) == (fmt if fmt != "parquet" else None)  # Parquet is never compressed whole


def test_text_that_says_nothing_is_not_a_format(tmp_path: Path):
    for i, data in enumerate([b"just words\nmore words\n", b"", b"a\x00,b\n"]):
        f = tmp_path / f"blob{i}"
        f.write_bytes(data)
        assert sniff_format(str(f)) is None, data


def test_the_suffix_list_in_messages_comes_from_the_registry():
    assert suffix_list() == ".jsonl .json .csv .tsv .parquet"


def test_the_report_schema_lists_the_registry_formats():
    # the published report format (docs/report.schema.json) names every format the registry reads
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text())
    text = json.dumps(schema)
    enums = [e for e in _enums(schema) if "parquet" in e]
    assert enums, text[:200]
    assert all(sorted(e) == sorted(FORMATS) for e in enums)


def _enums(node: object) -> list[list[str]]:
    out = []
    if isinstance(node, dict):
        if isinstance(node.get("enum"), list):
            out.append(node["enum"])
        for v in node.values():
            out.extend(_enums(v))
    elif isinstance(node, list):
        for v in node:
            out.extend(_enums(v))
    return out


@pytest.mark.slow
def test_a_misspelt_format_name_is_a_type_error(tmp_path: Path):
    code = (
        "from driftline.core.dataformat import Format\n"
        "from driftline.sources.registry import spec\n"
        'good: Format = "tsv"\n'
        'bad: Format = "jsonlines"\n'
        'spec("parqet")\n'
    )
    snippet = tmp_path / "snippet.py"
    snippet.write_text(code)
    run = subprocess.run(
        [sys.executable, "-m", "mypy", "--no-incremental", "--cache-dir", str(tmp_path / "cache"), str(snippet)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env={"MYPYPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"},
        check=False,
    )
    errors = [line for line in run.stdout.splitlines() if ": error:" in line]
    # source: PEP 586 (Literal types): a str literal outside the Literal is rejected
    assert [e.split(":")[1] for e in errors] == ["4", "5"], run.stdout
    assert "'jsonlines'" in errors[0] and "'parqet'" in errors[1]


# -- recommendation/raw reads the scan's rows --------------------------------------------------------


def _raw_rows(root: Path) -> Counter[str]:
    rows: Counter[str] = Counter()
    for b in raw_batches(root, batch_rows=1000):
        rows[b.file] += b.batch.num_rows
    return rows


@pytest.mark.slow
def test_raw_reads_the_rows_the_scan_reads_on_the_demo(demo_dir: Path):
    landing = demo_dir / "landing"
    profile = driftline.scan(landing)
    raw = _raw_rows(landing)
    scanned = {f.rel: f.rows for f in profile.files if f.rows}
    assert {k: v for k, v in raw.items() if v} == scanned
    assert Counter(rel for rel, _, _ in iter_records(landing)) == raw


CSVS = sorted((CSV_SUITE / "csvs").glob("*.csv"))


@pytest.mark.parametrize("csv", CSVS, ids=lambda f: f.name)
def test_raw_reads_the_csv_suite_as_the_scan_and_pythons_csv_module(csv: Path):
    # source: csv-spectrum edge cases (RFC 4180 quoting), read by Python's csv module as the
    # reference (an invalid UTF-8 byte as U+FFFD, as the scan reads it); the suite's own json/
    # differs from its CSV in one cell of location_coordinates, so the module is the judge
    with csv.open(newline="", encoding="utf-8", errors="replace") as fh:
        expected = list(pycsv.DictReader(fh))
    batches = list(raw_batches(csv))
    got = [
        {name: (cell or {}).get(TEXT) or "" for name, cell in row.items()}
        for b in batches
        for row in b.batch.to_pylist()
    ]
    assert got == expected
    assert sum(b.batch.num_rows for b in batches) == driftline.scan(csv).files[0].rows == len(expected)


def _format_dispatch(tree: ast.AST) -> list[int]:
    """Lines that compare a format (x.format, fmt) with a format's name, or key a dict by them."""
    names = set(FORMATS)

    def strings(node: ast.AST) -> set[str]:
        return {n.value for n in ast.walk(node) if isinstance(n, ast.Constant) and isinstance(n.value, str)}

    def is_format(node: ast.AST) -> bool:
        return (isinstance(node, ast.Attribute) and node.attr == "format") or (
            isinstance(node, ast.Name) and node.id in ("fmt", "format")
        )

    hits = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Compare):
            sides = [node.left, *node.comparators]
            if any(is_format(s) for s in sides) and any(strings(s) & names for s in sides if not is_format(s)):
                hits.append(node.lineno)
        elif isinstance(node, ast.Dict):
            keys = {k.value for k in node.keys if isinstance(k, ast.Constant)}
            if len(keys & names) > 1:
                hits.append(node.lineno)
    return hits


def test_no_module_but_the_registry_branches_on_a_format_name():
    # adding a format touches one module: every other one asks the registry
    src = ROOT / "src" / "driftline"
    found = {
        str(f.relative_to(src)): hits
        for f in sorted(src.rglob("*.py"))
        if f.name not in ("registry.py", "core/dataformat.py") and (hits := _format_dispatch(ast.parse(f.read_text())))
    }
    assert found == {}


def test_the_dispatch_finder_finds_dispatch():
    code = (
        'if ref.format == "csv": pass\nx = fmt in ("json", "jsonl")\nM = {"tsv": 1, "parquet": 2}\ny = mode == "csv"\n'
    )
    assert _format_dispatch(ast.parse(code)) == [1, 2, 3]
