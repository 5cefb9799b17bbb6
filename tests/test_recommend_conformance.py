"""Directories nobody on this project wrote: every schema file passes its reference reader,
every record validates against the permissive JSON Schema, and every predicted count
equals casting the data.

source: JSON parsing test suite (RFC 8259 cases), the y_ files (must parse);
source: csv-spectrum edge cases (RFC 4180 quoting, newlines, CRLF, UTF-8).
Both read from ../shared/testdata/ beside the repository.
"""

from __future__ import annotations

import io
import json
import shutil
import sqlite3
from pathlib import Path

import avro.schema
import duckdb
import fastavro
import pyarrow as pa
import pytest
from jsonschema import Draft202012Validator

import driftline
from driftline.emit.schemas import sql
from driftline.emit.schemas.avro import avro_datum, avro_schema
from driftline.emit.schemas.json_schema import json_schema
from driftline.recommend.apply import Tally, apply
from driftline.recommend.raw import iter_records, raw_batches

TESTDATA = Path(__file__).resolve().parents[1].parent / "shared" / "testdata"


@pytest.fixture(scope="module", params=["json-parsing y_", "csv-spectrum"])
def suite(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Path:
    if request.param == "csv-spectrum":
        return TESTDATA / "csv-edge-cases" / "csvs"
    root = tmp_path_factory.mktemp("y")
    for f in sorted((TESTDATA / "json-parsing" / "test_parsing").glob("y_*.json")):
        shutil.copy(f, root)
    return root


def test_a_suite_gets_sound_files_and_exact_counts(suite: Path):
    profile = driftline.scan(suite)
    rec = profile.recommend()
    assert rec.rows == profile.rows > 20
    schema = json_schema(rec)
    Draft202012Validator.check_schema(schema)
    validator = Draft202012Validator(schema, format_checker=Draft202012Validator.FORMAT_CHECKER)
    records = list(iter_records(suite))
    assert len(records) == rec.rows
    assert [(f, r, e.message) for f, r, x in records for e in validator.iter_errors(x)] == []

    tally, target, outs = Tally(), rec.arrow_schema(), []
    for raw in raw_batches(suite):
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
    avro.schema.parse(json.dumps(avsc))
    data = [avro_datum(rec, r) for r in table.to_pylist()]
    buf = io.BytesIO()
    fastavro.writer(buf, fastavro.parse_schema(avsc), data)
    buf.seek(0)
    assert list(fastavro.reader(buf)) == data

    rows = [r for b in raw_batches(suite) for r in sql.staging_rows(b.batch, rec)]
    for con in (duckdb.connect(), sqlite3.connect(":memory:")):
        con.execute(sql.create_table(rec, "t"))
        con.execute(sql.create_staging(rec, "t"))
        con.executemany(sql.staging_insert(rec, "t"), rows)
        con.execute(sql.insert_select(rec, "t"))
        assert con.execute('SELECT count(*) FROM "t"').fetchone() == (rec.rows,)
