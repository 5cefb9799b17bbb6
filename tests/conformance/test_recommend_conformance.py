"""Directories nobody on this project wrote: every schema file passes its reference reader,
every record validates against the permissive JSON Schema, and every predicted count
equals casting the data.

source: JSON parsing test suite (RFC 8259 cases), the y_ files (must parse);
source: csv-spectrum edge cases (RFC 4180 quoting, newlines, CRLF, UTF-8);
source: Apache Parquet test files (encodings, compressions, nested and logical types).
All read from ../shared/testdata/ beside the repository.
"""

from __future__ import annotations

import io
import json
import math
import shutil
import sqlite3
import warnings
from pathlib import Path

import avro.errors
import avro.schema
import duckdb
import fastavro
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from jsonschema import Draft202012Validator

import driftline
from conftest import SHARED_TESTDATA
from driftline.emit.schemas import sql
from driftline.emit.schemas.avro import avro_records, avro_schema
from driftline.emit.schemas.json_schema import json_schema
from driftline.recommendation import Recommendation
from driftline.recommendation.apply import Tally, apply
from driftline.recommendation.raw import iter_records, raw_batches

TESTDATA = SHARED_TESTDATA


@pytest.fixture(scope="module", params=["json-parsing y_", "csv-spectrum"])
def suite(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Path:
    if request.param == "csv-spectrum":
        return TESTDATA / "csv-edge-cases" / "csvs"
    root = tmp_path_factory.mktemp("y")
    for f in sorted((TESTDATA / "json-parsing" / "test_parsing").glob("y_*.json")):
        shutil.copy(f, root)
    return root


def _same(a: object, b: object) -> bool:
    """Equality where NaN equals NaN (Parquet files hold NaNs; Avro keeps them)."""
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b, strict=True))
    return a == b


def _check_everything(root: Path, *, avro_round_trip: bool = True) -> Recommendation:
    profile = driftline.scan(root)
    rec = profile.recommend()
    assert rec.rows == profile.rows
    schema = json_schema(rec)
    Draft202012Validator.check_schema(schema)
    validator = Draft202012Validator(schema, format_checker=Draft202012Validator.FORMAT_CHECKER)
    records = list(iter_records(root))
    assert len(records) == rec.rows
    # A record's verdict depends on its value only: each distinct record is validated once.
    distinct = {repr(x): (f, r, x) for f, r, x in records}
    assert [(f, r, e.message) for f, r, x in distinct.values() for e in validator.iter_errors(x)] == []

    tally, target, outs = Tally(), rec.arrow_schema(), []
    for raw in raw_batches(root):
        out = apply(raw.batch, rec, tally=tally)
        assert out.schema.equals(target, check_metadata=True)
        outs.append(out)
    table = pa.Table.from_batches(outs, schema=target)
    assert table.num_rows == rec.rows
    for plan in rec.walk():
        measured = {k: v for k, v in tally.counts.get(plan.path, {}).items() if k != "nulled" and ":" not in k}
        assert measured == {e.cause: e.count for e in plan.effects if e.exact and e.count}, plan.path
        assert tally.get(plan.path, "nulled") == plan.nulled

    avsc = avro_schema(rec)
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        avro.schema.parse(json.dumps(avsc))
    # avro 1.12.2 (Python) implements neither local-timestamp-* nor *-nanos, which the 1.12
    # specification defines; it warns and reads them as long. Nothing else may warn.
    assert all(
        isinstance(w.message, avro.errors.IgnoredLogicalType)
        and ("local-timestamp" in str(w.message) or "nanos" in str(w.message))
        for w in seen
    )
    if avro_round_trip:
        data = avro_records(rec, table)
        buf = io.BytesIO()
        fastavro.writer(buf, fastavro.parse_schema(avsc), data)
        buf.seek(0)
        assert _same(list(fastavro.reader(buf)), data)

    batches = list(raw_batches(root))
    for con, dialect in ((duckdb.connect(), "duckdb"), (sqlite3.connect(":memory:"), "sqlite")):
        lay = sql.layout(rec, dialect)
        rows = [r for b in batches for r in sql.staging_rows(b.batch, rec, lay, file=b.file)]
        names = [c.name for c in lay.columns]
        con.execute(sql.create_table(rec, "t", lay))
        con.execute(sql.create_staging(rec, "t", lay))
        if not names:
            continue
        if isinstance(con, duckdb.DuckDBPyConnection):
            staged = pa.table({f"c{i}": pa.array([r[i] for r in rows], pa.string()) for i in range(len(names))})  # noqa: F841
            con.execute('INSERT INTO "t_staging" SELECT * FROM staged')
        else:
            con.executemany(sql.staging_insert(rec, "t", lay), rows)
        con.execute(sql.insert_select(rec, "t", lay))
        assert con.execute('SELECT count(*) FROM "t"').fetchone() == (rec.rows,)
    return rec


def test_a_suite_gets_sound_files_and_exact_counts(suite: Path):
    assert _check_everything(suite).rows > 20


def _parquet_files() -> list[Path]:
    out = []
    for f in sorted((TESTDATA / "parquet-conformance" / "data").glob("*.parquet")):
        try:
            pq.read_table(f)
        except (OSError, pa.ArrowException):
            continue  # what pyarrow cannot read, the scan reports as an error (not this test's)
        out.append(f)
    return out


# source: Apache Parquet test files, parquet-conformance/data (every file pyarrow reads)
@pytest.mark.parametrize("path", _parquet_files(), ids=lambda p: p.name)
def test_each_parquet_conformance_file(path: Path):
    profile = driftline.scan(path)
    if profile.error_count:
        pytest.skip("the scan reports this file as unreadable")
    # nested_structs.rust.parquet holds a timestamp in year -12585: fastavro reads Avro
    # timestamps back as Python datetimes, which stop at year 1.
    _check_everything(path, avro_round_trip=path.name != "nested_structs.rust.parquet")
