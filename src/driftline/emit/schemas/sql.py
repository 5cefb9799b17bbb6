"""The recommendation as portable SQL: CREATE TABLE, a staging table, and the rules as a SELECT.

* Types are the ones ISO SQL names (PostgreSQL manual ch. 8 lists them): BOOLEAN,
  SMALLINT, INTEGER, BIGINT, REAL, DOUBLE PRECISION, DECIMAL(p,s) (p <= 38, the widest most
  engines take), VARCHAR(n) always with a length, DATE, TIME, TIMESTAMP [WITH TIME ZONE];
  BLOB for bytes. Identifiers are quoted ("order").
* Struct fields become columns of their own, named by their path ("battery.level");
  lists, maps and JSON text are VARCHAR(n) holding JSON text.
* The staging table ("<table>_staging") has one VARCHAR(n) column per target column. It
  holds each value as text: a CSV cell, a JSON string's content, the JSON text of a
  number or boolean; for list, map and JSON-text columns the JSON text of the value
  (strings quoted). Load blank CSV cells as NULL.
* The INSERT ... SELECT applies the rules with CASE and CAST: blanks and null tokens
  become NULL, leap seconds :59, local times get the zone's offset. SQL cannot tell a CSV
  cell from a JSON string, nor run the grammar checks of apply(); docs/recommend.md lists
  where the SQL rendition differs.
"""

from __future__ import annotations

import decimal
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import orjson
import pyarrow as pa

from driftline.core.lattice import DType
from driftline.core.marker import remark
from driftline.core.words import count
from driftline.observe.textclass import INT64_MAX, INT64_MIN, NULL_TOKENS
from driftline.recommendation.options import zone_is_fixed
from driftline.recommendation.plan import FieldPlan, Recommendation
from driftline.recommendation.raw import json_text, jsonable, plain_value

MAX_DECIMAL = 38
JSON_TEXT_RULES = frozenset({"keep_as_json_text", "wrap_scalar_in_list"})


def quote(name: str) -> str:
    """A quoted SQL identifier.

    >>> print(quote('order'), quote('a"b'))
    "order" "a""b"
    """
    return '"' + name.replace('"', '""').replace("\x00", "") + '"'


def _lit(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


@dataclass(frozen=True, slots=True)
class Column:
    """One SQL column: its name, the plan it renders, and the struct names above it."""

    name: str
    plan: FieldPlan
    parents: tuple[str, ...]  # field names from the top-level field down to the plan

    @property
    def json_text(self) -> bool:
        t = self.plan.target.name
        return self.plan.rule in JSON_TEXT_RULES or t in ("list", "map")


def columns(rec: Recommendation) -> list[Column]:
    """The SQL columns: one per scalar field, struct fields flattened by path."""
    out: list[Column] = []
    taken: set[str] = set()

    def walk(plan: FieldPlan, parents: tuple[str, ...]) -> None:
        names = (*parents, plan.name)
        if plan.target.name == "struct" and plan.rule != "keep_as_json_text":
            for c in plan.children:
                walk(c, names)
            return
        name = ".".join(names)
        # A field named "a.b" beside a struct a with a field b, or an empty name (SQL has no
        # zero-length identifier): the path as the scan spells it, which is unique.
        if name in taken or "" in names:
            name = plan.path
        taken.add(name)
        out.append(Column(name, plan, names))

    for p in rec.fields:
        walk(p, ())
    return out


def sql_type(plan: FieldPlan) -> str:
    """The portable SQL type of a plan's target."""
    t = plan.target
    n = t.name
    if plan.rule == "keep_as_json_text" or n in ("list", "map", "string", "null"):
        return f"VARCHAR({max(plan.max_chars or plan.input_chars or 1, 1)})"
    if n == "decimal":
        assert t.precision is not None
        if t.precision > MAX_DECIMAL:
            return f"VARCHAR({t.precision + 3})"
        return f"DECIMAL({t.precision},{t.scale})"
    if n == "timestamp":
        return "TIMESTAMP WITH TIME ZONE" if t.tz else "TIMESTAMP"
    return {
        "bool": "BOOLEAN",
        "int8": "SMALLINT",
        "int16": "SMALLINT",
        "uint8": "SMALLINT",
        "int32": "INTEGER",
        "uint16": "INTEGER",
        "int64": "BIGINT",
        "uint32": "BIGINT",
        "uint64": "DECIMAL(20,0)",
        "float16": "REAL",
        "float32": "REAL",
        "float64": "DOUBLE PRECISION",
        "binary": "BLOB",
        "date32": "DATE",
        "date64": "DATE",
        "time32": "TIME",
        "time64": "TIME",
        "duration": "BIGINT",
    }[n]


UNIT_NAMES = {"s": "seconds", "ms": "milliseconds", "us": "microseconds", "ns": "nanoseconds"}


def stand_in(t: DType) -> str | None:
    """What the SQL type of a target stands in for, when portable SQL cannot name the type itself.

    >>> from driftline.core.lattice import parse_key
    >>> print(stand_in(parse_key("duration[ns]")))
    duration[ns] as BIGINT, a count of nanoseconds: portable SQL has no interval of one fixed unit
    """
    if t.name == "duration":
        assert t.unit is not None
        return f"{t.key()} as BIGINT, a count of {UNIT_NAMES[t.unit]}: portable SQL has no interval of one fixed unit"
    if t.name == "decimal" and t.precision is not None and t.precision > MAX_DECIMAL:
        return f"{t.key()} as text: wider than DECIMAL({MAX_DECIMAL}), the widest most engines take"
    if t.name == "null":
        return "only nulls were seen: SQL has no null type, so a text column of NULLs"
    return None


def _staging_chars(col: Column) -> int:
    return max(col.plan.input_chars or 1, 1)


_NO_COLUMNS = "-- no field was seen: a table needs at least one column\n"


def create_table(rec: Recommendation, table: str) -> str:
    """CREATE TABLE for the target; NOT NULL where no value is ever missing."""
    if not columns(rec):
        return _NO_COLUMNS
    cols = columns(rec)
    lines = []
    for i, c in enumerate(cols):
        line = f"  {quote(c.name)} {sql_type(c.plan)}{'' if _nullable(c) else ' NOT NULL'}{',' * (i < len(cols) - 1)}"
        note = None if c.json_text else stand_in(c.plan.target)
        lines.append(line if note is None else f"{line}  -- {note}")
    return f"CREATE TABLE {quote(table)} (\n" + "\n".join(lines) + "\n);\n"


def _nullable(col: Column) -> bool:
    # A flattened struct field is null wherever its struct is missing.
    return col.plan.nullable or len(col.parents) > 1


def create_staging(rec: Recommendation, table: str) -> str:
    if not columns(rec):
        return _NO_COLUMNS
    lines = [f"  {quote(c.name)} VARCHAR({_staging_chars(c)})" for c in columns(rec)]
    return f"CREATE TABLE {quote(table + '_staging')} (\n" + ",\n".join(lines) + "\n);\n"


# -- expressions --------------------------------------------------------------------------------

_TOKEN_LIST = ", ".join(_lit(t) for t in sorted(NULL_TOKENS))
_JSON_TOKEN_LIST = ", ".join(_lit(orjson.dumps(t).decode()) for t in sorted(NULL_TOKENS))


def _digits_only(x: str) -> str:
    inner = x
    for d in "0123456789":
        inner = f"REPLACE({inner}, '{d}', '')"
    return f"{inner} = ''"


def _number_guard(x: str, decimal: bool, zeros: bool = False) -> str:
    """The integer or decimal shapes the rule parses (textclass); zeros: zero_padded ones too."""
    body = f"CASE WHEN SUBSTR({x}, 1, 1) = '-' THEN SUBSTR({x}, 2) ELSE {x} END"
    # A zero before another digit is zero_padded, parsed only under leading_zeros = "parse".
    padded = "" if zeros else f" AND NOT (SUBSTR({body}, 1, 1) = '0' AND SUBSTR({body}, 2, 1) BETWEEN '0' AND '9')"
    if not decimal:
        # int64: 18 digits always, 19 up to the bound (digit strings of one length order as numbers)
        bound = f"CASE WHEN SUBSTR({x}, 1, 1) = '-' THEN '{-INT64_MIN}' ELSE '{INT64_MAX}' END"
        fits = f"(LENGTH({body}) <= 18 OR LENGTH({body}) = 19 AND ({body}) <= {bound})"
        return f"({body}) <> '' AND {_digits_only(f'({body})')} AND {fits}{padded}"
    no_point = f"REPLACE({body}, '.', '')"
    return (
        f"({no_point}) <> '' AND {_digits_only(f'({no_point})')} "
        f"AND LENGTH({body}) - LENGTH({no_point}) <= 1 "
        f"AND SUBSTR({body}, 1, 1) <> '.' AND SUBSTR({body}, LENGTH({body}), 1) <> '.'{padded}"
    )


def _tokens(plan: FieldPlan, col: Column) -> bool:
    """Whether the column maps null tokens: only where strings or CSV cells arrive."""
    tokens = plan.params.get("tokens", {})
    return (
        tokens.get("string") == "null"
        and "string" in plan.inputs
        or tokens.get("text") == "null"
        and "text" in plan.inputs
    )


def _timestamp(x: str, plan: FieldPlan, t: DType) -> str:
    s = x
    if plan.effect("leap_second"):
        s = f"CASE WHEN SUBSTR({s}, 18, 2) = '60' THEN SUBSTR({s}, 1, 17) || '59' || SUBSTR({s}, 20) ELSE {s} END"
    if plan.effect("lowercase"):
        s = f"UPPER({s})"
    if not t.tz:
        return f"CAST({s} AS TIMESTAMP)"
    zoned = f"UPPER({s}) LIKE '%Z' OR SUBSTR({s}, 20) LIKE '%+%' OR SUBSTR({s}, 20) LIKE '%-%'"
    if not plan.effect("assumed_zone"):
        return f"CAST({s} AS TIMESTAMP WITH TIME ZONE)"
    zone = t.tz
    assert zone is not None
    if not zone_is_fixed(zone):
        # Not portable: a zone name needs AT TIME ZONE (PostgreSQL, DuckDB with ICU).
        return (
            f"CASE WHEN {zoned} THEN CAST({s} AS TIMESTAMP WITH TIME ZONE) "
            f"ELSE CAST({s} AS TIMESTAMP) AT TIME ZONE {_lit(zone)} END"
        )
    offset = "+00:00" if zone in ("UTC", "Etc/UTC", "Z") else zone
    local = f"CASE WHEN LENGTH({s}) = 10 THEN {s} || ' 00:00:00' ELSE {s} END || {_lit(offset)}"
    return f"CAST(CASE WHEN {zoned} THEN {s} ELSE {local} END AS TIMESTAMP WITH TIME ZONE)"


def expression(col: Column) -> str:
    """The SELECT expression that casts the staging column into the target column."""
    plan, x = col.plan, quote(col.name)
    t = plan.target
    typ = sql_type(plan)
    if t.name == "null":
        return f"CAST(NULL AS {typ})"
    if col.json_text:
        value = x
        if plan.rule == "wrap_scalar_in_list":
            value = f"CASE WHEN SUBSTR(LTRIM({x}), 1, 1) = '[' THEN {x} ELSE '[' || {x} || ']' END"
        if _tokens(plan, col):
            value = f"CASE WHEN LOWER(TRIM({x})) IN ({_JSON_TOKEN_LIST}) THEN NULL ELSE {value} END"
        return f"CAST({value} AS {typ})"
    nulls = []
    if _tokens(plan, col):
        nulls.append(f"LOWER(TRIM({x})) IN ({_TOKEN_LIST})")
    if t.name != "string" and plan.params.get("empty") == "null" and "string" in plan.inputs:
        nulls.append(f"TRIM({x}) = ''")
    if t.name == "bool":
        value = f"CASE WHEN LOWER({x}) = 'true' THEN TRUE WHEN LOWER({x}) = 'false' THEN FALSE ELSE NULL END"
    elif t.name == "timestamp":
        value = _timestamp(x, plan, t)
    else:
        value = f"CAST({x} AS {typ})"
    if plan.effect("unparsed") and (t.name.startswith(("int", "uint")) or t.name in ("decimal", "float64")):
        guard = _number_guard(
            x, decimal=not t.name.startswith(("int", "uint")), zeros="zero_padded" in plan.params.get("accept", [])
        )
        value = f"CASE WHEN {guard} THEN {value} ELSE NULL END"
    if nulls:
        return f"CASE WHEN {' OR '.join(nulls)} THEN NULL ELSE {value} END"
    return value


def insert_select(rec: Recommendation, table: str) -> str:
    cols = columns(rec)
    if not cols:
        return _NO_COLUMNS
    names = ", ".join(quote(c.name) for c in cols)
    exprs = ",\n".join(f"  {expression(c)} AS {quote(c.name)}" for c in cols)
    return f"INSERT INTO {quote(table)} ({names})\nSELECT\n{exprs}\nFROM {quote(table + '_staging')};\n"


def script(rec: Recommendation, table: str) -> str:
    """The whole SQL file: target table, staging table, and the cast rules."""
    read = f"{count(rec.rows, 'row')} in {count(rec.files, 'file')}"
    head = (
        f"-- {remark(f'driftline schema: {rec.root} ({read})')}\n"
        "-- Portable SQL. Load the raw values as text into the staging table\n"
        "-- (blank CSV cells as NULL; lists and JSON-text columns as JSON text), then run the INSERT.\n"
    )
    if not columns(rec):
        return head + "\n" + _NO_COLUMNS
    rules = "".join(
        f"--   {c.name}: {c.plan.rule} → {c.plan.target.key()}\n" for c in columns(rec) if c.plan.rule != "identity"
    )
    return (
        head
        + "\n"
        + create_table(rec, table)
        + "\n"
        + create_staging(rec, table)
        + "\n"
        + ("-- Cast rules:\n" + rules if rules else "")
        + insert_select(rec, table)
    )


# -- loading staging rows -----------------------------------------------------------------------


def _text(v: Any, as_json: bool) -> str | None:
    if v is None:
        return None
    kind = next((k for k, x in v.items() if x is not None), None)
    if kind is None:
        return None
    value = plain_value(v)
    if isinstance(value, decimal.Decimal):
        return str(value)
    if isinstance(value, float) and not math.isfinite(value):
        return "NaN" if value != value else ("Infinity" if value > 0 else "-Infinity")  # JSON has none
    if isinstance(value, str) and not as_json:
        return value  # strings, cells, and temporal values as ISO 8601 text
    return json_text(value)


def staging_rows(batch: pa.RecordBatch, rec: Recommendation) -> Iterator[tuple[str | None, ...]]:
    """A raw batch (raw.py variants) as rows for the staging table, in columns() order."""
    cols = columns(rec)
    # Temporal values as text in Arrow first: some lie outside Python's datetime range.
    data = {name: jsonable(batch.column(name)).to_pylist() for name in batch.schema.names}
    for i in range(batch.num_rows):
        row = []
        for c in cols:
            v = data.get(c.parents[0], [None] * batch.num_rows)[i]
            for name in c.parents[1:]:
                v = (v or {}).get("struct", {}) or {}
                v = v.get(name)
            row.append(_text(v, c.json_text))
        yield tuple(row)


def placeholders(n: int, style: str = "?") -> str:
    return ", ".join([style] * n)


def staging_insert(rec: Recommendation, table: str) -> str:
    """A parameterised INSERT for the staging table ('?' placeholders)."""
    cols: Sequence[Column] = columns(rec)
    return (
        f"INSERT INTO {quote(table + '_staging')} ({', '.join(quote(c.name) for c in cols)}) "
        f"VALUES ({placeholders(len(cols))})"
    )
