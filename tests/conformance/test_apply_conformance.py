"""driftline apply on folders nobody on this project wrote, treated as landing folders: every
row written, the output's schema exactly the recommended one, and the quarantine equal to the
predicted loss per field and cause.

source: JSON parsing test suite (RFC 8259 cases), the y_ files (must parse);
source: csv-spectrum edge cases (RFC 4180 quoting, newlines, CRLF, UTF-8);
source: Apache Parquet test files (encodings, compressions, nested and logical types).
All read from ../shared/testdata/ beside the repository.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import duckdb
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import driftline
from conftest import SHARED_TESTDATA
from driftline.applying.output import MARKER_NAME, PART_NAME, QUARANTINE_DIR
from driftline.applying.run import output_schema

TESTDATA = SHARED_TESTDATA


def _check(root: Path, out: Path) -> driftline.ApplyResult:
    rec = driftline.scan(root).recommend()
    result = driftline.apply(root, out=out)
    doc = result.reconciliation
    assert doc["differences"] == [] and result.matches
    assert doc["rows"] == {"in": rec.rows, "written": rec.rows, "rejected": 0, "balanced": True}
    predicted = {
        (p.path, e.cause): e.count
        for p in rec.walk()
        for e in p.effects
        if e.kind in ("null", "change") and e.exact and e.count
    }
    quarantine = pa.concat_tables(pq.read_table(f) for f in sorted((out / QUARANTINE_DIR).rglob("*.parquet")))
    got: dict[tuple[str, str], int] = {}
    for path, cause in zip(quarantine.column("path").to_pylist(), quarantine.column("cause").to_pylist(), strict=True):
        got[(path, cause)] = got.get((path, cause), 0) + 1
    inexact = {(p.path, e.cause) for p in rec.walk() for e in p.effects if not e.exact}
    assert {k: v for k, v in got.items() if k not in inexact} == predicted
    files = [out / p / PART_NAME for p in _partitions(out)]
    want = output_schema(rec)
    for f in files:
        # source: pyarrow's Parquet reader (which names a map's entries after its column: see _canonical)
        got = pq.read_schema(f)
        assert pa.schema([_canonical(x) for x in got], metadata=got.metadata).equals(
            pa.schema([_canonical(x) for x in want], metadata=want.metadata), check_metadata=True
        )
    if want.names:  # DuckDB reads no Parquet file without a column
        # source: DuckDB's Parquet reader counts the rows written
        counted = sum(duckdb.sql(f"select count(*) from read_parquet('{f}')").fetchall()[0][0] for f in files)
        assert counted == rec.rows
    else:
        assert sum(pq.ParquetFile(f).metadata.num_rows for f in files) == rec.rows
    return result


def _partitions(out: Path) -> list[str]:
    return list(json.loads((out / MARKER_NAME).read_text())["partitions"])


def _canonical_type(t: pa.DataType) -> pa.DataType:
    if pa.types.is_map(t):
        return pa.map_(
            pa.field("key", _canonical_type(t.key_type), nullable=False),
            pa.field("value", _canonical_type(t.item_type), nullable=t.item_field.nullable),
        )
    if pa.types.is_list(t):
        return pa.list_(_canonical(t.value_field))
    if pa.types.is_struct(t):
        return pa.struct([_canonical(t.field(i)) for i in range(t.num_fields)])
    return t


def _canonical(f: pa.Field) -> pa.Field:
    """A field with its maps' entries named as pa.map_ names them: pyarrow 26's Parquet reader
    names a map's entries after the column (or 'key_value') whatever the Arrow schema stored says."""
    return pa.field(f.name, _canonical_type(f.type), nullable=f.nullable, metadata=f.metadata)


@pytest.mark.parametrize("name", ["json-parsing y_", "csv-spectrum"])
def test_a_suite_as_a_landing_folder(name: str, tmp_path: Path):
    if name == "csv-spectrum":
        root = tmp_path / "csvs"
        shutil.copytree(TESTDATA / "csv-edge-cases" / "csvs", root)
    else:
        root = tmp_path / "y"
        root.mkdir()
        for f in sorted((TESTDATA / "json-parsing" / "test_parsing").glob("y_*.json")):
            shutil.copy(f, root)
    assert _check(root, tmp_path / "out").reconciliation["rows"]["in"] > 20


def _parquet_files() -> list[Path]:
    out = []
    for f in sorted((TESTDATA / "parquet-conformance" / "data").glob("*.parquet")):
        try:
            pq.read_table(f)
        except (OSError, pa.ArrowException):
            continue  # what pyarrow cannot read, the scan reports as an error
        out.append(f)
    return out


# source: Apache Parquet test files, parquet-conformance/data (every file pyarrow reads)
@pytest.mark.slow
@pytest.mark.parametrize("path", _parquet_files(), ids=lambda p: p.name)
def test_each_parquet_conformance_file_as_a_landing_folder(path: Path, tmp_path: Path):
    root = tmp_path / "in"
    root.mkdir()
    shutil.copy(path, root)
    _check(root, tmp_path / "out")
