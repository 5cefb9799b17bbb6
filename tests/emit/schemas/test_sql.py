"""The SQL file: CREATE TABLE in one engine's dialect, a staging table, and the cast rules as an
INSERT ... SELECT, built with sqlglot. DuckDB and sqlite run it in-process and their tables
are held to the scan's counts; sqlglot reads every dialect back.

source: sqlglot 30 (parser and generator of each dialect); duckdb 2.0.1; sqlite 3.40+
(python's sqlite3); REFERENCES.md section 7.
"""

from __future__ import annotations

import json
import re
import sqlite3
from pathlib import Path
from typing import Any

import duckdb
import pyarrow as pa
import pytest
import sqlglot
from jsonschema import Draft202012Validator
from sqlglot import exp

import driftline
from _orders import make_orders
from conftest import ROOT
from driftline.emit.schemas import rules_json, sql
from driftline.recommendation import Recommendation
from driftline.recommendation.apply import apply
from driftline.recommendation.raw import raw_batches


@pytest.fixture(scope="module")
def orders(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_orders(tmp_path_factory.mktemp("orders"))


def staged(rec: Recommendation, root: Path, lay: sql.Layout) -> list[tuple[str | None, ...]]:
    """The staging rows of every file under root (partition values from each file's path)."""
    return [r for b in raw_batches(root) for r in sql.staging_rows(b.batch, rec, lay, file=b.file)]


def _load(
    con: Any, rec: Recommendation, root: Path, table: str, dialect: str | None = None, flatten: str | None = None
) -> sql.Layout:
    """Create both tables, load the staging rows, run the cast rules; the layout used."""
    is_duck = isinstance(con, duckdb.DuckDBPyConnection)
    lay = sql.layout(rec, dialect or ("duckdb" if is_duck else "sqlite"), flatten)
    rows = staged(rec, root, lay)
    con.execute(sql.create_table(rec, table, lay))
    con.execute(sql.create_staging(rec, table, lay))
    if is_duck:
        # DuckDB reads a pyarrow table by its variable name; executemany would be slow.
        n = len(lay.columns)
        staging = pa.table({f"c{i}": pa.array([r[i] for r in rows], pa.string()) for i in range(n)})  # noqa: F841
        con.execute(f'INSERT INTO "{table}_staging" SELECT * FROM staging')
    else:
        con.executemany(sql.staging_insert(rec, table, lay), rows)
    con.execute(sql.insert_select(rec, table, lay))
    return lay


def scan_nulls(profile: driftline.Profile, rec: Recommendation, lay: sql.Layout) -> dict[str, int]:
    """Each column's NULLs as the scan counts them: rows without a value (missing, null, or below
    a missing struct), plus the values the rule nulls, plus rows of files without a partition key."""
    fields = profile.fields
    out = {}
    for c in lay.columns:
        if c.partition is not None:
            out[c.name] = rec.rows - c.partition.rows
            continue
        assert c.plan is not None
        s = fields[c.plan.path]
        out[c.name] = rec.rows - (s.container - s.absent - s.stats.nulls) + c.plan.nulled
    return out


def table_nulls(con: Any, table: str, lay: sql.Layout) -> dict[str, int]:
    q = ", ".join(f'count(*) - count("{c.name}")' for c in lay.columns)
    got = con.execute(f'SELECT {q} FROM "{table}"').fetchone()
    return dict(zip([c.name for c in lay.columns], got, strict=True))


def _applied(root: Path, rec: Recommendation) -> pa.Table:
    return pa.Table.from_batches([apply(b.batch, rec) for b in raw_batches(root)])


def test_the_engines_are_the_checks_we_say():
    # sqlite takes any type name (type affinity); DuckDB refuses one it does not know, and two
    # columns whose names differ only by case (source: the error the issue quotes).
    sqlite3.connect(":memory:").execute('CREATE TABLE t ("x" FOOBAR)')
    with pytest.raises(duckdb.CatalogException, match="FOOBAR"):
        duckdb.connect().execute('CREATE TABLE t ("x" FOOBAR)')
    with pytest.raises(duckdb.Error, match='Column with name "duck" already exists!'):
        duckdb.connect().execute('CREATE TABLE t ("Duck" INT, "duck" INT)')


@pytest.mark.parametrize("engine", ["duckdb", "sqlite"])
@pytest.mark.parametrize("flatten", [None, "__"])
def test_demo_loads_with_the_scans_counts(demo_dir: Path, demo_profile: driftline.Profile, engine: str, flatten):
    root = demo_dir / "landing"
    rec = demo_profile.recommend()
    con = duckdb.connect() if engine == "duckdb" else sqlite3.connect(":memory:")
    lay = _load(con, rec, root, "raw_readings", flatten=flatten)
    (count,) = con.execute('SELECT count(*) FROM "raw_readings"').fetchone()
    assert count == rec.rows == demo_profile.rows
    nulls = table_nulls(con, "raw_readings", lay)
    assert nulls == scan_nulls(demo_profile, rec, lay)
    assert nulls["ts"] == 0 and nulls["region"] == 0  # NOT NULL and a partition key of every file
    # the whole file runs as written too (its INSERT over an empty staging table)
    text = sql.script(rec, "t", dialect=engine, flatten=flatten)
    if engine == "sqlite":
        sqlite3.connect(":memory:").executescript(text)
    else:
        duckdb.connect().execute(text)


def test_duckdb_keeps_structs_and_lists_as_its_own_types(demo_dir: Path, demo_profile: driftline.Profile):
    rec = demo_profile.recommend()
    con = duckdb.connect()
    _load(con, rec, demo_dir / "landing", "r")
    types = dict(
        con.execute("SELECT column_name, data_type FROM information_schema.columns WHERE table_name = 'r'").fetchall()
    )
    # source: DuckDB's names of its types (information_schema.columns.data_type)
    assert types["battery"] == 'STRUCT(charge_cycles BIGINT, "level" BIGINT, voltage DOUBLE)'
    assert (types["tags"], types["ts"], types["day"], types["region"], types["pm25"]) == (
        "VARCHAR[]",
        "TIMESTAMP WITH TIME ZONE",
        "DATE",
        "VARCHAR",
        "DOUBLE",
    )
    # the struct's fields hold what apply() gives (source: pyarrow's StructArray.flatten of it)
    got = [r[0] for r in con.execute('SELECT "battery"."level" FROM "r"').fetchall()]
    want = _applied(demo_dir / "landing", rec).column("battery").combine_chunks().field("level").to_pylist()
    assert sorted(got, key=repr) == sorted(want, key=repr)


def test_duckdb_select_casts_like_apply(demo_dir: Path, orders: Path):
    for root, columns in (
        (demo_dir / "landing", ["pm25", "pm10", "humidity", "battery_level", "ts", "station_id", "tags"]),
        (orders, ["amount", "paid", "day", "created", "balance", "labels"]),
    ):
        rec = driftline.scan(root).recommend()
        con = duckdb.connect()
        con.execute("SET TimeZone = 'UTC'")
        _load(con, rec, root, "t")
        got = con.execute(f'SELECT {", ".join(f"{chr(34)}{c}{chr(34)}" for c in columns)} FROM "t"').fetchall()
        table = _applied(root, rec)
        want = list(zip(*(table.column(c).to_pylist() for c in columns), strict=True))
        assert len(got) == len(want)
        for g, w in zip(got, want, strict=True):
            assert g == w, (g, w)


def test_sql_cannot_tell_a_csv_cell_from_a_json_string(orders: Path):
    # Documented in docs/recommend.md: 'note' maps CSV null tokens; apply keeps the two JSON
    # strings 'n/a' and 'NULL', the SELECT (seeing only text) nulls them too.
    rec = driftline.scan(orders).recommend()
    con = duckdb.connect()
    _load(con, rec, orders, "t")
    (sql_nulls,) = con.execute('SELECT count(*) FROM "t" WHERE "note" IS NULL').fetchone()
    assert sql_nulls - _applied(orders, rec).column("note").null_count == 2


# -- every dialect ------------------------------------------------------------------------------


def _creates(text: str, dialect: str) -> dict[str, exp.Create]:
    out = {}
    for e in sql.parses(text, dialect):
        if isinstance(e, exp.Create):
            out[e.this.this.name] = e
    return out


@pytest.mark.parametrize("dialect", sql.DIALECTS)
def test_every_dialect_parses_back_to_the_same_column_types(demo_profile, orders: Path, dialect: str):
    # source: sqlglot's parser of each dialect reads the file back; each column's type, read back
    # and written again, is the type we built.
    for rec in (demo_profile.recommend(), driftline.scan(orders).recommend()):
        for flatten in (None, "__"):
            lay = sql.layout(rec, dialect, flatten)
            text = sql.script(rec, "t", dialect=dialect, flatten=flatten)
            creates = _creates(text, dialect)
            assert sorted(creates) == ["t", "t_staging"]
            defs = [d for d in creates["t"].this.expressions if isinstance(d, exp.ColumnDef)]
            assert [d.name for d in defs] == [c.name for c in lay.columns]
            for d, c in zip(defs, lay.columns, strict=True):
                assert d.args["kind"].sql(dialect) == sql.column_type(c, lay).sql(dialect), c.name
            # and each statement, read back and written again, is the text we wrote (comments included)
            for part in (sql.create_table(rec, "t", lay), sql.insert_select(rec, "t", lay)):
                assert sqlglot.parse_one(part, read=dialect).sql(dialect, pretty=True, identify=True) + ";\n" == part
            (insert,) = [e for e in sql.parses(text, dialect) if isinstance(e, exp.Insert)]
            assert len(insert.expression.expressions) == len(lay.columns)
            # no length taken from the sample, in any dialect (issue 19: contracts, not snapshots)
            assert not re.search(r"(VARCHAR|STRING|TEXT)\(\d+\)", text)


@pytest.mark.parametrize(
    ("dialect", "partitioned"),
    [
        ("spark", "PARTITIONED BY (`region`, `day`)"),  # source: Spark SQL CREATE TABLE, PARTITIONED BY
        ("trino", "PARTITIONED_BY=ARRAY['region', 'day']"),  # source: Trino Hive connector table properties
        ("bigquery", "PARTITION BY `day`"),  # source: BigQuery DDL, one date column
        ("duckdb", None),
        ("postgres", None),
        ("snowflake", None),
        ("sqlite", None),
    ],
)
def test_partition_keys_become_partition_columns(demo_profile, dialect: str, partitioned: str | None):
    text = sql.script(demo_profile.recommend(), "t", dialect=dialect)
    create = _creates(text, dialect)["t"]
    found = create.find(exp.PartitionedByProperty)
    flat = " ".join(text.split())
    assert re.search(r"region.? \w+, /\* partition key 'region' of the folder names \*/", text)
    if partitioned is None:
        assert found is None and "-- Partition columns (from key=value folders): region, day" in text
    else:
        assert found is not None and " ".join(partitioned.split()) in flat.replace("( ", "(").replace(" )", ")")


@pytest.mark.parametrize(
    ("dialect", "cast"),
    [
        ("duckdb", 'TRY_CAST("pm10" AS DOUBLE)'),  # source: DuckDB TRY_CAST
        ("spark", "TRY_CAST(`pm10` AS DOUBLE)"),  # source: Spark SQL try_cast (3.2+)
        ("trino", 'TRY_CAST("pm10" AS DOUBLE)'),  # source: Trino try_cast
        ("bigquery", "SAFE_CAST(`pm10` AS FLOAT64)"),  # source: BigQuery SAFE_CAST
        ("snowflake", 'TRY_CAST("pm10" AS DOUBLE)'),  # source: Snowflake TRY_CAST (string input)
        ("postgres", 'CASE WHEN "pm10" ~ \''),  # PostgreSQL has no safe cast: a guarded CASE
        ("sqlite", "CASE WHEN (NOT \"pm10\" GLOB '*[^0-9.eE+-]*'"),  # sqlite's CAST never fails
    ],
)
def test_each_cast_is_the_dialects_safe_cast(demo_profile, dialect: str, cast: str):
    rec = demo_profile.recommend()
    lay = sql.layout(rec, dialect)
    (pm10,) = [c for c in lay.columns if c.name == "pm10"]
    assert sql.expression(pm10, lay).sql(dialect, identify=True).startswith(cast)


def test_null_tokens_only_where_the_rule_needs_them(demo_profile):
    # The scan saw tokens in pm25 only; identity and NOT NULL string columns get no CASE.
    rec = demo_profile.recommend()
    lay = sql.layout(rec)
    seen = {c.name: c.plan.effect("null_token") for c in lay.columns if c.plan is not None}
    with_case = {c.name for c in lay.columns if "'n/a'" in sql.expression(c, lay).sql("duckdb")}
    assert with_case == {n for n, e in seen.items() if e is not None and e.count} == {"pm25"}
    by_name = {c.name: c for c in lay.columns}
    assert sql.expression(by_name["firmware"], lay).sql("duckdb", identify=True) == '"firmware"'
    assert sql.expression(by_name["station_id"], lay).sql("duckdb", identify=True) == '"station_id"'


def test_lengths_only_when_asked(demo_profile):
    rec = demo_profile.recommend()
    text = sql.script(rec, "t")
    # the longest value seen is a comment, never a bound
    assert '"firmware" TEXT NOT NULL, /* longest value seen: 5 characters */' in text
    bounded = sql.script(rec, "t", dialect="postgres", bounds_from_sample=True)
    assert '"firmware" VARCHAR(5) NOT NULL' in bounded and '"station_id" VARCHAR(5) NOT NULL' in bounded
    assert rec.plan("firmware").max_chars == 5


# -- names every engine accepts -----------------------------------------------------------------


def test_keys_that_differ_by_case_or_hold_dots_and_spaces_load_in_duckdb(tmp_path: Path):
    src = tmp_path / "in"
    src.mkdir()
    rows = [
        {"duck": 1, "Duck": "a", "a.b": 2.5, "a b": True, "gps": {"alt": 10, "Alt": 11}, "gps__alt": "x"},
        {"duck": 2, "Duck": "b", "a.b": 3.5, "a b": False, "gps": {"alt": 12, "Alt": 13}, "gps__alt": "y"},
    ]
    (src / "keys.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows))
    profile = driftline.scan(src)
    rec = profile.recommend()
    for flatten in (None, "__"):
        con = duckdb.connect()
        lay = _load(con, rec, src, "t", flatten=flatten)
        got = con.execute('SELECT * FROM "t"').fetchall()
        assert len(got) == 2 and table_nulls(con, "t", lay) == scan_nulls(profile, rec, lay)
        text = sql.script(rec, "t", flatten=flatten)
        duckdb.connect().execute(text)  # the file as written creates both tables in DuckDB
        renames = {(r.path, r.name, r.to) for r in lay.renames}
        for r in lay.renames:
            assert f"--   {r.path!r}: {r.name!r} -> {r.to!r} ({r.why})" in text
        doc = rules_json.rules_document(rec, flatten=flatten)
        assert {(r["path"], r["from"], r["to"]) for r in doc["renames"]} == renames
        schema = json.loads((ROOT / "docs" / "rules.schema.json").read_text(encoding="utf-8"))
        Draft202012Validator(schema).validate(doc)  # source: docs/rules.schema.json, jsonschema
        if flatten is None:
            assert [c.name for c in lay.columns] == ["Duck", "a_b", "a_b_2", "duck_2", "gps", "gps__alt"]
            assert renames == {
                ("a b", "a b", "a_b"),
                ("`a.b`", "a.b", "a_b_2"),
                ("duck", "duck", "duck_2"),
                ("gps.alt", "alt", "alt_2"),
            }
            (gps,) = con.execute('SELECT "gps" FROM "t" LIMIT 1').fetchone()
            assert gps == {"Alt": 11, "alt_2": 10}  # each struct field under its new name
        else:
            assert [c.name for c in lay.columns] == [
                "Duck",
                "a_b",
                "a_b_2",
                "duck_2",
                "gps__Alt",
                "gps__alt_2",
                "gps__alt_3",
            ]
            assert ("gps.alt", "gps__alt", "gps__alt_2") in renames and (
                "gps__alt",
                "gps__alt",
                "gps__alt_3",
            ) in renames


# -- the nested field in three dialects, as docs/recommend.md shows it ---------------------------

DOC_DIALECTS = ("duckdb", "postgres", "bigquery", "spark", "trino", "snowflake", "sqlite")


def nested_example(tmp_path: Path) -> str:
    """The table of docs/recommend.md: one nested field's column and INSERT expression per dialect."""
    (tmp_path / "a.jsonl").write_text('{"gps": {"alt": 120.5, "lat": 52.1}}\n{"gps": {"alt": 96, "lat": 52.2}}\n')
    rec = driftline.scan(tmp_path).recommend()
    lines = ["| dialect | column | INSERT … SELECT |", "|---|---|---|"]
    for d in DOC_DIALECTS:
        lay = sql.layout(rec, d)
        (col,) = lay.columns
        create = sql.create_table(rec, "t", lay).splitlines()[1].strip().rstrip(",")
        select = sql.expression(col, lay).sql(d, identify=True)
        lines.append(f"| {d} | `` {create} `` | `` {select} `` |")
    return "\n".join(lines) + "\n"


def test_the_doc_shows_what_the_code_renders(tmp_path: Path):
    doc = (ROOT / "docs" / "recommend.md").read_text(encoding="utf-8")
    block = doc.split("<!-- nested-field-by-dialect -->\n", 1)[1].split("\n\n", 1)[0] + "\n"
    assert block == nested_example(tmp_path)


# -- guards -------------------------------------------------------------------------------------


@pytest.mark.parametrize("engine", ["duckdb", "sqlite"])
def test_unparsed_text_is_null_in_both_engines(tmp_path: Path, engine: str):
    (tmp_path / "a.csv").write_text("n\n" + "".join(f"{i}\n" for i in range(19)) + "lots\n-7\n")
    rec = driftline.scan(tmp_path).recommend(max_null_share=0.1)
    assert rec.plan("n").effect("unparsed").count == 1
    con = duckdb.connect() if engine == "duckdb" else sqlite3.connect(":memory:")
    _load(con, rec, tmp_path, "t")  # a bare CAST('lots' AS BIGINT) fails in DuckDB and is 0 in sqlite
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


def test_decimals_wider_than_38_digits_become_text(tmp_path: Path):
    # DuckDB (like SQL Server) takes DECIMAL up to 38 digits: "width must be between 1 and 38".
    (tmp_path / "a.csv").write_text("big\n" + "1" * 45 + ".5\n")
    rec = driftline.scan(tmp_path).recommend()
    assert rec.plan("big").target.key() == "decimal(46,1)"
    assert '"big" TEXT NOT NULL /* decimal(46,1) as text: wider than DECIMAL(38)' in sql.create_table(rec, "t")
    with pytest.raises(duckdb.Error, match="38"):
        duckdb.connect().execute("CREATE TABLE t (x DECIMAL(46,1))")


def test_reserved_words_are_quoted_in_every_dialect(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"order": 1, "select": "x", "group": {"from": true}}\n')
    rec = driftline.scan(tmp_path).recommend()
    for con in (duckdb.connect(), sqlite3.connect(":memory:")):
        _load(con, rec, tmp_path, "table")
        assert con.execute('SELECT "order", "select" FROM "table"').fetchall() == [(1, "x")]
    for d in sql.DIALECTS:
        assert len(sqlglot.parse(sql.script(rec, "table", dialect=d), read=d)) == 3


# -- the command line -----------------------------------------------------------------------------


def _cli(*args: object) -> Any:
    from typer.testing import CliRunner

    from driftline.cli.app import app

    return CliRunner().invoke(app, [*map(str, args), "--jobs", "1"])


def test_dialect_and_flatten_on_the_command_line(tmp_path: Path):
    src = tmp_path / "in"
    src.mkdir()
    (src / "a.jsonl").write_text('{"Id": 1, "id": 2, "gps": {"alt": 3}, "gps__alt": 4}\n')
    out, rules = tmp_path / "t.sql", tmp_path / "rules.json"
    res = _cli(
        "schema", src, "--to", "sql", "--dialect", "spark", "--flatten", "__", "--out", out, "--rules", rules, "-q"
    )
    assert res.exit_code == 0, res.output
    rec = driftline.scan(src).recommend()
    assert out.read_text() == sql.script(rec, "in", dialect="spark", flatten="__")
    assert json.loads(rules.read_text())["renames"] == rules_json.rules_document(rec, flatten="__")["renames"]
    assert [(r["from"], r["to"]) for r in json.loads(rules.read_text())["renames"]] == [
        ("gps__alt", "gps__alt_2"),
        ("id", "id_2"),
    ]
    assert "`gps__alt_2` BIGINT" in out.read_text() and "`id_2` BIGINT" in out.read_text()


@pytest.mark.parametrize(
    ("flags", "message"),
    [
        (["--dialect", "oracle"], "error: unknown SQL dialect 'oracle'; choose one of duckdb, postgres, spark"),
        (["--flatten", "."], "error: bad --flatten separator: '.' holds a character outside A-Z a-z 0-9 _"),
    ],
)
def test_a_bad_dialect_or_separator_is_a_usage_error(tmp_path: Path, flags: list[str], message: str):
    (tmp_path / "a.jsonl").write_text('{"x": 1}\n')
    res = _cli("schema", tmp_path / "a.jsonl", "--to", "sql", *flags, "-q")
    assert res.exit_code == 2 and message in res.output


def test_names_and_folder_names_cannot_end_a_comment(tmp_path: Path):
    # A line break in a field name or a partition folder's key would end a -- comment: they are
    # written as Python literals, so the file stays three statements.
    part = tmp_path / "k\ney=1"
    part.mkdir()
    (part / "a.jsonl").write_text(json.dumps({"a\nDROP TABLE t; --": 1, "*/ x": 2}) + "\n")
    rec = driftline.scan(tmp_path).recommend()
    for d in sql.DIALECTS:
        text = sql.script(rec, "t", dialect=d)
        assert [type(e).__name__ for e in sql.parses(text, d)] == ["Create", "Create", "Insert"]
    con = duckdb.connect()
    lay = _load(con, rec, tmp_path, "t")
    assert [c.name for c in lay.columns] == ["___x", "a_DROP_TABLE_t____", "k_ey"]
    assert con.execute('SELECT * FROM "t"').fetchall() == [(2, 1, 1)]


def test_a_json_file_with_keys_duck_and_Duck_gives_a_file_duckdb_runs(tmp_path: Path):
    # Issue 19, tried as a new user would: a JSON file (an array of objects) whose keys differ by
    # case or hold a dot or a space. DuckDB refused the file before ('Column with name "duck"
    # already exists!', test_the_engines_are_the_checks_we_say); now it runs it as written.
    src = tmp_path / "in"
    src.mkdir()
    records = [{"duck": 1, "Duck": "a", "a.b": 2.5, "a b": True}, {"duck": 2, "Duck": "bb", "a.b": None, "a b": False}]
    (src / "keys.json").write_text(json.dumps(records))
    out = tmp_path / "keys.sql"
    assert _cli("schema", src, "--to", "sql", "--table", "keys", "--out", out, "-q").exit_code == 0
    con = duckdb.connect()
    con.execute(out.read_text())
    # source: DuckDB's own description of the table it created
    assert [r[:2] for r in con.execute('DESCRIBE "keys"').fetchall()] == [
        ("Duck", "VARCHAR"),
        ("a_b", "BOOLEAN"),
        ("a_b_2", "DOUBLE"),
        ("duck_2", "BIGINT"),
    ]
    assert '"Duck" TEXT NOT NULL, /* longest value seen: 2 characters */' in out.read_text()


@pytest.mark.parametrize("flatten", [None, "__"])
def test_an_empty_struct_is_json(tmp_path: Path, flatten: str | None):
    # No engine has a struct type without fields (Spark, BigQuery and Trino need at least one).
    (tmp_path / "a.jsonl").write_text('{"e": {}, "m": [{}], "x": 1}\n{"e": {}, "m": [], "x": 2}\n')
    rec = driftline.scan(tmp_path).recommend()
    con = duckdb.connect()
    lay = _load(con, rec, tmp_path, "t", flatten=flatten)
    types = dict(
        con.execute("SELECT column_name, data_type FROM information_schema.columns WHERE table_name = 't'").fetchall()
    )
    assert types == {"e": "JSON", "m": "JSON[]", "x": "BIGINT"}  # source: DuckDB's type names
    assert con.execute('SELECT "e", "m" FROM "t"').fetchall() == [("{}", ["{}"]), ("{}", [])]
    assert [c.name for c in lay.columns] == ["e", "m", "x"]


def test_local_times_in_a_named_zone(orders: Path):
    # source: the IANA zone database as pyarrow's assume_timezone (apply) and DuckDB's ICU read it:
    # local times in Europe/Berlin become the same instants in both.
    rec = driftline.scan(orders).recommend(timestamp_zone="Europe/Berlin")
    assert rec.plan("created").target.key() == "timestamp[us, Europe/Berlin]" and rec.plan("created").effect(
        "assumed_zone"
    )
    con = duckdb.connect()
    con.execute("SET TimeZone = 'UTC'")
    _load(con, rec, orders, "t")
    got = [r[0] for r in con.execute('SELECT "created" FROM "t"').fetchall()]
    assert got == _applied(orders, rec).column("created").to_pylist()
    for d in sql.DIALECTS:  # every dialect's spelling reads back
        text = sql.script(rec, "t", dialect=d)
        assert [type(e).__name__ for e in sql.parses(text, d)] == ["Create", "Create", "Insert"]
