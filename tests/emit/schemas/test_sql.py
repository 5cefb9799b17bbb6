"""The SQL file: CREATE TABLE with portable types, a staging table, and the cast rules as an
INSERT ... SELECT. DuckDB runs it and checks type names; sqlite3 checks only syntax.

source: REFERENCES.md section 7 (portable DDL; sqlite accepts any type name, DuckDB does not),
duckdb 2.0.1, sqlite 3.40+.
"""

from __future__ import annotations

import json
import re
import sqlite3
from pathlib import Path

import duckdb
import pyarrow as pa
import pytest

import driftline
from _orders import make_orders
from driftline.emit.schemas import sql
from driftline.recommendation import Recommendation
from driftline.recommendation.apply import apply
from driftline.recommendation.raw import raw_batches


@pytest.fixture(scope="module")
def orders(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_orders(tmp_path_factory.mktemp("orders"))


def _load(con: object, rec: Recommendation, root: Path, table: str) -> None:
    """Create both tables, load the staging rows, run the cast rules."""
    rows = [r for b in raw_batches(root) for r in sql.staging_rows(b.batch, rec)]
    con.execute(sql.create_table(rec, table))  # type: ignore[attr-defined]
    con.execute(sql.create_staging(rec, table))  # type: ignore[attr-defined]
    if isinstance(con, duckdb.DuckDBPyConnection):
        # DuckDB reads a pyarrow table by its variable name; executemany would be slow.
        names = [c.name for c in sql.columns(rec)]
        staged = pa.table({f"c{i}": pa.array([r[i] for r in rows], pa.string()) for i in range(len(names))})  # noqa: F841
        con.execute(f"INSERT INTO {sql.quote(table + '_staging')} SELECT * FROM staged")
    else:
        con.executemany(sql.staging_insert(rec, table), rows)  # type: ignore[attr-defined]
    con.execute(sql.insert_select(rec, table))  # type: ignore[attr-defined]


def _applied(root: Path, rec: Recommendation) -> pa.Table:
    return pa.Table.from_batches([apply(b.batch, rec) for b in raw_batches(root)])


def test_the_engines_are_the_checks_we_say():
    # sqlite takes any type name (type affinity); DuckDB refuses one it does not know.
    sqlite3.connect(":memory:").execute('CREATE TABLE t ("x" FOOBAR)')
    with pytest.raises(duckdb.CatalogException, match="FOOBAR"):
        duckdb.connect().execute('CREATE TABLE t ("x" FOOBAR)')


@pytest.mark.parametrize("engine", ["duckdb", "sqlite"])
def test_demo_script_runs_on_a_loaded_sample(demo_dir: Path, engine: str):
    root = demo_dir / "landing"
    rec = driftline.scan(root).recommend()
    con = duckdb.connect() if engine == "duckdb" else sqlite3.connect(":memory:")
    _load(con, rec, root, "raw_readings")
    (count,) = con.execute('SELECT count(*) FROM "raw_readings"').fetchone()
    assert count == rec.rows
    script = sql.script(rec, "raw_readings")
    assert not re.search(r"VARCHAR(?!\()", script)  # always with a length (PostgreSQL section 8.3)
    if engine == "sqlite":
        sqlite3.connect(":memory:").executescript(script)  # the whole file parses
        return
    types = dict(
        con.execute(
            "SELECT column_name, data_type FROM information_schema.columns WHERE table_name = 'raw_readings'"
        ).fetchall()
    )
    assert (types["pm25"], types["humidity"], types["ts"], types["battery.level"], types["tags"]) == (
        "DOUBLE",
        "BIGINT",
        "TIMESTAMP WITH TIME ZONE",
        "BIGINT",
        "VARCHAR",
    )


def test_duckdb_select_casts_like_apply(demo_dir: Path, orders: Path):
    for root, columns in (
        (demo_dir / "landing", ["pm25", "pm10", "humidity", "battery_level", "ts", "station_id"]),
        (orders, ["amount", "paid", "day", "created", "balance", "labels"]),
    ):
        rec = driftline.scan(root).recommend()
        con = duckdb.connect()
        con.execute("SET TimeZone = 'UTC'")
        _load(con, rec, root, "t")
        got = con.execute(f'SELECT {", ".join(sql.quote(c) for c in columns)} FROM "t"').fetchall()
        table = _applied(root, rec)
        want = list(zip(*(table.column(c).to_pylist() for c in columns), strict=True))
        assert len(got) == len(want)
        for g, w in zip(got, want, strict=True):
            if "labels" in columns:  # SQL keeps lists as JSON text
                g = (*g[:-1], None if g[-1] is None else json.loads(g[-1]))
            assert g == w, (g, w)


def test_sql_cannot_tell_a_csv_cell_from_a_json_string(orders: Path):
    # Documented in docs/recommend.md: 'note' maps CSV null tokens; apply keeps the two JSON
    # strings 'n/a' and 'NULL', the SELECT (seeing only text) nulls them too.
    rec = driftline.scan(orders).recommend()
    con = duckdb.connect()
    _load(con, rec, orders, "t")
    (sql_nulls,) = con.execute('SELECT count(*) FROM "t" WHERE "note" IS NULL').fetchone()
    assert sql_nulls - _applied(orders, rec).column("note").null_count == 2


def test_quoted_identifiers_and_reserved_words(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"order": 1, "select": "x", "a\\"b": true}\n')
    rec = driftline.scan(tmp_path).recommend()
    ddl = sql.create_table(rec, "group")
    assert '"order" BIGINT NOT NULL' in ddl and '"a""b" BOOLEAN NOT NULL' in ddl
    for con in (duckdb.connect(), sqlite3.connect(":memory:")):
        _load(con, rec, tmp_path, "group")
        assert con.execute('SELECT "order", "select", "a""b" FROM "group"').fetchall() == [(1, "x", True)]


def test_decimals_wider_than_38_digits_become_text(tmp_path: Path):
    # DuckDB (like SQL Server) takes DECIMAL up to 38 digits: "width must be between 1 and 38".
    (tmp_path / "a.csv").write_text("big\n" + "1" * 45 + ".5\n")
    rec = driftline.scan(tmp_path).recommend()
    assert rec.plan("big").target.key() == "decimal(46,1)"
    assert '"big" VARCHAR(49)' in sql.create_table(rec, "t")
    with pytest.raises(duckdb.Error, match="38"):
        duckdb.connect().execute("CREATE TABLE t (x DECIMAL(46,1))")


def test_unparsed_text_is_guarded_before_the_cast(tmp_path: Path):
    (tmp_path / "a.csv").write_text("n\n" + "".join(f"{i}\n" for i in range(19)) + "lots\n-7\n")
    rec = driftline.scan(tmp_path).recommend(max_null_share=0.1)
    assert rec.plan("n").effect("unparsed").count == 1
    con = duckdb.connect()
    _load(con, rec, tmp_path, "t")  # a bare CAST('lots' AS BIGINT) would fail in DuckDB
    got = [r[0] for r in con.execute('SELECT "n" FROM "t"').fetchall()]
    assert got == _applied(tmp_path, rec).column("n").to_pylist() == [*range(19), None, -7]


@pytest.mark.parametrize("zeros", ["keep", "parse"])
def test_the_guard_takes_int64_whole_and_leading_zeros_by_the_option(tmp_path: Path, zeros: str):
    # source: int64 is -2**63 .. 2**63 - 1; 19-digit values inside it are integers, past it they are not.
    # common practice: "007" is a code; it parses only under leading_zeros = "parse".
    rows = [*map(str, range(40)), "9223372036854775807", "-9223372036854775808", "007", "lots"]
    (tmp_path / "a.csv").write_text("n\n" + "".join(f"{r}\n" for r in rows))
    rec = driftline.scan(tmp_path).recommend(max_null_share=0.1, leading_zeros=zeros)
    # Parsed codes count their zeros as digits, so beside 19-digit integers the field asks for a decimal.
    assert rec.plan("n").target.key() == ("int64" if zeros == "keep" else "decimal(19,0)")
    assert rec.plan("n").effect("unparsed").count == (2 if zeros == "keep" else 1)
    con = duckdb.connect()
    _load(con, rec, tmp_path, "t")
    got = [r[0] for r in con.execute('SELECT "n" FROM "t"').fetchall()]
    want = [*range(40), 2**63 - 1, -(2**63), None if zeros == "keep" else 7, None]
    assert got == _applied(tmp_path, rec).column("n").to_pylist() == want
