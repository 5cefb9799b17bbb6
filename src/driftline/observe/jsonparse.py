"""Arrow's parse of a batch of JSON lines, with the previous batch's schema as a hint and
RFC 3339-looking strings kept as strings.

observe.jsonbatch asks for a table here and checks it column by column against the exact
walk; a hint only saves Arrow work (inference, a second parse for timestamps), so every
table returned is one Arrow built from the lines, whichever types were declared.
"""

from __future__ import annotations

import re

import pyarrow as pa
import pyarrow.json as pj

from driftline.core.stagetime import staged


@staged("parse")
def parse_lines(data: bytes, hint: pa.Schema | None) -> tuple[pa.Table | None, str]:
    """Arrow's parse of newline-terminated JSON objects, with timestamps kept as strings.

    Returns (table, "") or (None, Arrow's message).  A hint (the schema of an earlier
    batch) is tried first.  Where Arrow says a hinted field changed kind, the field is
    dropped from the hint and inferred: either its kind changed since that batch, or this
    batch holds two kinds of it, which the parse without it then reports.  Any other
    failure drops the hint.  Without a hint, the types of the first lines are learnt
    first, so that a field of RFC 3339-looking strings (which Arrow types as timestamps)
    is declared a string and the batch is parsed once rather than twice; a field those
    lines typed that changes kind later holds two kinds in this batch, and is reported.

    >>> table, _ = parse_lines(b'{"t": "1985-04-12T23:20:50Z"}\\n', None)
    >>> table.schema.field("t").type
    DataType(string)
    """
    schema = hint if hint is not None else _probe(data)
    probed = hint is None
    table, why = None, ""
    for _ in range(_MAX_HINT_DROPS):
        try:
            table = _read(data, schema)
            break
        except _ARROW_FAILS as exc:
            why = str(exc)
        if schema is None:
            return None, why
        top = conflict_field(why)
        if top is None:
            schema = None  # not a change of kind: infer everything
        elif top in schema.names and not probed:
            schema = schema.remove(schema.get_field_index(top))
        else:
            return None, why  # an inferred field of two kinds: the caller sets the rarer aside
    if table is None:
        return None, why
    if not _valid(table):
        return None, ""
    if _has_temporal(table.schema):
        # Arrow types RFC 3339-looking strings as timestamps; the profile wants the strings.
        try:
            table = _read(data, _strings_for_temporal(table.schema))
        except _ARROW_FAILS as exc:
            return None, str(exc)
        if _has_temporal(table.schema):
            return None, "timestamps inferred again"
        if not _valid(table):
            return None, ""
    return table, ""


_MAX_HINT_DROPS = 4
_ARROW_FAILS = (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError, UnicodeDecodeError)
PROBE_BYTES = 64 * 1024
_CONFLICT_FIELD = re.compile(r"Column\(/([^/)]*)[/)].* changed from \w+ to \w+")


def conflict_field(why: str) -> str | None:
    """The top-level field of a change of kind Arrow reports ("Column(/a/b) changed from ...").

    >>> conflict_field("JSON parse error: Column(/pos/lat) changed from number to string in row 3")
    'pos'
    """
    m = _CONFLICT_FIELD.search(why)
    return m.group(1) if m else None


def _read(data: bytes, schema: pa.Schema | None) -> pa.Table:
    po = pj.ParseOptions(explicit_schema=schema, unexpected_field_behavior="infer", newlines_in_values=False)
    return pj.read_json(pa.BufferReader(pa.py_buffer(data)), parse_options=po)


def _valid(table: pa.Table) -> bool:
    # pyarrow 26.0.1 can build a list whose offsets overrun its values when a list starts
    # with null ('[null, "x"]'); such a table is never used.
    try:
        table.validate(full=True)
    except pa.ArrowInvalid:
        return False
    return True


def _probe(data: bytes) -> pa.Schema | None:
    """A hint from the first lines when they hold timestamps, else None (plain inference).

    Only fields whose type the first lines settle are declared: one that is null there,
    or holds a null-typed part (an empty list), is left to inference.  Later lines that
    give a declared field another kind make the batch one of two kinds of it, which the
    parse reports as inference would; a number wider than declared (2.5 after integers)
    costs a parse without the hint.
    """
    end = data.find(b"\n", PROBE_BYTES)
    if end < 0 or end + 1 >= len(data):
        return None  # the batch is hardly larger than the probe
    try:
        head = _read(data[: end + 1], None).schema
    except _ARROW_FAILS:
        return None
    if not _has_temporal(head):
        return None
    return pa.schema([f for f in _strings_for_temporal(head) if not _has_null(f.type)])


def _has_null(t: pa.DataType) -> bool:
    if pa.types.is_null(t):
        return True
    if pa.types.is_struct(t):
        return any(_has_null(f.type) for f in t)
    if pa.types.is_list(t):
        return _has_null(t.value_type)
    return False


def _has_temporal(schema: pa.Schema | pa.DataType) -> bool:
    types = [f.type for f in schema] if isinstance(schema, pa.Schema) else [schema]
    for t in types:
        if pa.types.is_temporal(t):
            return True
        if pa.types.is_struct(t) and _has_temporal(pa.schema(list(t))):
            return True
        if pa.types.is_list(t) and _has_temporal(t.value_type):
            return True
    return False


def _strings_for_temporal_type(t: pa.DataType) -> pa.DataType:
    if pa.types.is_temporal(t):
        return pa.string()
    if pa.types.is_struct(t):
        return pa.struct([f.with_type(_strings_for_temporal_type(f.type)) for f in t])
    if pa.types.is_list(t):
        return pa.list_(t.value_field.with_type(_strings_for_temporal_type(t.value_type)))
    return t


def _strings_for_temporal(schema: pa.Schema) -> pa.Schema:
    return pa.schema([f.with_type(_strings_for_temporal_type(f.type)) for f in schema])
