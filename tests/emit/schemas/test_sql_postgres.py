"""The postgres SQL file in a real PostgreSQL server (tests/_postgres.py): the table is created,
the staging data loaded with COPY, the INSERT run, and the table holds the scan's counts.

source: PostgreSQL 15 (Debian's postgresql package), driven with psycopg 3; the COPY protocol
(PostgreSQL manual, COPY).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from test_sql import _applied, scan_nulls, staged

import _postgres
import driftline
from _orders import make_orders
from driftline.emit.schemas import sql
from driftline.recommendation import Recommendation


@pytest.fixture(scope="module")
def postgres() -> Iterator[str]:
    with _postgres.server() as dsn:
        yield dsn


def _load_postgres(dsn: str, rec: Recommendation, root: Path, table: str, flatten: str | None = None) -> Any:
    """A connection whose database holds the loaded table (in a schema of its own)."""
    import psycopg

    lay = sql.layout(rec, "postgres", flatten)
    con = psycopg.connect(dsn, autocommit=True)
    con.execute("SET TimeZone = 'UTC'")
    con.execute(f'DROP TABLE IF EXISTS "{table}", "{table}_staging"')
    con.execute(sql.create_table(rec, table, lay))
    con.execute(sql.create_staging(rec, table, lay))
    names = ", ".join(f'"{c.name}"' for c in lay.columns)
    with con.cursor() as cur, cur.copy(f'COPY "{table}_staging" ({names}) FROM STDIN') as copy:
        for row in staged(rec, root, lay):
            copy.write_row(row)
    con.execute(sql.insert_select(rec, table, lay))
    return con, lay


@pytest.mark.parametrize("flatten", [None, "__"])
def test_the_demo_loads_in_postgres_with_the_scans_counts(postgres: str, demo_dir: Path, demo_profile, flatten):
    rec = demo_profile.recommend()
    con, lay = _load_postgres(postgres, rec, demo_dir / "landing", "readings", flatten)
    with con:
        (count,) = con.execute('SELECT count(*) FROM "readings"').fetchone()
        assert count == rec.rows == demo_profile.rows
        q = ", ".join(f'count(*) - count("{c.name}")' for c in lay.columns)
        nulls = dict(
            zip([c.name for c in lay.columns], con.execute(f'SELECT {q} FROM "readings"').fetchone(), strict=True)
        )
        assert nulls == scan_nulls(demo_profile, rec, lay)
        types = dict(
            con.execute(
                "SELECT column_name, data_type FROM information_schema.columns WHERE table_name = 'readings'"
            ).fetchall()
        )
        # source: PostgreSQL's names of its types (information_schema.columns.data_type)
        assert (types["pm25"], types["ts"], types["tags"], types["day"], types["firmware"]) == (
            "double precision",
            "timestamp with time zone",
            "jsonb",
            "date",
            "text",
        )
        assert types.get("battery") == (None if flatten else "jsonb")


def test_the_file_as_written_runs_in_postgres(postgres: str, demo_profile):
    import psycopg

    text = driftline.Recommendation._of(demo_profile.recommend()).to_sql(table="whole", dialect="postgres")
    with psycopg.connect(postgres, autocommit=True) as con:
        con.execute('DROP TABLE IF EXISTS "whole", "whole_staging"')
        con.execute(text)  # CREATE TABLE, the staging table, the INSERT over it (empty)
        assert con.execute('SELECT count(*) FROM "whole"').fetchone() == (0,)


def test_postgres_casts_like_apply(postgres: str, tmp_path: Path):
    # The guarded CASE stands in for a safe cast: text that does not parse is NULL, as apply() makes it.
    orders = make_orders(tmp_path / "orders")
    rec = driftline.scan(orders).recommend()
    con, lay = _load_postgres(postgres, rec, orders, "orders")
    columns = ["amount", "paid", "day", "created", "balance"]
    with con:
        got = con.execute(f'SELECT {", ".join(f"{chr(34)}{c}{chr(34)}" for c in columns)} FROM "orders"').fetchall()
    table = _applied(orders, rec)
    want = list(zip(*(table.column(c).to_pylist() for c in columns), strict=True))
    assert got == want


def test_unparsed_text_is_null_in_postgres(postgres: str, tmp_path: Path):
    rows = [*map(str, range(40)), "9223372036854775807", "-9223372036854775808", "007", "lots"]
    (tmp_path / "a.csv").write_text("n\n" + "".join(f"{r}\n" for r in rows))
    rec = driftline.scan(tmp_path).recommend(max_null_share=0.1)
    assert rec.plan("n").target.key() == "int64"
    con, _ = _load_postgres(postgres, rec, tmp_path, "n")
    with con:
        got = [r[0] for r in con.execute('SELECT "n" FROM "n"').fetchall()]
    # source: int64 is -2**63 .. 2**63 - 1 (PostgreSQL bigint, manual 8.1.1); common practice: "007" is a
    # code, kept out of a number under leading_zeros = "keep"; 'lots' is no number
    assert got == _applied(tmp_path, rec).column("n").to_pylist() == [*range(40), 2**63 - 1, -(2**63), None, None]


@pytest.mark.parametrize(("ci", "outcome"), [("1", pytest.fail.Exception), (None, pytest.skip.Exception)])
def test_a_missing_server_fails_under_ci_and_skips_elsewhere(monkeypatch: pytest.MonkeyPatch, ci, outcome):
    if ci is None:
        monkeypatch.delenv("CI", raising=False)
    else:
        monkeypatch.setenv("CI", ci)
    monkeypatch.setattr(_postgres, "_bin", lambda name: None)  # as on a machine without the package
    with pytest.raises(outcome, match="PostgreSQL is not available: no initdb or pg_ctl"), _postgres.server():
        pass


def test_local_times_in_a_named_zone_in_postgres(postgres: str, tmp_path: Path):
    # source: PostgreSQL's timestamp AT TIME ZONE (manual 9.9.4) against pyarrow's assume_timezone
    orders = make_orders(tmp_path / "orders")
    rec = driftline.scan(orders).recommend(timestamp_zone="Europe/Berlin")
    con, _ = _load_postgres(postgres, rec, orders, "zoned")
    with con:
        got = [r[0] for r in con.execute('SELECT "created" FROM "zoned"').fetchall()]
    assert got == _applied(orders, rec).column("created").to_pylist()
