"""Raw data as Arrow, for apply(): every column a *variant*, a struct with one child per kind.

A JSON field that holds 12.5 in one record and "n/a" in the next has no Arrow type; as a
variant it is ``struct<float64: double, string: string>`` with one child set per row (a
null row sets none). Typed columns (Parquet) become a variant of one child, named by
their type key; CSV cells become the child ``text``, blank cells null. Struct values hold
variants of their fields, lists hold variants. apply() casts variants with
pyarrow.compute; loading them is the only per-value Python, and it does no casting.

iter_records() gives the same data as JSON values (what a JSON Schema validates):
JSON records as parsed, CSV cells as the scan reads them (by content class), Parquet
rows with temporal values as RFC 3339 / ISO 8601 text.

This module reads no file itself: the rows come from the scan's readers through the
format registry (sources/readers.read_values), so they are the rows the scan profiled,
with its encoding, dialect and header.  apply.py casts them; the two are one pair.
"""

from __future__ import annotations

import base64
import datetime as dt
import decimal
import os
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import paths
from driftline.core.lattice import from_arrow
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.core.options import ReadOptions
from driftline.observe.records import int_key
from driftline.observe.textclass import class_of
from driftline.sources.csvfile import LinedCells
from driftline.sources.discover import FileRef, discover
from driftline.sources.jsonlined import LinedRecords
from driftline.sources.readers import read_values
from driftline.sources.registry import SPECS

TEXT = "text"  # the variant child of CSV cells
_SCALAR_TYPES: dict[str, pa.DataType] = {
    "bool": pa.bool_(),
    "int64": pa.int64(),
    "uint64": pa.uint64(),
    "float64": pa.float64(),
    "string": pa.string(),
    TEXT: pa.string(),
}


@dataclass(frozen=True, slots=True)
class RawBatch:
    """One batch of one file: rows row_start .. row_start + num_rows - 1 of file (relative path)."""

    file: str
    row_start: int
    batch: pa.RecordBatch


# -- JSON values to variants ----------------------------------------------------------------


def _kind(v: Any) -> str:
    t = type(v)
    if t is bool:
        return "bool"
    if t is int:
        return int_key(v)  # as the scan types it: int64, uint64, or decimal(N,0) past both
    if t is float:
        return "float64"
    if t is dict:
        return "struct"
    if t is list:
        return "list"
    return "string"


def _int_decimal(kind: str) -> pa.DataType:
    """The Arrow type of an integer literal past uint64 ('decimal(30,0)'): decimal128 up to 38 digits."""
    digits = int(kind[len("decimal(") : kind.index(",")])
    return pa.decimal128(digits, 0) if digits <= 38 else pa.decimal256(digits, 0)


def variant_value(v: Any) -> dict[str, Any] | None:
    """A JSON value as a variant row: {kind: value}, nested values as variants.

    >>> variant_value({"a": [1, "x"]})
    {'struct': {'a': {'list': [{'int64': 1}, {'string': 'x'}]}}}
    """
    if v is None:
        return None
    kind = _kind(v)
    if kind == "struct":
        return {kind: {name: variant_value(sub) for name, sub in v.items()}}
    if kind == "list":
        return {kind: [variant_value(sub) for sub in v]}
    return {kind: v if kind != "string" or type(v) is str else str(v)}


class _Shape:
    """The kinds seen at one place of nested variants, to build their Arrow type."""

    __slots__ = ("kinds", "fields", "item")

    def __init__(self) -> None:
        self.kinds: set[str] = set()
        self.fields: dict[str, _Shape] = {}
        self.item: _Shape | None = None

    def add(self, v: dict[str, Any] | None) -> None:
        if v is None:
            return
        for kind, sub in v.items():
            self.kinds.add(kind)
            if kind == "struct":
                for name, child in sub.items():
                    self.fields.setdefault(name, _Shape()).add(child)
            elif kind == "list":
                self.item = self.item or _Shape()
                for child in sub:
                    self.item.add(child)

    def arrow(self) -> pa.DataType:
        children = []
        for kind in sorted(self.kinds):
            if kind == "struct":
                t: pa.DataType = pa.struct([(n, s.arrow()) for n, s in self.fields.items()])
            elif kind == "list":
                t = pa.list_((self.item or _Shape()).arrow())
            else:
                t = _SCALAR_TYPES.get(kind) or _int_decimal(kind)
            children.append((kind, t))
        return pa.struct(children)


_ONE_KIND: dict[type, tuple[str, pa.DataType]] = {
    str: ("string", pa.string()),
    float: ("float64", pa.float64()),
    bool: ("bool", pa.bool_()),
    int: ("int64", pa.int64()),
}
_INT64 = (-(2**63), 2**63 - 1)


def _one_kind(values: list[Any]) -> pa.StructArray | None:
    """A column whose values are all of one kind (or null) as its variant, built by Arrow at
    once: the same array the per-value path builds, without a dict per value. Scalars of one
    kind, objects whose fields are so in turn, lists whose items are. None otherwise."""
    kinds = {type(v) for v in values if v is not None}
    if len(kinds) != 1:
        return None
    (t,) = kinds
    mask = pa.array([v is None for v in values], pa.bool_()) if None in values else None
    if t is dict:
        names: dict[str, None] = {}
        for v in values:
            if v is not None:
                names.update(dict.fromkeys(v))
        if not names:
            return None
        kids = []
        for name in names:
            kid = _one_kind([v.get(name) if v is not None else None for v in values])
            if kid is None:
                return None
            kids.append(kid)
        inner: pa.Array = pa.StructArray.from_arrays(kids, names=list(names), mask=mask)
        return pa.StructArray.from_arrays([inner], names=["struct"], mask=mask)
    if t is list:
        flat = [x for v in values if v is not None for x in v]
        items = _one_kind(flat)
        if items is None:
            return None
        offsets, at = [0], 0
        for v in values:
            at += len(v) if v is not None else 0
            offsets.append(at)
        inner = pa.ListArray.from_arrays(pa.array(offsets, pa.int32()), items, mask=mask)
        return pa.StructArray.from_arrays([inner], names=["list"], mask=mask)
    if t not in _ONE_KIND or t is int and not all(_INT64[0] <= v <= _INT64[1] for v in values if v is not None):
        return None
    key, arrow = _ONE_KIND[t]
    arr = pa.array(values, arrow)
    return pa.StructArray.from_arrays([arr], names=[key], mask=mask)


def records_to_batch(records: Sequence[Any]) -> pa.RecordBatch:
    """Parsed JSON records as a batch of variant columns ('$' for records that are not objects).

    >>> records_to_batch([{"x": 1.5}, {"x": "n/a"}]).column("x").to_pylist()
    [{'float64': 1.5, 'string': None}, {'float64': None, 'string': 'n/a'}]
    """
    names: dict[str, None] = {}
    for rec in records:
        for name in rec if type(rec) is dict else (paths.ROOT,):
            names[name] = None
    columns, fields = [], []
    for name in names:
        plain = [rec.get(name) if type(rec) is dict else (rec if name == paths.ROOT else None) for rec in records]
        one = _one_kind(plain)
        if one is not None:
            columns.append(one)
            fields.append(pa.field(name, one.type))
            continue
        values = [variant_value(v) for v in plain]
        shape = _Shape()
        for v in values:
            shape.add(v)
        t = shape.arrow()
        columns.append(pa.array(values, type=t))
        fields.append(pa.field(name, t))
    if not fields:  # empty objects only: rows without columns
        return pa.RecordBatch.from_struct_array(pa.array([{}] * len(records), type=pa.struct([])))
    return pa.RecordBatch.from_arrays(columns, schema=pa.schema(fields))


def table_batch(table: pa.Table | None) -> pa.RecordBatch:
    """Arrow's table of JSON Lines records (sources/jsonlined, proven the same values) as variant
    columns: the batch records_to_batch builds from the parsed records."""
    assert table is not None
    return pa.RecordBatch.from_arrays([as_variant(c) for c in table.columns], names=table.column_names)


# -- Arrow arrays to variants ---------------------------------------------------------------


def _plain(arr: pa.Array) -> pa.Array:
    """Encodings unwrapped and wide layouts narrowed, so that compute kernels take them."""
    t = arr.type
    if pa.types.is_dictionary(t):  # values first: no take kernel for view types (pyarrow 26)
        return _plain(_plain(arr.dictionary).take(arr.indices))
    if isinstance(t, pa.Bool8Type):  # canonical bool8: int8 storage, 0 false, other values true
        return pc.cast(arr.storage, pa.bool_())
    if isinstance(t, pa.BaseExtensionType):
        return _plain(arr.storage)
    if pa.types.is_list_view(t) or pa.types.is_large_list_view(t):
        return _list_of_view(arr)
    if pa.types.is_run_end_encoded(t):
        return _plain(arr.cast(t.value_type))
    if pa.types.is_large_string(t) or pa.types.is_string_view(t):
        return arr.cast(pa.string())
    if pa.types.is_large_binary(t) or pa.types.is_binary_view(t) or pa.types.is_fixed_size_binary(t):
        return arr.cast(pa.binary())
    if pa.types.is_large_list(t) or pa.types.is_fixed_size_list(t):
        return arr.cast(pa.list_(t.value_field))
    return arr


def _list_of_view(arr: pa.Array) -> pa.Array:
    """A list view as a list, built from its lengths: pyarrow 26's cast from list_view to list
    gives an offsets buffer one entry short, which fails validation (and ListArray.from_arrays)."""
    lengths = pc.fill_null(pc.list_value_length(arr), 0).cast(pa.int32())
    offsets = pa.concat_arrays([pa.array([0], pa.int32()), pc.cumulative_sum(lengths)])
    return pa.ListArray.from_arrays(offsets, pc.list_flatten(arr), type=pa.list_(arr.type.value_field), mask=_mask(arr))


def _mask(arr: pa.Array) -> pa.Array | None:
    return pc.is_null(arr) if arr.null_count else None


def as_variant(arr: pa.Array | pa.ChunkedArray, *, text: bool = False) -> pa.StructArray:
    """A typed Arrow column as a variant of one child; with text, CSV cells (blank → null).

    >>> as_variant(pa.array([1, None], pa.int32())).to_pylist()
    [{'int32': 1}, None]
    """
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks else pa.array([], arr.type)
    arr = _plain(arr)
    if pa.types.is_null(arr.type):
        return pa.StructArray.from_arrays([], fields=[], mask=pa.repeat(True, len(arr)))
    if text:
        # Blank: empty, or only characters utf8_trim_whitespace removes (utf8_is_space tests the
        # same set, code point for code point, without building the trimmed strings).
        blank = pc.fill_null(pc.or_(pc.equal(pc.binary_length(arr), 0), pc.utf8_is_space(arr)), True)
        if not blank.true_count:
            return pa.StructArray.from_arrays([arr], names=[TEXT])
        cells = pc.if_else(blank, pa.nulls(len(arr), pa.string()), arr)
        return pa.StructArray.from_arrays([cells], names=[TEXT], mask=pc.is_null(cells))
    t = arr.type
    if pa.types.is_struct(t):
        kids = [as_variant(arr.field(i)) for i in range(t.num_fields)]
        # A struct of no fields keeps its own length; from_arrays would give it none.
        inner: pa.Array = (
            arr
            if not kids
            else pa.StructArray.from_arrays(kids, names=[t.field(i).name for i in range(t.num_fields)], mask=_mask(arr))
        )
        key = "struct"
    elif pa.types.is_map(t):
        inner = pa.MapArray.from_arrays(arr.offsets, as_variant(arr.keys), as_variant(arr.items), mask=_mask(arr))
        key = "map"
    elif pa.types.is_list(t):
        inner = pa.ListArray.from_arrays(arr.offsets, as_variant(arr.values), mask=_mask(arr))
        key = "list"
    else:
        inner, key = arr, from_arrow(t).shallow_key()
    return pa.StructArray.from_arrays([inner], names=[key], mask=_mask(arr))


# -- files: read by the scan's own readers (sources/readers.read_values), as variants -------


def file_batches(ref: FileRef, batch_rows: int, base: ReadOptions | None = None) -> Iterator[pa.RecordBatch]:
    """One file's rows, batch_rows at a time, as variant columns (read with the scan's read options)."""
    for batch, _ in lined_batches(ref, batch_rows, base):
        yield batch


def lined_batches(
    ref: FileRef, batch_rows: int, base: ReadOptions | None = None
) -> Iterator[tuple[pa.RecordBatch, Sequence[int] | None]]:
    """file_batches, each with the line its rows start on when the reader knows it (CSV and TSV,
    numbered as the scan numbers them; JSON Lines), else None."""
    text = SPECS[ref.format].text_cells
    for part in read_values(ref, batch_rows, base):
        if isinstance(part, list):
            yield records_to_batch(part), None
            continue
        if isinstance(part, LinedRecords):
            yield (records_to_batch(part.records) if part.records is not None else table_batch(part.table)), part.lines
            continue
        cells, lines = (part.cells, part.lines) if isinstance(part, LinedCells) else (part, None)
        yield (
            pa.RecordBatch.from_arrays([as_variant(c, text=text) for c in cells.columns], names=cells.schema.names),
            lines,
        )


def raw_batches(
    paths_: str | os.PathLike[str] | Sequence[str | os.PathLike[str]], *, batch_rows: int = 65_536
) -> Iterator[RawBatch]:
    """Every file under paths (as the scan discovers them), batch by batch, as variants."""
    found = discover([paths_] if isinstance(paths_, str | os.PathLike) else list(paths_))
    for ref in found.files:
        row = 0
        for rb in file_batches(ref, batch_rows):
            yield RawBatch(ref.rel, row, rb)
            row += rb.num_rows


# -- JSON values ----------------------------------------------------------------------------


def cell_value(cell: str) -> Any:
    """A CSV cell as the scan reads it: by its content class (observe.TEXT_CLASS_TYPE).

    >>> [cell_value(c) for c in ("7", "2.50", "TRUE", "", "n/a", "2026-11-29")]
    [7, 2.5, True, None, None, '2026-11-29']
    """
    kind = TEXT_CLASS_TYPE[class_of(cell)]
    if kind is None:
        return None
    if kind == "int64":
        return int(cell)
    if kind == "float64":
        return float(cell)
    if kind == "bool":
        return cell.lower() == "true"
    return cell


def json_value(v: Any) -> Any:
    """An Arrow value (as_py) as JSON data: temporal values as ISO 8601 text, bytes as base64."""
    if isinstance(v, dict):
        return {k: json_value(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [json_value(x) for x in v]
    if isinstance(v, dt.datetime | dt.date | dt.time):
        return v.isoformat()
    if isinstance(v, dt.timedelta):
        return v // dt.timedelta(microseconds=1)
    if isinstance(v, bytes):
        return base64.b64encode(v).decode("ascii")
    if isinstance(v, decimal.Decimal | bool | int | float | str) or v is None:
        return v
    return str(v)


def jsonable(arr: pa.Array) -> pa.Array:
    """Temporal values as ISO 8601 / RFC 3339 text (UTC for zoned ones), at any depth.

    Done in Arrow, so values outside Python's datetime range (int96, far dates) still print.
    """
    arr = _plain(arr)
    t = arr.type
    if pa.types.is_timestamp(t):
        if t.tz:
            return pc.strftime(arr.cast(pa.timestamp(t.unit, "UTC")), format="%Y-%m-%dT%H:%M:%SZ")
        return pc.strftime(arr, format="%Y-%m-%dT%H:%M:%S")
    if pa.types.is_date(t) or pa.types.is_time(t):
        return arr.cast(pa.string())
    if pa.types.is_duration(t):
        return arr.cast(pa.int64())
    if pa.types.is_struct(t) and t.num_fields:  # (a struct of no fields has nothing to convert)
        kids = [jsonable(arr.field(i)) for i in range(t.num_fields)]
        return pa.StructArray.from_arrays(kids, names=[t.field(i).name for i in range(t.num_fields)], mask=_mask(arr))
    if pa.types.is_map(t):
        return pa.MapArray.from_arrays(arr.offsets, jsonable(arr.keys), jsonable(arr.items), mask=_mask(arr))
    if pa.types.is_list(t):
        return pa.ListArray.from_arrays(arr.offsets, jsonable(arr.values), mask=_mask(arr))
    return arr


def plain_value(v: Any) -> Any:
    """A variant row (as_py) as plain JSON data: the one kind that is set, nested ones too.

    >>> plain_value({"struct": {"a": {"int64": 1, "string": None}}, "string": None})
    {'a': 1}
    """
    if v is None:
        return None
    kind, value = next(((k, x) for k, x in v.items() if x is not None), (None, None))
    if value is None:
        return None
    if kind == "struct":
        return {name: plain_value(x) for name, x in value.items()}
    if kind == "list":
        return [plain_value(x) for x in value]
    return json_value(value)


def _fragment(v: Any) -> Any:
    # A decimal's text is a JSON number as it is; a float would round it.
    if isinstance(v, decimal.Decimal):
        return orjson.Fragment(str(v))
    raise TypeError(f"no JSON text for {type(v).__name__}")


def json_text(value: Any) -> str:
    """Compact JSON text of plain data (decimals exact; NaN and infinities as null).

    >>> json_text({"p": decimal.Decimal("12.50"), "s": "x"})
    '{"p":12.50,"s":"x"}'
    """
    return orjson.dumps(value, default=_fragment).decode()


def iter_records(paths_: str | os.PathLike[str] | Sequence[str | os.PathLike[str]]) -> Iterator[tuple[str, int, Any]]:
    """(file, row, record) for every record, as JSON data (see the module docstring)."""
    found = discover([paths_] if isinstance(paths_, str | os.PathLike) else list(paths_))
    for ref in found.files:
        row = 0
        for part in read_values(ref, 65_536, ReadOptions(exact=True)):  # records, not Arrow's tables
            if isinstance(part, LinedRecords) and part.records is not None:
                records: list[Any] = part.records
            elif isinstance(part, list):
                records = part
            elif isinstance(part, LinedCells):
                records = [{k: cell_value(v) for k, v in rec.items()} for rec in part.cells.to_pylist()]
            else:
                plain = pa.RecordBatch.from_arrays([jsonable(c) for c in part.columns], names=part.schema.names)
                # Maps as JSON objects (their keys), as a JSON producer would write them.
                records = [json_value(rec) for rec in plain.to_pylist(maps_as_pydicts="lossy")]
            for rec in records:
                yield ref.rel, row, rec
                row += 1
