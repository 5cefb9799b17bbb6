"""The naming rule (emit/schemas/names.py): valid, distinct column names, each change listed.

source: DuckDB refuses two column names equal ignoring case ("Column with name ... already
exists!"); PostgreSQL manual 4.1.1 (identifiers cut at NAMEDATALEN - 1 = 63 bytes).
"""

from __future__ import annotations

import re
import sqlite3

import duckdb
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from driftline.emit.schemas.names import MAX_NAME, Rename, check_separator, distinct, plain

HOSTILE = ["id", "Id", "ID", "gps.alt", "gps_alt", "a b", "x[0]", 'say "hi"', "", "2nd", "é", "a" * 70, "a" * 64]


def test_the_rule_by_example():
    new, renames = distinct(HOSTILE)
    assert new == [
        "id",
        "Id_2",
        "ID_3",
        "gps_alt",
        "gps_alt_2",
        "a_b",
        "x_0_",
        "say__hi_",
        "_",
        "_2nd",
        "__2",  # 'é' is '_', already taken by the empty name
        "a" * 63,
        "a" * 61 + "_2",  # cut to 63, equal to the one above, suffixed within 63
    ]
    assert renames[0] == Rename("Id", "Id", "Id_2", "equal to 'id' ignoring case")
    assert [r.name for r in renames] == [n for n, m in zip(HOSTILE, new, strict=True) if n != m]
    assert renames[-1].why == "longer than 63 characters; the same as '" + "a" * 63 + "'"


def test_every_name_is_valid_and_distinct_in_the_engines():
    new, _ = distinct(HOSTILE)
    assert all(re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", n) and len(n) <= MAX_NAME for n in new)
    assert len({n.lower() for n in new}) == len(new)
    columns = ", ".join(f'"{n}" INTEGER' for n in new)
    duckdb.connect().execute(f"CREATE TABLE t ({columns})")  # refuses names equal ignoring case
    sqlite3.connect(":memory:").execute(
        f"CREATE TABLE t ({columns})"
    )  # refuses the same (sqlite 3, 'duplicate column')
    with pytest.raises(sqlite3.OperationalError, match="duplicate column name"):
        sqlite3.connect(":memory:").execute('CREATE TABLE t ("Id" INTEGER, "id" INTEGER)')


def test_a_name_the_rule_leaves_alone_keeps_its_case():
    assert plain("Station_ID") == ("Station_ID", "")
    assert distinct(["B", "a"]) == (["B", "a"], [])


@pytest.mark.parametrize(
    ("sep", "why"),
    [("__", None), ("_x_", None), (".", "'.' holds a character outside A-Z a-z 0-9 _"), ("", "the separator is empty")],
)
def test_flatten_separators(sep: str, why: str | None):
    assert check_separator(sep) == why


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=80), max_size=12))
def test_any_names_come_out_valid_distinct_and_listed(names: list[str]):
    new, renames = distinct(names)
    assert len(new) == len(names)
    assert all(re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]{0,62}", n) for n in new)
    assert len({n.lower() for n in new}) == len(new)
    # every change is listed, in order, and nothing else is
    assert [(r.name, r.to) for r in renames] == [(a, b) for a, b in zip(names, new, strict=True) if a != b]
    # the rule leaves its own output alone
    assert distinct(new) == (new, [])
