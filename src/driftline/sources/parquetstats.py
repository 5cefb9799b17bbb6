"""A Parquet row group's flat columns answered from its footer: null counts and extremes from the
column-chunk statistics, the first values from a short prefix of rows, the rest never decoded.

What a batch's observation of such a column holds (observe/fast/columnar.py): its type and count
of values, its nulls, its extremes, and the first value and the first null of the batch as
examples. The statistics give the counts and extremes; the examples need data, and come from
the first PREFIX_ROWS rows. A column is answered only when every one of them is certain:

- a flat column (no repetition) of an integer, float, date32, timestamp or boolean type, read
  as that plain type (no dictionary, extension or view wrapper);
- the statistics carry a null count, their count of values agrees with it and with the row
  group's rows, and (but for booleans and columns of nulls only) a minimum and a maximum that
  pyarrow trusts (``has_min_max`` is false for statistics written in a sort order the type
  does not have, such as the signed order of old writers on unsigned columns);
- integers of 64 bits stay within ±(2**53-1) (else their count of unsafe integers needs the
  data); floats have extremes other than NaN and zero (-0.0 and 0.0 tie, and which one a
  kernel keeps depends on its order of visits); a date or timestamp's physical unit is the
  one it is read as;
- the prefix holds the column's first value and, when it has nulls but not only nulls, its
  first null, and no null count larger than the statistics'.

Parquet's minimum and maximum of these physical types are values of the column, never
truncated (truncation, and the format's is_min_value_exact flags, concern byte arrays, which
are read). Statistics pyarrow 26 does not expose as exact or that fail a check above leave
their column to the data, as does the exact path (ReadOptions.exact, DRIFTLINE_EXACT) and
DRIFTLINE_FOOTER_STATS=0.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from driftline.core.lattice import from_arrow
from driftline.core.options import ReadOptions
from driftline.core.stats import NULL_SAMPLE, Example, FieldStats, Samples, type_sample
from driftline.observe.fast.columnar import _first_null, _first_valid, _sample, _temporal_text
from driftline.observe.fast.strprofile import exact_requested
from driftline.observe.records import SAFE_INT, value_text

FOOTER_ENV = "DRIFTLINE_FOOTER_STATS"  # "0": every column read from its pages (for the differential tests)
# A row group shorter than this is read whole: decoding a few thousand rows costs less than the
# prefix read and the statistics' checks.
FOOTER_MIN_ROWS = 16_384
PREFIX_ROWS = 1_024  # rows read from the start of the row group for the first value and the first null

_UNITS = {"s": "seconds", "ms": "milliseconds", "us": "microseconds", "ns": "nanoseconds"}


def footer_first(opts: ReadOptions) -> bool:
    """Whether columns may be answered from the footer's statistics."""
    return not opts.exact and not exact_requested() and os.environ.get(FOOTER_ENV, "1") != "0"


def leaf_indices(schema: pa.Schema, pschema: pq.ParquetSchema) -> dict[str, int] | None:
    """Each top-level column of a type the footer may answer, with its index among the Parquet
    leaf columns; None when the schema's names repeat or its leaves do not line up with the
    Arrow fields (nothing is answered then). Only the schema is read, never a column's metadata."""
    if len(set(schema.names)) != len(schema.names):
        return None
    out: dict[str, int] = {}
    at = 0
    for f in schema:
        n = _leaves(f.type)
        if n is None:
            return None
        if n == 1 and at < len(pschema) and _flat(f.type):
            col = pschema.column(at)
            if col.max_repetition_level != 0 or col.path != f.name:
                return None
            out[f.name] = at
        at += n
    return out if at == len(pschema) else None


def _leaves(t: pa.DataType) -> int | None:
    if pa.types.is_struct(t):
        parts = [_leaves(t.field(i).type) for i in range(t.num_fields)]
        return None if any(p is None for p in parts) else sum(p for p in parts if p is not None)
    if pa.types.is_map(t):
        k, v = _leaves(t.key_type), _leaves(t.item_type)
        return None if k is None or v is None else k + v
    if pa.types.is_list(t) or pa.types.is_large_list(t) or pa.types.is_fixed_size_list(t):
        return _leaves(t.value_type)
    if pa.types.is_dictionary(t):
        return 1
    if isinstance(t, pa.BaseExtensionType):
        return _leaves(t.storage_type)
    if pa.types.is_union(t) or pa.types.is_run_end_encoded(t) or pa.types.is_list_view(t):
        return None
    return 1


def _flat(t: pa.DataType) -> bool:
    """A type this module can answer from statistics (as read: no wrapper around it)."""
    return (
        pa.types.is_integer(t)
        or pa.types.is_float32(t)
        or pa.types.is_float64(t)
        or pa.types.is_date32(t)
        or pa.types.is_timestamp(t)
        or pa.types.is_boolean(t)
    )


def answer(
    meta: pq.RowGroupMetaData,
    prefix: pa.Table | pa.RecordBatch,
    leaves: Mapping[str, int],
    *,
    file: str,
    row_start: int,
) -> dict[str, FieldStats]:
    """The statistics of the top-level columns this row group's footer answers (see the module's
    docstring), by column name; prefix is the row group's first rows, every column."""
    rows = meta.num_rows
    out: dict[str, FieldStats] = {}
    for name, col in zip(prefix.column_names, prefix.columns, strict=True):
        leaf = leaves.get(name)
        if leaf is None or not _flat(col.type):
            continue
        arr = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
        got = _column(meta.column(leaf), arr, rows, file=file, row_start=row_start)
        if got is not None:
            out[name] = got
    return out


def _column(
    chunk: pq.ColumnChunkMetaData, head: pa.Array, rows: int, *, file: str, row_start: int
) -> FieldStats | None:
    if not chunk.is_stats_set:
        return None
    st = chunk.statistics
    if st is None or not st.has_null_count:
        return None
    nulls = st.null_count
    if nulls < 0 or nulls > rows or st.num_values != rows - nulls or head.null_count > nulls:
        return None
    # The examples: the first value (when there is one) and the first null (when there is one),
    # both within the prefix, or the column goes to the data.
    whole = len(head) == rows
    if whole and head.null_count != nulls:
        return None  # the statistics disagree with the data: the data is read
    if nulls == rows and head.null_count != len(head):
        return None
    if nulls < rows and head.null_count == len(head):
        return None  # the first value lies past the prefix
    if nulls > 0 and head.null_count == 0:
        return None  # the first null lies past the prefix
    if nulls == 0 and head.null_count:
        return None
    extremes: dict[str, Any] = {}
    if nulls < rows and not pa.types.is_boolean(head.type):
        if not st.has_min_max:
            return None
        got = _extremes(st, head.type)
        if got is None:
            return None
        extremes = {"minimum": got[0], "maximum": got[1]}
    # The examples as columnar._observe makes them: the first null, the first value (as _sample shows it).
    samples: Samples = {}
    if (fn := _first_null(head)) is not None:
        samples[NULL_SAMPLE] = (Example(file, row_start + fn, None, value_text(None)),)
    key = from_arrow(head.type).shallow_key()
    if (fv := _first_valid(head)) is not None:
        samples[type_sample(key)] = (Example(file, row_start + fv, None, value_text(_sample(head, head, fv))),)
    values = rows - nulls
    return FieldStats(
        types={key: values} if values else {}, nulls=nulls, samples=dict(sorted(samples.items())), **extremes
    )


def _extremes(st: pq.Statistics, t: pa.DataType) -> tuple[Any, Any] | None:
    """The statistics' minimum and maximum as the columnar observer writes them, or None."""
    physical = st.physical_type
    logical = json.loads(st.logical_type.to_json())
    kind = logical.get("Type")
    if pa.types.is_integer(t):
        if physical not in ("INT32", "INT64") or kind not in ("None", "Int"):
            return None
        lo, hi = st.min, st.max
        if not isinstance(lo, int) or not isinstance(hi, int) or lo > hi:
            return None
        if not _fits(lo, t) or not _fits(hi, t):
            return None
        if t.bit_width == 64 and (lo < -SAFE_INT or hi > SAFE_INT):
            return None  # its count of unsafe integers needs the values
        return lo, hi
    if pa.types.is_floating(t):
        if physical not in ("FLOAT", "DOUBLE") or kind != "None":
            return None
        lo, hi = st.min, st.max
        if not isinstance(lo, float) or not isinstance(hi, float) or not lo <= hi or lo == 0 or hi == 0:
            return None  # NaN fails lo <= hi
        return lo, hi
    if pa.types.is_date32(t):
        if physical != "INT32" or kind != "Date":
            return None
        return _temporal(st, pa.int32(), t)
    if pa.types.is_timestamp(t):
        if physical != "INT64" or kind != "Timestamp" or logical.get("timeUnit") != _UNITS.get(t.unit):
            return None
        return _temporal(st, pa.int64(), t)
    return None


def _fits(v: int, t: pa.DataType) -> bool:
    bits = t.bit_width
    if pa.types.is_unsigned_integer(t):
        return 0 <= v < 2**bits
    return -(2 ** (bits - 1)) <= v < 2 ** (bits - 1)


def _temporal(st: pq.Statistics, storage: pa.DataType, t: pa.DataType) -> tuple[Any, Any] | None:
    lo, hi = st.min_raw, st.max_raw
    if not isinstance(lo, int) or not isinstance(hi, int) or lo > hi:
        return None
    values = pc.cast(pa.array([lo, hi], storage), t)
    return _temporal_text(values[0]), _temporal_text(values[1])
