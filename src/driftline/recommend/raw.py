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
"""

from __future__ import annotations

import base64
import datetime as dt
import decimal
import io
import os
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv
import pyarrow.parquet as pq

from driftline.lattice import from_arrow
from driftline.observe import jsonnum, paths
from driftline.observe.observation import TEXT_CLASS_TYPE
from driftline.observe.records import int_key
from driftline.observe.textclass import class_of
from driftline.sources.base import ReadOptions
from driftline.sources.csvfile import arrow_options, head_of
from driftline.sources.discover import FileRef, discover
from driftline.sources.encoding import TextStream
from driftline.sources.formats import open_stream
from driftline.sources.native import hand, hand_bytes

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
        values = [
            variant_value(rec.get(name) if type(rec) is dict else (rec if name == paths.ROOT else None))
            for rec in records
        ]
        shape = _Shape()
        for v in values:
            shape.add(v)
        t = shape.arrow()
        columns.append(pa.array(values, type=t))
        fields.append(pa.field(name, t))
    if not fields:  # empty objects only: rows without columns
        return pa.RecordBatch.from_struct_array(pa.array([{}] * len(records), type=pa.struct([])))
    return pa.RecordBatch.from_arrays(columns, schema=pa.schema(fields))


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
        blank = pc.equal(pc.utf8_length(pc.utf8_trim_whitespace(arr)), 0)
        cells = pc.if_else(pc.fill_null(blank, True), pa.nulls(len(arr), pa.string()), arr)
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


# -- files ----------------------------------------------------------------------------------


def _utf8_text(ref: FileRef) -> bytes:
    """The file's text as UTF-8, in the encoding the scan finds for it (sources/encoding.py)."""
    with open_stream(ref.path, ref.compression, limit=None) as stream:
        return TextStream(stream, ref.format).stream.read()


def _json_records(ref: FileRef) -> Iterator[Any]:
    """Valid records in scan order (a line that does not parse is skipped, as the scan does)."""
    data = _utf8_text(ref)
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    if ref.format == "json":
        try:
            doc = jsonnum.loads(data)
        except orjson.JSONDecodeError:
            doc = None
        if doc is not None or not data.strip():
            yield from doc if isinstance(doc, list) else ([] if doc is None else [doc])
            return
    for line in data.split(b"\n"):
        line = line.removesuffix(b"\r")
        if line.strip():
            try:
                yield jsonnum.loads(line)
            except orjson.JSONDecodeError:
                continue


def _csv_tables(ref: FileRef, batch_rows: int) -> Iterator[pa.Table]:
    # The scan's dialect and header rules (sources/dialect.py, csvfile.head_of): the same
    # columns, names and rows as the scan reads.
    data = _utf8_text(ref)
    _, header = head_of(io.BytesIO(data), ref.rel, ReadOptions(), tsv=ref.format == "tsv")
    if header is None:
        return
    body = data[header.size :]
    if header.dialect is not None and header.dialect.line_end == "CR":
        body = body.replace(b"\r", b"\n")
    names = list(header.names)
    options = arrow_options(header, 1 << 20, hand(lambda row: "skip"))
    table = (
        pcsv.read_csv(
            pa.BufferReader(hand_bytes(body)),
            read_options=pcsv.ReadOptions(use_threads=False, column_names=names, skip_rows=0),
            parse_options=options["parse_options"],
            convert_options=pcsv.ConvertOptions(
                column_types=dict.fromkeys(names, pa.string()),
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
        if body.strip()
        else pa.table({n: pa.array([], pa.string()) for n in names})
    )
    for start in range(0, table.num_rows, batch_rows):
        yield table.slice(start, batch_rows)


def _batches(ref: FileRef, batch_rows: int) -> Iterator[pa.RecordBatch]:
    if ref.format in ("json", "jsonl"):
        records = list(_json_records(ref))
        for start in range(0, len(records), batch_rows):
            yield records_to_batch(records[start : start + batch_rows])
    elif ref.format in ("csv", "tsv"):
        for t in _csv_tables(ref, batch_rows):
            cols = [as_variant(c, text=True) for c in t.columns]
            yield pa.RecordBatch.from_arrays(cols, names=t.column_names)
    else:
        for rb in pq.ParquetFile(ref.path).iter_batches(batch_size=batch_rows, use_threads=False):
            yield pa.RecordBatch.from_arrays([as_variant(c) for c in rb.columns], names=rb.schema.names)


def raw_batches(
    paths_: str | os.PathLike[str] | Sequence[str | os.PathLike[str]], *, batch_rows: int = 65_536
) -> Iterator[RawBatch]:
    """Every file under paths (as the scan discovers them), batch by batch, as variants."""
    found = discover([paths_] if isinstance(paths_, str | os.PathLike) else list(paths_))
    for ref in found.files:
        row = 0
        for rb in _batches(ref, batch_rows):
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
        if ref.format in ("json", "jsonl"):
            for row, rec in enumerate(_json_records(ref)):
                yield ref.rel, row, rec
        elif ref.format in ("csv", "tsv"):
            row = 0
            for t in _csv_tables(ref, 65_536):
                for rec in t.to_pylist():
                    yield ref.rel, row, {k: cell_value(v) for k, v in rec.items()}
                    row += 1
        else:
            table = pq.read_table(ref.path)
            table = pa.table(
                {n: jsonable(c.combine_chunks()) for n, c in zip(table.column_names, table.columns, strict=True)}
            )
            # Maps as JSON objects (their keys), as a JSON producer would write them.
            for row, rec in enumerate(table.to_pylist(maps_as_pydicts="lossy")):
                yield ref.rel, row, json_value(rec)
