"""The recommendation as SQL in one engine's dialect: CREATE TABLE, a staging table, and the
rules as INSERT … SELECT, built as sqlglot expression trees and rendered by sqlglot.

* Types are sqlglot's (BIGINT, DOUBLE, DECIMAL(p,s), TEXT, TIMESTAMPTZ, STRUCT, ARRAY, JSON
  ...), spelled by sqlglot per dialect (BigQuery INT64, Spark STRING, Trino ROW ...). Text
  has no length: the longest value seen is a comment (``bounds_from_sample`` opts into
  VARCHAR(n)). Identifiers are always quoted, and column names follow names.py.
* Structs become the dialect's struct or row type and lists its array type where it has them
  (NESTING); maps, JSON text and nesting elsewhere become its JSON type (JSON_KIND).
  ``flatten=SEP`` makes each struct field a column of its own (``gps__alt``).
* The staging table (``<table>_staging``) has one text column per target column: a CSV cell,
  a JSON string's content, the JSON text of a number or boolean; for nested and JSON
  columns the JSON text of the value (struct keys as the target names them). Partition
  columns hold the key=value folder's value. Load blank CSV cells as NULL.
* The INSERT … SELECT applies the rules: null tokens (only in columns where the scan saw
  them), leap seconds :59, local times in the zone, and each cast as the dialect's safe
  cast: TRY_CAST / SAFE_CAST, or a CASE with a guard (PostgreSQL: a regular expression;
  sqlite: the number guard and its date functions). docs/recommend.md lists where SQL
  differs from apply().
"""

from __future__ import annotations

import decimal
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

import orjson
import pyarrow as pa
import sqlglot
from sqlglot import exp

from driftline.core.lattice import DType
from driftline.core.marker import remark
from driftline.core.schemaformats import DEFAULT_DIALECT as DEFAULT_DIALECT
from driftline.core.schemaformats import DIALECTS as DIALECTS
from driftline.core.schemaformats import SqlDialect
from driftline.core.words import count
from driftline.emit.schemas.names import Rename, check_separator, distinct
from driftline.errors import OptionError
from driftline.observe.textclass import INT64_MAX, INT64_MIN, NULL_TOKENS
from driftline.recommendation.options import zone_is_fixed
from driftline.recommendation.partitions import PartitionColumn
from driftline.recommendation.plan import FieldPlan, Recommendation
from driftline.recommendation.raw import json_text, jsonable, plain_value
from driftline.sources.discover import partition_values

#: The dialects of `--dialect` (core/schemaformats.py: the names alone, for the verb's --help).
Dialect = SqlDialect

MAX_DECIMAL = 38
JSON_TEXT_RULES = frozenset({"keep_as_json_text", "wrap_scalar_in_list"})
#: Dialects with struct (row) and array column types that a JSON value casts into.
NESTING = frozenset({"duckdb", "spark", "trino", "bigquery", "snowflake"})
#: The type of a JSON value: sqlglot's JSON unless the engine has none (text) or a better one.
JSON_KIND: dict[str, str] = {"postgres": "JSONB", "spark": "TEXT", "sqlite": "TEXT"}
#: Dialects with a cast that gives NULL instead of failing (sqlglot spells it per dialect).
SAFE_CASTS = frozenset({"duckdb", "spark", "trino", "bigquery", "snowflake"})
#: How each dialect takes partition columns in CREATE TABLE (missing: a comment names them).
PARTITIONING = {"spark": "columns", "trino": "columns", "bigquery": "one date"}

# The shapes PostgreSQL's guard lets through to CAST (POSIX regular expressions, PostgreSQL 9.7.3).
_PATTERNS = {
    "float": r"^\s*[-+]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][-+]?[0-9]+)?\s*$|^(NaN|-?Infinity)$",
    "date": r"^[0-9]{4}-[0-9]{2}-[0-9]{2}$",
    "time": r"^[0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]+)?)?$",
    "timestamp": r"^[0-9]{4}-[0-9]{2}-[0-9]{2}([Tt ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]+)?)?)?\s*"
    r"([Zz]|[+-][0-9]{2}(:?[0-9]{2})?)?$",
}


def check_dialect(dialect: str) -> Dialect:
    if dialect not in DIALECTS:
        raise OptionError(f"unknown SQL dialect {dialect!r}; choose one of {', '.join(DIALECTS)}")
    return dialect  # type: ignore[return-value]


def check_flatten(flatten: str | None) -> None:
    if flatten is not None and (why := check_separator(flatten)) is not None:
        raise OptionError(f"bad --flatten separator: {why}")


# -- the columns and their names ----------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Column:
    """One SQL column: its name, the plan it renders (or the partition key it holds), and the
    field names from the top-level field down to the plan (where its staging value is found)."""

    name: str
    plan: FieldPlan | None
    parents: tuple[str, ...] = ()
    partition: PartitionColumn | None = None

    @property
    def nested(self) -> bool:
        """Whether the staging value is JSON text (lists, maps, structs kept whole, JSON text)."""
        if self.plan is None:
            return False
        return self.plan.rule in JSON_TEXT_RULES or self.plan.target.name in ("list", "map", "struct")


@dataclass(frozen=True)
class Layout:
    """The columns of one dialect and flattening, with the names inside nested types (by path)."""

    dialect: Dialect
    flatten: str | None
    columns: tuple[Column, ...]
    renames: tuple[Rename, ...]
    inner: dict[str, str] = field(default_factory=dict)  # path of a struct field -> its name in the type

    @property
    def nesting(self) -> bool:
        return self.dialect in NESTING


def _kept_whole(plan: FieldPlan) -> bool:
    """A struct with fields (one without any is JSON: no engine has an empty struct type)."""
    return plan.target.name == "struct" and plan.rule != "keep_as_json_text" and bool(plan.children)


def layout(rec: Recommendation, dialect: str = DEFAULT_DIALECT, flatten: str | None = None) -> Layout:
    """The SQL columns: one per top-level field (or per struct leaf with flatten), then one per
    partition key, named by the rule of names.py."""
    dialect = check_dialect(dialect)
    check_flatten(flatten)
    leaves: list[tuple[str, FieldPlan, tuple[str, ...]]] = []  # (wanted name, plan, parents)

    def walk(plan: FieldPlan, parents: tuple[str, ...]) -> None:
        names = (*parents, plan.name)
        if flatten is not None and _kept_whole(plan):
            for c in plan.children:
                walk(c, names)
            return
        leaves.append((flatten.join(names) if flatten else plan.name, plan, names))

    for p in rec.fields:
        walk(p, ())
    wanted = [w for w, _, _ in leaves] + [p.name for p in rec.partitions]
    paths = [p.path for _, p, _ in leaves] + [f"{p.name} (partition key)" for p in rec.partitions]
    got, renames = distinct(wanted, paths)
    cols = [Column(n, plan, parents) for n, (_, plan, parents) in zip(got, leaves, strict=False)]
    cols += [Column(n, None, partition=p) for n, p in zip(got[len(leaves) :], rec.partitions, strict=True)]
    inner: dict[str, str] = {}
    for c in cols:
        if c.plan is not None:
            _inner_names(c.plan, inner, renames)
    return Layout(dialect, flatten, tuple(cols), tuple(renames), inner)


def _inner_names(plan: FieldPlan, inner: dict[str, str], renames: list[Rename]) -> None:
    """Names of struct fields inside a column's type, each set of siblings by the same rule."""
    if plan.rule == "keep_as_json_text" or plan.target.name == "map":
        return
    if plan.target.name == "struct":
        got, more = distinct([c.name for c in plan.children], [c.path for c in plan.children])
        renames.extend(more)
        for c, name in zip(plan.children, got, strict=True):
            inner[c.path] = name
    for c in plan.children:
        _inner_names(c, inner, renames)


def columns(rec: Recommendation, dialect: str = DEFAULT_DIALECT, flatten: str | None = None) -> list[Column]:
    return list(layout(rec, dialect, flatten).columns)


# -- types --------------------------------------------------------------------------------------

_SCALAR = {
    "bool": "BOOLEAN",
    "int8": "SMALLINT",
    "int16": "SMALLINT",
    "uint8": "SMALLINT",
    "int32": "INT",
    "uint16": "INT",
    "int64": "BIGINT",
    "uint32": "BIGINT",
    "uint64": "DECIMAL(20, 0)",
    "float16": "FLOAT",
    "float32": "FLOAT",
    "float64": "DOUBLE",
    "binary": "VARBINARY",
    "date32": "DATE",
    "date64": "DATE",
    "time32": "TIME",
    "time64": "TIME",
    "duration": "BIGINT",
    "null": "TEXT",
}


def json_type(dialect: str) -> exp.DataType:
    return exp.DataType.build(JSON_KIND.get(dialect, "JSON"))


def _text_type(plan: FieldPlan, bounds: bool) -> exp.DataType:
    if bounds:
        return exp.DataType.build(f"VARCHAR({max(plan.max_chars or plan.input_chars or 1, 1)})")
    return exp.DataType.build("TEXT")


def data_type(plan: FieldPlan, lay: Layout, bounds: bool = False) -> exp.DataType:
    """The SQL type of a plan's target in the layout's dialect (as a sqlglot tree)."""
    t = plan.target
    n = t.name
    if plan.rule == "keep_as_json_text" or n == "map" or (n == "struct" and not plan.children):
        return json_type(lay.dialect)
    if n in ("struct", "list"):
        if not lay.nesting:
            return json_type(lay.dialect)
        if n == "list":
            return exp.DataType(
                this=exp.DataType.Type.ARRAY, expressions=[data_type(plan.children[0], lay, bounds)], nested=True
            )
        fields = [
            exp.ColumnDef(this=exp.to_identifier(lay.inner[c.path], quoted=True), kind=data_type(c, lay, bounds))
            for c in plan.children
        ]
        return exp.DataType(this=exp.DataType.Type.STRUCT, expressions=fields, nested=True)
    if n == "string":
        return _text_type(plan, bounds)
    if n == "decimal":
        assert t.precision is not None
        if t.precision > MAX_DECIMAL:
            return _text_type(plan, bounds)
        return exp.DataType.build(f"DECIMAL({t.precision}, {t.scale})")
    if n == "timestamp":
        return exp.DataType.build("TIMESTAMPTZ" if t.tz else "TIMESTAMP")
    return exp.DataType.build(_SCALAR[n])


def partition_kind(p: PartitionColumn) -> str:
    """The SQL kind of a partition column, from the type its values were given
    (recommendation/partitions.py): date, int64, or string.

    >>> from driftline.core.lattice import DType
    >>> partition_kind(PartitionColumn("day", DType("date32"), ("2026-11-27",), 9))
    'date'
    """
    return {"date32": "date", "int64": "int64"}.get(p.type.key(), "string")


def column_type(col: Column, lay: Layout, bounds: bool = False) -> exp.DataType:
    if col.partition is not None:
        kind = partition_kind(col.partition)
        return exp.DataType.build({"date": "DATE", "int64": "BIGINT", "string": "TEXT"}[kind])
    assert col.plan is not None
    return data_type(col.plan, lay, bounds)


UNIT_NAMES = {"s": "seconds", "ms": "milliseconds", "us": "microseconds", "ns": "nanoseconds"}


def stand_in(t: DType) -> str | None:
    """What the SQL type of a target stands in for, when SQL cannot name the type itself.

    >>> from driftline.core.lattice import parse_key
    >>> print(stand_in(parse_key("duration[ns]")))
    duration[ns] as BIGINT, a count of nanoseconds: SQL has no interval of one fixed unit
    """
    if t.name == "duration":
        assert t.unit is not None
        return f"{t.key()} as BIGINT, a count of {UNIT_NAMES[t.unit]}: SQL has no interval of one fixed unit"
    if t.name == "decimal" and t.precision is not None and t.precision > MAX_DECIMAL:
        return f"{t.key()} as text: wider than DECIMAL({MAX_DECIMAL}), the widest most engines take"
    if t.name == "null":
        return "only nulls were seen: SQL has no null type, so a text column of NULLs"
    return None


def notes(col: Column) -> list[str]:
    """The comments on a column's line: what stands in for its type, the longest value seen."""
    if col.partition is not None:
        # repr: a folder name may hold anything, a line break or '*/' that would end the comment
        return [f"partition key {col.partition.name!r} of the folder names".replace("*/", "*\\/")]
    assert col.plan is not None
    out = []
    if not col.nested and (note := stand_in(col.plan.target)):
        out.append(note)
    if col.plan.max_chars is not None and (col.plan.target.name == "string" or col.plan.rule in JSON_TEXT_RULES):
        what = "JSON text" if col.plan.rule in JSON_TEXT_RULES or col.plan.target.name != "string" else "value"
        out.append(f"longest {what} seen: {count(col.plan.max_chars, 'character')}")
    return out


def _nullable(col: Column) -> bool:
    # A flattened struct field is null wherever its struct is missing; a partition key where a file has none.
    if col.plan is None:
        return True
    return col.plan.nullable or len(col.parents) > 1


def _ident(name: str) -> exp.Identifier:
    return exp.to_identifier(name, quoted=True)


def _table(name: str) -> exp.Table:
    return exp.Table(this=_ident(name))


def _render(tree: exp.Expr, dialect: str) -> str:
    return tree.sql(dialect=dialect, pretty=True, identify=True) + ";\n"


def create_table(
    rec: Recommendation, table: str, lay: Layout | None = None, *, bounds_from_sample: bool = False
) -> str:
    """CREATE TABLE for the target; NOT NULL where no value is ever missing."""
    lay = lay or layout(rec)
    if not lay.columns:
        return _NO_COLUMNS
    defs = []
    for c in lay.columns:
        d = exp.ColumnDef(this=_ident(c.name), kind=column_type(c, lay, bounds_from_sample))
        if not _nullable(c):
            d.set("constraints", [exp.ColumnConstraint(kind=exp.NotNullColumnConstraint())])
        if note := notes(c):
            d.add_comments(["; ".join(note)])
        defs.append(d)
    create = exp.Create(this=exp.Schema(this=_table(table), expressions=defs), kind="TABLE")
    if (props := _partitioning(lay)) is not None:
        create.set("properties", exp.Properties(expressions=[props]))
    return _render(create, lay.dialect)


def _partitioning(lay: Layout) -> exp.Expr | None:
    how = PARTITIONING.get(lay.dialect)
    parts = [c for c in lay.columns if c.partition is not None]
    if how == "columns" and parts:
        return exp.PartitionedByProperty(this=exp.Schema(expressions=[_ident(c.name) for c in parts]))
    dates = [c for c in parts if c.partition is not None and partition_kind(c.partition) == "date"]
    if how == "one date" and dates:  # BigQuery partitions by one date column (and clusters by others)
        return exp.PartitionedByProperty(this=exp.column(dates[0].name, quoted=True))
    return None


def create_staging(rec: Recommendation, table: str, lay: Layout | None = None) -> str:
    lay = lay or layout(rec)
    if not lay.columns:
        return _NO_COLUMNS
    defs = [exp.ColumnDef(this=_ident(c.name), kind=exp.DataType.build("TEXT")) for c in lay.columns]
    return _render(
        exp.Create(this=exp.Schema(this=_table(table + "_staging"), expressions=defs), kind="TABLE"), lay.dialect
    )


_NO_COLUMNS = "-- no field was seen: a table needs at least one column\n"


# -- expressions --------------------------------------------------------------------------------


def _s(text: str) -> exp.Literal:
    return exp.Literal.string(text)


def _n(value: int) -> exp.Expr:
    return exp.Literal.number(value)


def _f(name: str, *args: exp.Expr) -> exp.Expr:
    """A function sqlglot knows by name (SUBSTR, LOWER ...), spelled per dialect."""
    return exp.func(name, *args)


def _substr(x: exp.Expr, start: int, length: int | None = None) -> exp.Expr:
    return exp.Substring(this=x.copy(), start=_n(start), length=None if length is None else _n(length))


def _length(x: exp.Expr) -> exp.Expr:
    return exp.Length(this=x.copy())


def _case(when: exp.Expr, then: exp.Expr, default: exp.Expr | None = None) -> exp.Case:
    case = exp.Case().when(when, then)
    return case.else_(default) if default is not None else case


def _lower_trim(x: exp.Expr) -> exp.Expr:
    return exp.Lower(this=exp.Trim(this=x.copy()))


def _digits_only(x: exp.Expr, dialect: str) -> exp.Expr:
    """Whether text holds only the digits 0-9 (or nothing): a regular expression in PostgreSQL,
    GLOB in sqlite, ten REPLACEs elsewhere (a guard is needed there only for the rule's grammar)."""
    if dialect == "postgres":
        return exp.RegexpLike(this=x.copy(), expression=_s("^[0-9]*$"))
    if dialect == "sqlite":
        return exp.Not(this=exp.Glob(this=x.copy(), expression=_s("*[^0-9]*")))
    inner = x.copy()
    for d in "0123456789":
        inner = exp.Anonymous(this="REPLACE", expressions=[inner, _s(d), _s("")])
    return exp.EQ(this=inner, expression=_s(""))


def _number_guard(x: exp.Expr, dialect: str, is_decimal: bool, zeros: bool = False) -> exp.Expr:
    """The integer or decimal shapes the rule parses (textclass); zeros: zero_padded ones too."""
    neg = exp.EQ(this=_substr(x, 1, 1), expression=_s("-"))
    body = exp.Paren(this=_case(neg, _substr(x, 2), x.copy()))
    conds: list[exp.Expr] = []
    if not is_decimal:
        # int64: 18 digits always, 19 up to the bound (digit strings of one length order as numbers)
        bound = _case(neg.copy(), _s(str(-INT64_MIN)), _s(str(INT64_MAX)))
        fits = exp.or_(
            exp.LTE(this=_length(body), expression=_n(18)),
            exp.and_(exp.EQ(this=_length(body), expression=_n(19)), exp.LTE(this=body.copy(), expression=bound)),
        )
        conds += [exp.NEQ(this=body.copy(), expression=_s("")), _digits_only(body, dialect), exp.Paren(this=fits)]
    else:
        no_point = exp.Paren(this=exp.Anonymous(this="REPLACE", expressions=[body.copy(), _s("."), _s("")]))
        points = exp.Sub(this=_length(body), expression=_length(no_point))
        conds += [
            exp.NEQ(this=no_point.copy(), expression=_s("")),
            _digits_only(no_point, dialect),
            exp.LTE(this=points, expression=_n(1)),
            exp.NEQ(this=_substr(body, 1, 1), expression=_s(".")),
            exp.NEQ(this=exp.Substring(this=body.copy(), start=_length(body), length=_n(1)), expression=_s(".")),
        ]
    if not zeros:
        # A zero before another digit is zero_padded, parsed only under leading_zeros = "parse".
        padded = exp.and_(
            exp.EQ(this=_substr(body, 1, 1), expression=_s("0")),
            exp.Between(this=_substr(body, 2, 1), low=_s("0"), high=_s("9")),
        )
        conds.append(exp.Not(this=exp.Paren(this=padded)))
    return exp.and_(*conds)


def _guard_kind(t: DType) -> str:
    n = t.name
    if n.startswith(("int", "uint")) and n != "uint64" or n == "duration":
        return "int"
    if n in ("decimal", "uint64"):
        return "decimal"
    if n.startswith("float"):
        return "float"
    if n.startswith("date"):
        return "date"
    if n.startswith("time") and n != "timestamp":
        return "time"
    return n  # timestamp, binary, string


def safe_cast(x: exp.Expr, to: exp.DataType, kind: str, dialect: str) -> exp.Expr:
    """A cast that gives NULL where the text does not parse: TRY_CAST / SAFE_CAST where the dialect
    has one, else a CASE whose guard lets only the target's shapes through to CAST."""
    if dialect in SAFE_CASTS:
        # safe: Spark's TRY_CAST (sqlglot writes CAST without it); requires_string: Snowflake's
        # TRY_CAST takes text only, which the staging columns are.
        return exp.TryCast(this=x.copy(), to=to, safe=True, requires_string=True)
    cast = exp.Cast(this=x.copy(), to=to)
    if kind in ("int", "decimal"):
        return _case(_number_guard(x, dialect, is_decimal=kind == "decimal", zeros=True), cast)
    if dialect == "postgres" and kind in _PATTERNS:
        return _case(exp.RegexpLike(this=x.copy(), expression=_s(_PATTERNS[kind])), cast)
    if dialect == "sqlite":
        # sqlite's CAST never fails (CAST('x' AS REAL) is 0.0); its date functions give NULL instead.
        if kind == "float":
            shape = exp.and_(
                exp.Not(this=exp.Glob(this=x.copy(), expression=_s("*[^0-9.eE+-]*"))),
                exp.Glob(this=x.copy(), expression=_s("*[0-9]*")),
            )
            return _case(
                exp.or_(shape, exp.In(this=x.copy(), expressions=[_s("NaN"), _s("Infinity"), _s("-Infinity")])), cast
            )
        fmt = {"date": "%Y-%m-%d", "time": "%H:%M:%f", "timestamp": "%Y-%m-%dT%H:%M:%fZ"}.get(kind)
        if fmt is not None:
            if kind == "timestamp" and to.this != exp.DataType.Type.TIMESTAMPTZ:
                fmt = "%Y-%m-%dT%H:%M:%f"
            return exp.Anonymous(this="STRFTIME", expressions=[_s(fmt), x.copy()])
    return cast


def _has(plan: FieldPlan, cause: str) -> bool:
    e = plan.effect(cause)
    return e is not None and (e.count > 0 or not e.exact)


def _tokens(plan: FieldPlan) -> bool:
    """Whether the column maps null tokens: where strings or CSV cells arrive, the rule maps them,
    and the scan saw some (a rule that needs no token step gets none)."""
    tokens = plan.params.get("tokens", {})
    arrive = (tokens.get("string") == "null" and "string" in plan.inputs) or (
        tokens.get("text") == "null" and "text" in plan.inputs
    )
    return arrive and _has(plan, "null_token")


_TOKENS = sorted(NULL_TOKENS)


def _timestamp(x: exp.Expr, plan: FieldPlan, t: DType, to: exp.DataType, dialect: str) -> exp.Expr:
    s: exp.Expr = x.copy()
    if plan.effect("leap_second"):
        leap = exp.EQ(this=_substr(s, 18, 2), expression=_s("60"))
        s = _case(
            leap, exp.DPipe(this=exp.DPipe(this=_substr(s, 1, 17), expression=_s("59")), expression=_substr(s, 20)), s
        )
    if plan.effect("lowercase"):
        s = exp.Upper(this=s)
    if not t.tz or not plan.effect("assumed_zone"):
        return safe_cast(s, to, "timestamp", dialect)
    zoned = exp.or_(
        exp.Like(this=exp.Upper(this=s.copy()), expression=_s("%Z")),
        exp.Like(this=_substr(s, 20), expression=_s("%+%")),
        exp.Like(this=_substr(s, 20), expression=_s("%-%")),
    )
    zone = t.tz
    assert zone is not None
    if not zone_is_fixed(zone):
        return _case(zoned, safe_cast(s, to, "timestamp", dialect), _in_zone(s, zone, to, dialect))
    offset = "+00:00" if zone in ("UTC", "Etc/UTC", "Z") else zone
    day_only = _case(
        exp.EQ(this=_length(s), expression=_n(10)), exp.DPipe(this=s.copy(), expression=_s(" 00:00:00")), s.copy()
    )
    local_text = exp.DPipe(this=day_only, expression=_s(offset))
    return safe_cast(_case(zoned, s.copy(), local_text), to, "timestamp", dialect)


def _in_zone(s: exp.Expr, zone: str, to: exp.DataType, dialect: str) -> exp.Expr:
    """A local time read in a named zone, as an instant: each engine has its own function for it."""
    naive = safe_cast(s, exp.DataType.build("TIMESTAMP"), "timestamp", dialect)
    if dialect in ("duckdb", "postgres"):  # timestamp AT TIME ZONE zone: the local time there (PostgreSQL 9.9.4)
        return exp.AtTimeZone(this=naive, zone=_s(zone))
    if dialect == "trino":  # with_timezone(timestamp, zone)
        return exp.func("WITH_TIMEZONE", naive, _s(zone))
    if dialect == "bigquery":  # TIMESTAMP(datetime, zone)
        return exp.Timestamp(this=naive, zone=_s(zone))
    if dialect in ("spark", "snowflake"):  # convert_timezone(source, 'UTC', local): UTC wall time, then the instant
        utc = exp.func("CONVERT_TIMEZONE", _s(zone), _s("UTC"), naive)
        text = exp.DPipe(this=exp.Cast(this=utc, to=exp.DataType.build("TEXT")), expression=_s("+00:00"))
        return safe_cast(text, to, "timestamp", dialect)
    return safe_cast(s, to, "timestamp", dialect)  # sqlite has no zone database: read as UTC


def _from_json(v: exp.Expr, to: exp.DataType, lay: Layout) -> exp.Expr:
    """JSON text from the staging table as the column's type."""
    if to.this == exp.DataType.Type.TEXT:
        return v
    if to.this == exp.DataType.Type.JSONB:
        return exp.Cast(this=v, to=to)
    parsed = exp.ParseJSON(this=v)
    if to.this in (exp.DataType.Type.JSON,):
        return parsed
    return exp.TryCast(this=parsed, to=to, safe=True)


def expression(col: Column, lay: Layout, bounds: bool = False) -> exp.Expr:
    """The SELECT expression that casts the staging column into the target column."""
    x = exp.column(col.name, quoted=True)
    to = column_type(col, lay, bounds)
    if col.partition is not None:
        kind = partition_kind(col.partition)
        return x if kind == "string" else safe_cast(x, to, "int" if kind == "int64" else "date", lay.dialect)
    plan = col.plan
    assert plan is not None
    t = plan.target
    if t.name == "null":
        return exp.Cast(this=exp.Null(), to=to)
    if col.nested:
        value: exp.Expr = x
        if plan.rule == "wrap_scalar_in_list":
            listed = exp.EQ(this=_substr(exp.Trim(this=x.copy(), position="LEADING"), 1, 1), expression=_s("["))
            value = _case(
                listed, x.copy(), exp.DPipe(this=exp.DPipe(this=_s("["), expression=x.copy()), expression=_s("]"))
            )
        if _tokens(plan):
            quoted = [_s(orjson.dumps(tok).decode()) for tok in _TOKENS]
            value = _case(exp.In(this=_lower_trim(x), expressions=quoted), exp.Null(), value)
        return _from_json(value, to, lay)
    nulls: list[exp.Expr] = []
    if _tokens(plan):
        nulls.append(exp.In(this=_lower_trim(x), expressions=[_s(tok) for tok in _TOKENS]))
    if t.name != "string" and plan.params.get("empty") == "null" and "string" in plan.inputs and _has(plan, "empty"):
        nulls.append(exp.EQ(this=exp.Trim(this=x.copy()), expression=_s("")))
    if t.name == "bool":
        value = exp.Case().when(exp.EQ(this=exp.Lower(this=x.copy()), expression=_s("true")), exp.true())
        value = value.when(exp.EQ(this=exp.Lower(this=x.copy()), expression=_s("false")), exp.false()).else_(exp.Null())
    elif t.name == "timestamp":
        value = _timestamp(x, plan, t, to, lay.dialect)
    elif to.this in (exp.DataType.Type.TEXT, exp.DataType.Type.VARCHAR):
        value = x
    else:
        value = safe_cast(x, to, _guard_kind(t), lay.dialect)
    if plan.effect("unparsed") and (t.name.startswith(("int", "uint")) or t.name in ("decimal", "float64")):
        is_int = t.name.startswith(("int", "uint"))
        if is_int or t.name == "decimal":
            # The rule's own grammar (no '+', leading zeros by the option), beyond what a safe cast takes.
            zeros = "zero_padded" in plan.params.get("accept", [])
            guard = _number_guard(x, lay.dialect, is_decimal=not is_int, zeros=zeros)
            value = _case(guard, value, exp.Null())
    if nulls:
        return _case(exp.or_(*nulls), exp.Null(), value)
    return value


def insert_select(
    rec: Recommendation, table: str, lay: Layout | None = None, *, bounds_from_sample: bool = False
) -> str:
    lay = lay or layout(rec)
    if not lay.columns:
        return _NO_COLUMNS
    select = exp.select(
        *(exp.alias_(expression(c, lay, bounds_from_sample), _ident(c.name)) for c in lay.columns)
    ).from_(_table(table + "_staging"))
    into = exp.Schema(this=_table(table), expressions=[_ident(c.name) for c in lay.columns])
    return _render(exp.Insert(this=into, expression=select), lay.dialect)


DIALECT_NAMES = {
    "duckdb": "DuckDB",
    "postgres": "PostgreSQL",
    "spark": "Spark SQL",
    "trino": "Trino",
    "bigquery": "BigQuery",
    "snowflake": "Snowflake",
    "sqlite": "SQLite",
}


def script(
    rec: Recommendation,
    table: str,
    *,
    dialect: str = DEFAULT_DIALECT,
    flatten: str | None = None,
    bounds_from_sample: bool = False,
) -> str:
    """The whole SQL file: target table, staging table, and the cast rules, in one dialect.

    flatten: struct fields as columns of their own, joined by this separator; bounds_from_sample:
    text columns as VARCHAR(n) of the longest value seen (a snapshot, not a contract).
    """
    lay = layout(rec, dialect, flatten)
    read = f"{count(rec.rows, 'row')} in {count(rec.files, 'file')}"
    head = (
        f"-- {remark(f'driftline schema: {rec.root} ({read})')}\n"
        f"-- {DIALECT_NAMES[lay.dialect]} (--dialect {lay.dialect}). Load the raw values as text into the staging\n"
        "-- table (blank CSV cells as NULL; nested and JSON columns as JSON text), then run the INSERT.\n"
    )
    if not lay.columns:
        return head + "\n" + _NO_COLUMNS
    # repr: a field name may hold a line break, which would end the comment
    renamed = "".join(f"--   {r.path!r}: {r.name!r} -> {r.to!r} ({r.why})\n" for r in lay.renames)
    parts = [c for c in lay.columns if c.partition is not None]
    partitioned = ""
    if parts and _partitioning(lay) is None or parts and PARTITIONING.get(lay.dialect) == "one date":
        keys = ", ".join(c.name for c in parts)
        partitioned = f"-- Partition columns (from key=value folders): {keys}\n"
    rules = "".join(
        f"--   {c.name}: {c.plan.rule} → {c.plan.target.key()}\n"
        for c in lay.columns
        if c.plan is not None and c.plan.rule != "identity"
    )
    return (
        head
        + ("-- Renamed columns (docs/recommend.md, names every engine accepts):\n" + renamed if renamed else "")
        + partitioned
        + "\n"
        + create_table(rec, table, lay, bounds_from_sample=bounds_from_sample)
        + "\n"
        + create_staging(rec, table, lay)
        + "\n"
        + ("-- Cast rules:\n" + rules if rules else "")
        + insert_select(rec, table, lay, bounds_from_sample=bounds_from_sample)
    )


# -- loading staging rows -----------------------------------------------------------------------


def _renamed(value: Any, plan: FieldPlan, lay: Layout) -> Any:
    """Plain JSON data with struct keys as the column's type names them (at any depth)."""
    if value is None or plan.rule == "keep_as_json_text":
        return value
    n = plan.target.name
    if n == "struct" and isinstance(value, dict):
        return {
            lay.inner.get(c.path, c.name): _renamed(value.get(c.name), c, lay) for c in plan.children if c.name in value
        }
    if n == "list" and isinstance(value, list):
        return [_renamed(v, plan.children[0], lay) for v in value]
    return value


def _text(v: Any, col: Column, lay: Layout) -> str | None:
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
    if isinstance(value, str) and not col.nested:
        return value  # strings, cells, and temporal values as ISO 8601 text
    if col.nested and col.plan is not None and col.plan.rule != "wrap_scalar_in_list":
        value = _renamed(value, col.plan, lay)
    return json_text(value)


def staging_rows(
    batch: pa.RecordBatch, rec: Recommendation, lay: Layout | None = None, *, file: str = ""
) -> Iterator[tuple[str | None, ...]]:
    """A raw batch (raw.py variants) of one file (its path relative to the root, for the
    partition values) as rows for the staging table, in the layout's column order."""
    lay = lay or layout(rec)
    parts = dict(partition_values(file))
    # Temporal values as text in Arrow first: some lie outside Python's datetime range.
    data = {name: jsonable(batch.column(name)).to_pylist() for name in batch.schema.names}
    for i in range(batch.num_rows):
        row: list[str | None] = []
        for c in lay.columns:
            if c.partition is not None:
                row.append(parts.get(c.partition.name))
                continue
            v = data.get(c.parents[0], [None] * batch.num_rows)[i]
            for name in c.parents[1:]:
                v = (v or {}).get("struct", {}) or {}
                v = v.get(name)
            row.append(_text(v, c, lay))
        yield tuple(row)


def placeholders(n: int, style: str = "?") -> str:
    return ", ".join([style] * n)


def staging_insert(rec: Recommendation, table: str, lay: Layout | None = None, style: str = "?") -> str:
    """A parameterised INSERT for the staging table ('?' placeholders, or '%s' for psycopg)."""
    lay = lay or layout(rec)
    cols: Sequence[Column] = lay.columns
    names = ", ".join(exp.to_identifier(c.name, quoted=True).sql(lay.dialect) for c in cols)
    staging = exp.to_identifier(table + "_staging", quoted=True).sql(lay.dialect)
    return f"INSERT INTO {staging} ({names}) VALUES ({placeholders(len(cols), style)})"


def parses(text: str, dialect: str) -> list[exp.Expr]:
    """The statements of a script as sqlglot reads them back in its dialect (for checks)."""
    return [e for e in sqlglot.parse(text, read=dialect) if e is not None]
