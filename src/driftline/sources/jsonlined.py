"""JSON Lines rows for casting (recommendation/raw), each with its line, parsed by Arrow where
that is provably the same as the line-by-line parse.

The reference is the line-by-line parse (jsonfile._values): each non-blank line through
core.jsonnum, a line that does not parse left out.  The fast path hands a batch of non-blank
lines to Arrow's JSON reader (observe.jsonparse, timestamps kept as strings) and keeps the
table only when it must hold the same values:

* one row per line: a line Arrow reads as several values (or skips) changes the count;
* what Arrow accepts and orjson refuses, or cannot take: the scan's guard first (observe.linetext:
  '{...}' lines only, valid UTF-8, no deep nesting), then NaN and infinities (no double may be
  non-finite) and schemas deeper than MAX_DEPTH;
* integer vs float literals: Arrow types a field mixing 1 and 2.5 (or holding integers
  past int64) as double; the lines of every integral double are parsed exactly, and a single
  integer literal among them sends the batch to the line-by-line parse;
* only the types the line-by-line records give: bool, int64, double, string, non-empty
  structs, lists (and nulls).

From the first batch that fails a check on, the rest of the file takes the line-by-line
parse, so batches keep their boundaries (every batch before it held batch_rows rows).
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import jsonnum
from driftline.observe import linetext
from driftline.observe.fast.jsonbatch import keys_vary
from driftline.observe.jsonparse import parse_lines

_BOM = b"\xef\xbb\xbf"
MAX_DEPTH = 64  # deeper schemas take the line-by-line parse (orjson refuses past 1,024 levels)
FAST_MIN_ROWS = 64  # smaller batches take the line-by-line parse: Arrow's set-up would cost more


@dataclass(frozen=True, slots=True)
class LinedRecords:
    """A batch of JSON Lines rows and the 1-based line each stands on: the parsed records, or (the
    fast path, records None) Arrow's table of them, proven to hold the values the parse gives."""

    records: list[Any] | None
    table: pa.Table | None
    lines: Sequence[int]


def lined_records(data: bytes, batch_rows: int, *, fast: bool = True) -> Iterator[LinedRecords]:
    """The rows of JSON Lines text, batch_rows at a time, with their lines (see the module docstring)."""
    data = data.removeprefix(_BOM)
    text = data.split(b"\n")
    numbers: Sequence[int] = _non_blank(data, text)
    start = 0
    hint: pa.Schema | None = None
    while fast and start < len(numbers):
        chunk = numbers[start : start + batch_rows]
        if len(chunk) < FAST_MIN_ROWS:
            break
        table = _arrow_batch(text, chunk, hint)
        if table is None:
            break
        hint = table.schema
        yield LinedRecords(None, table, chunk)
        start += len(chunk)
    records: list[Any] = []
    lines: list[int] = []
    for number in numbers[start:]:
        try:
            records.append(jsonnum.loads(text[number - 1].removesuffix(b"\r")))
        except orjson.JSONDecodeError:
            continue
        lines.append(number)
        if len(records) == batch_rows:
            yield LinedRecords(records, None, lines)
            records, lines = [], []
    if records:
        yield LinedRecords(records, None, lines)


_STARTS_BLANK = re.compile(rb"\n[ \t\r\x0b\x0c]")  # a line that starts with what bytes.strip() removes


def _non_blank(data: bytes, text: list[bytes]) -> Sequence[int]:
    """The 1-based numbers of the lines that are not blank (bytes.strip() leaves something).

    Found with two byte searches when no line starts with white space and none ends in CR: then
    every line but an empty last one counts (a range, which lets batches slice the lines)."""
    body = data[:-1] if data.endswith(b"\n") else data
    edges = body[:1] not in _WHITE and not body.endswith(b"\n")  # the first and the last line hold something
    if body and edges and b"\r" not in data and b"\n\n" not in body and not _STARTS_BLANK.search(body):
        return range(1, len(text) + (0 if data.endswith(b"\n") else 1))
    return [i for i, line in enumerate(text, 1) if line.strip()]


_WHITE = (b"\n", b" ", b"\t", b"\r", b"\x0b", b"\x0c")  # (a first line that is empty, too)


def _arrow_batch(text: list[bytes], chunk: Sequence[int], hint: pa.Schema | None) -> pa.Table | None:
    """Arrow's table of the lines numbered chunk, or None when it may differ from their parse."""
    if isinstance(chunk, range):
        lines = text[chunk.start - 1 : chunk.stop - 1]  # every line a row, none ends in CR (_non_blank)
    else:
        lines = [text[n - 1].removesuffix(b"\r") for n in chunk]
    if keys_vary(lines):
        return None  # many distinct keys: Arrow's columns would cost more than the parse
    data = b"\n".join([*lines, b""])
    if len(data) >= 2**31:
        return None  # Arrow's binary offsets are 32-bit
    # The scan's own guard before Arrow's parse: '{...}' lines only, valid UTF-8, no deep nesting
    # (which Arrow's reader may not survive).
    odd = linetext.odd_rows(lines, pa.array(lines, pa.binary()), data)
    if odd is None or odd:
        return None
    table, _ = parse_lines(data, hint)
    if table is None or table.num_rows != len(chunk) or not table.num_columns:
        return None
    integral: dict[tuple[str, ...], pa.Array] = {}
    for name, col in zip(table.column_names, table.columns, strict=True):
        arr = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
        if not _plain(arr.type, 0) or not _doubles(arr, (name,), None, integral):
            return None
    rows = sorted({r for at in integral.values() for r in at.to_pylist()})
    if rows:
        try:
            records = {r: jsonnum.loads(text[chunk[r] - 1]) for r in rows}
        except orjson.JSONDecodeError:
            return None
        for steps, at in integral.items():
            for r in set(at.to_pylist()):
                if any(type(v) is int for v in _values_at(records[r], steps)):
                    return None  # an integer literal where Arrow has a double: 1 and 1.0 differ
    return table


def _plain(t: pa.DataType, depth: int) -> bool:
    """A type the line-by-line records can give, not deeper than MAX_DEPTH."""
    if depth > MAX_DEPTH:
        return False
    if pa.types.is_struct(t):
        return t.num_fields > 0 and all(_plain(t.field(i).type, depth + 1) for i in range(t.num_fields))
    if pa.types.is_list(t):
        return _plain(t.value_type, depth + 1)
    return t in (pa.bool_(), pa.int64(), pa.float64(), pa.string(), pa.null())


def _doubles(
    arr: pa.Array, steps: tuple[str, ...], rows: pa.Array | None, out: dict[tuple[str, ...], pa.Array]
) -> bool:
    """Collect, per path, the rows of integral doubles; False when a double is not finite."""
    t = arr.type
    if pa.types.is_struct(t):
        return all(_doubles(child, (*steps, t.field(i).name), rows, out) for i, child in enumerate(arr.flatten()))
    if pa.types.is_list(t):
        parents = pc.list_parent_indices(arr)
        return _doubles(pc.list_flatten(arr), (*steps, "[]"), parents if rows is None else rows.take(parents), out)
    if t != pa.float64() or not len(arr) or arr.null_count == len(arr):
        return True
    if not pc.all(pc.is_finite(arr)).as_py():
        return False
    whole = pc.fill_null(pc.equal(pc.floor(arr), arr), False)
    if pc.any(whole).as_py():
        where = pc.indices_nonzero(whole)
        out[steps] = where if rows is None else rows.take(where)
    return True


def _values_at(v: Any, steps: tuple[str, ...]) -> Iterator[Any]:
    """The values a record holds at a path (field names, '[]' for a list's items)."""
    if not steps:
        yield v
        return
    step, rest = steps[0], steps[1:]
    if step == "[]":
        if type(v) is list:
            for item in v:
                yield from _values_at(item, rest)
    elif type(v) is dict and step in v:
        yield from _values_at(v[step], rest)
