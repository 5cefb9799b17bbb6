"""Observe many small Arrow batches at once, with the same Observations as observe_table on each.

observe_table pays a fixed cost per column per batch: a dozen pyarrow.compute calls of
some 20 µs each, whatever the batch holds, which is most of the work on a folder of
thousands of small Parquet files.  Here the columns of one name and type are concatenated
over the batches and each statistic comes per batch from one grouped aggregation, so those
calls are paid once per group.  Flat columns of the common types take this path (numbers,
booleans, strings, dates, timestamps); any other column (nested, decimal, dictionary,
binary, ...) goes through observe_table's own walk, batch by batch.
tests/test_bulk.py holds every Observation equal to observe_table's.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, replace
from itertools import accumulate
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import paths
from driftline.core.lattice import from_arrow
from driftline.core.observation import Observation
from driftline.core.stats import (
    NULL_SAMPLE,
    SAMPLES_PER_KEY,
    Example,
    FieldStats,
    Measured,
    SampleKey,
    Samples,
    class_sample,
    type_sample,
)
from driftline.observe.fast.columnar import (
    _LOSSY_CLASSES,
    _number_stats,
    _scalar,
    _temporal_text,
    observe_column,
    observe_table,
)
from driftline.observe.fast.strprofile import exact_requested, verdicts
from driftline.observe.records import SAFE_INT, value_text
from driftline.observe.textclass import CLASSES

_LOSSY = {CLASSES.index(c) for c in _LOSSY_CLASSES}


@dataclass(frozen=True, slots=True)
class Batch:
    """An Arrow batch waiting to be observed, and where it sits: file, batch index, first row."""

    data: pa.Table | pa.RecordBatch
    file: str
    batch: int
    row_start: int
    # Columns answered without their data (a Parquet footer's statistics): their statistics, by
    # top-level column name; data then holds only the other columns (and every row).
    known: Mapping[str, FieldStats] | None = None


def observe_batches(batches: Sequence[Batch], *, exact: bool = False) -> list[Observation]:
    """One Observation per batch, equal to observe_table(batch.data, ...) for each.

    With exact (or DRIFTLINE_EXACT set) every batch takes observe_table's reference path.

    >>> b = [Batch(pa.table({"a": [1, None]}), "f.parquet", 0, 0), Batch(pa.table({"a": [3]}), "g.parquet", 0, 0)]
    >>> [(o.file, o.fields["a"].types, o.fields["a"].nulls) for o in observe_batches(b)]
    [('f.parquet', {'int64': 1}, 1), ('g.parquet', {'int64': 1}, 0)]
    """
    if exact or exact_requested() or len(batches) == 1:
        return [
            _with_known(
                observe_table(b.data, file=b.file, batch=b.batch, row_start=b.row_start, exact=exact or None), b
            )
            for b in batches
        ]
    out: list[dict[str, FieldStats]] = [{} for _ in batches]
    unobserved: list[dict[str, str]] = [{} for _ in batches]  # column -> why it cannot be observed
    groups: dict[tuple[str, pa.DataType], list[tuple[int, pa.Array]]] = {}
    for i, b in enumerate(batches):
        names = b.data.column_names
        if len(set(names)) != len(names) or not b.data.num_rows:  # repeated names: the last one wins, in order
            whole = observe_table(b.data, file=b.file, batch=b.batch, row_start=b.row_start)
            out[i].update(whole.fields)
            unobserved[i].update(whole.unobserved)
            continue
        if b.known:
            out[i].update(_known_paths(b))
        for name, col in zip(names, b.data.columns, strict=True):
            arr = _whole(col)
            groups.setdefault((name, arr.type), []).append((i, arr))
    for (name, t), members in groups.items():
        if _kind(t) is None:  # observe_table's own walk, batch by batch
            for i, arr in members:
                got = observe_column(arr, name, file=batches[i].file, row_start=batches[i].row_start)
                if isinstance(got, str):
                    unobserved[i][name] = got
                else:
                    out[i].update(got)
        else:
            _observe_group(paths.child(None, name), t, members, batches, out)
    return [
        Observation(
            file=b.file,
            batch=b.batch,
            row_start=b.row_start,
            rows=b.data.num_rows,
            fields=dict(sorted(out[i].items())),
            unobserved=tuple(sorted(unobserved[i].items())),
        )
        for i, b in enumerate(batches)
    ]


def _known_paths(b: Batch) -> dict[str, FieldStats]:
    return {paths.child(None, name): st for name, st in (b.known or {}).items()}


def _with_known(obs: Observation, b: Batch) -> Observation:
    if not b.known:
        return obs
    return replace(obs, fields=dict(sorted({**obs.fields, **_known_paths(b)}.items())))


def _whole(col: pa.Array | pa.ChunkedArray) -> pa.Array:
    if not isinstance(col, pa.ChunkedArray):
        return col
    return col.chunk(0) if col.num_chunks == 1 else col.combine_chunks()  # one chunk: no copy


def _kind(t: pa.DataType) -> str | None:
    if pa.types.is_integer(t) or pa.types.is_float32(t) or pa.types.is_float64(t):
        return "number"
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        return "string"
    if pa.types.is_date32(t) or pa.types.is_date64(t) or pa.types.is_timestamp(t):
        return "temporal"
    if pa.types.is_boolean(t):
        return "bool"
    return None


class _Group:
    """One column's arrays from several batches, concatenated, with per-batch aggregation."""

    def __init__(self, arrays: list[pa.Array]) -> None:
        self.arrays = arrays
        self.col = pa.concat_arrays(arrays)
        lens = [len(a) for a in arrays]
        self.starts = [0, *accumulate(lens)][:-1]
        ends = pa.array(list(accumulate(lens)), pa.int32())
        self.gid = pc.run_end_decode(pa.RunEndEncodedArray.from_arrays(ends, pa.array(range(len(arrays)), pa.int32())))
        self._row: pa.Array | None = None

    @property
    def row(self) -> pa.Array:
        """Position of each value in the concatenated column."""
        if self._row is None:
            self._row = pc.subtract(pc.cumulative_sum(pa.repeat(pa.scalar(1, pa.int64()), len(self.col))), 1)
        return self._row

    def per_batch(self, columns: dict[str, pa.Array], aggs: list[tuple[str, str]]) -> pa.Table:
        """Aggregates of columns per batch, in batch order."""
        table = pa.table({"g": self.gid, **columns})
        return table.group_by("g", use_threads=False).aggregate(aggs).sort_by([("g", "ascending")])


def _observe_group(
    path: str,
    t: pa.DataType,
    members: list[tuple[int, pa.Array]],
    batches: Sequence[Batch],
    out: list[dict[str, FieldStats]],
) -> None:
    g = _Group([a for _, a in members])
    key = from_arrow(t).shallow_key()
    first_valid, first_null = _firsts(g)
    kind = _kind(t)
    extras: list[Measured]
    samples: list[Samples] = [{} for _ in members]
    if kind == "number":
        extras = _numbers(g, t)
    elif kind == "temporal":
        extras = _temporal(g)
    elif kind == "string":
        extras = _strings(g, [batches[i] for i, _ in members], samples)
    else:
        extras = [{} for _ in members]
    firsts = _values(g, [g.starts[k] + v for k, v in enumerate(first_valid) if v is not None], kind)
    null_text, type_key = value_text(None), type_sample(key)
    for k, (i, arr) in enumerate(members):
        b, s = batches[i], samples[k]
        if (fn := first_null[k]) is not None:
            s[NULL_SAMPLE] = (Example(b.file, b.row_start + fn, None, null_text),)
        if (fv := first_valid[k]) is not None:
            s[type_key] = (Example(b.file, b.row_start + fv, None, value_text(next(firsts))),)
        nonnull = len(arr) - arr.null_count
        out[i][path] = FieldStats(
            types={key: nonnull} if nonnull else {}, nulls=arr.null_count, samples=dict(sorted(s.items())), **extras[k]
        )


def _values(g: _Group, at: list[int], kind: str | None) -> Iterator[Any]:
    """The values at these positions as observe_table shows them (columnar._scalar)."""
    if kind == "temporal":  # dates out of Python's range need _scalar's care, value by value
        return (_scalar(g.col[j]) for j in at)
    return iter(g.col.take(pa.array(at, pa.int64())).to_pylist())


def _firsts(g: _Group) -> tuple[list[int | None], list[int | None]]:
    """Per batch: the first valid and the first null position within it (None: there is none)."""
    fv: list[int | None] = [None if a.null_count == len(a) else 0 for a in g.arrays]
    fn: list[int | None] = [0 if a.null_count == len(a) else None for a in g.arrays]
    if any(0 < a.null_count < len(a) for a in g.arrays):
        valid = pc.is_valid(g.col)
        agg = g.per_batch(
            {"v": pc.if_else(valid, g.row, None), "n": pc.if_else(valid, None, g.row)}, [("v", "min"), ("n", "min")]
        )
        for k, (v, n) in enumerate(zip(agg["v_min"].to_pylist(), agg["n_min"].to_pylist(), strict=True)):
            fv[k] = None if v is None else v - g.starts[k]
            fn[k] = None if n is None else n - g.starts[k]
    return fv, fn


def _numbers(g: _Group, t: pa.DataType) -> list[Measured]:
    extras: list[Measured] = [{} for _ in g.arrays]
    work = g.col
    if pa.types.is_floating(t):
        work = pc.if_else(pc.is_nan(work), pa.scalar(None, t), work)
    columns, aggs = {"w": work}, [("w", "min_max")]
    big = pa.types.is_integer(t) and t.bit_width == 64
    if big:
        whole = pc.min_max(g.col)
        lo, hi = whole["min"].as_py(), whole["max"].as_py()
        big = lo is not None and (hi > SAFE_INT or lo < -SAFE_INT)
        if big:
            unsafe = pc.greater(g.col, pa.scalar(SAFE_INT, t))
            if not pa.types.is_unsigned_integer(t):
                unsafe = pc.or_(unsafe, pc.less(g.col, pa.scalar(-SAFE_INT, t)))
            columns["u"], aggs = pc.cast(unsafe, pa.int64()), [*aggs, ("u", "sum")]
    agg = g.per_batch(columns, aggs)
    mm = agg["w_min_max"].combine_chunks()
    lows, highs = mm.field("min").to_pylist(), mm.field("max").to_pylist()
    unsafe_counts = agg["u_sum"].to_pylist() if big else [0] * len(g.arrays)
    for k, arr in enumerate(g.arrays):
        if arr.null_count == len(arr):
            continue
        lo, hi = lows[k], highs[k]
        if pa.types.is_floating(t) and (lo == 0 or hi == 0):
            # -0.0 and 0.0 tie: which one a kernel keeps depends on its order of visits
            extras[k] = _number_stats(arr, t)
            continue
        if lo is not None:
            extras[k] = {"minimum": lo, "maximum": hi}
        if pa.types.is_integer(t) and t.bit_width == 64:
            extras[k]["unsafe_ints"] = int(unsafe_counts[k] or 0)
    return extras


def _temporal(g: _Group) -> list[Measured]:
    extras: list[Measured] = [{} for _ in g.arrays]
    mm = g.per_batch({"c": g.col}, [("c", "min_max")])["c_min_max"].combine_chunks()
    lows, highs = mm.field("min"), mm.field("max")
    for k, arr in enumerate(g.arrays):
        if arr.null_count < len(arr):
            extras[k] = {"minimum": _temporal_text(lows[k]), "maximum": _temporal_text(highs[k])}
    return extras


def _strings(g: _Group, batches: list[Batch], samples: list[Samples]) -> list[Measured]:
    """Content classes per batch, as columnar._string_stats finds them for each batch alone."""
    extras: list[Measured] = [{} for _ in g.arrays]
    enc = pc.dictionary_encode(g.col)
    v = verdicts(enc.dictionary)
    idx = enc.indices
    per_row = {
        "len": pc.utf8_length(g.col),
        "int": pc.take(v.int_digits, idx),
        "frac": pc.take(v.frac_digits, idx),
        "leap": pc.cast(pc.take(v.leap, idx), pa.int64()),
        "lower": pc.cast(pc.take(v.lower, idx), pa.int64()),
    }
    totals = g.per_batch(per_row, [("len", "max"), ("int", "max"), ("frac", "max"), ("leap", "sum"), ("lower", "sum")])
    kinds = pc.take(v.kind, idx)
    valid = pc.is_valid(kinds)
    classes = pa.table({"g": g.gid, "k": kinds, "row": g.row}).filter(valid)
    by_class = classes.group_by(["g", "k"], use_threads=False).aggregate([("row", "count"), ("row", "list")])
    found: list[dict[int, tuple[int, list[int]]]] = [{} for _ in g.arrays]  # batch -> class -> (count, first rows)
    firsts = pc.list_slice(by_class["row_list"].combine_chunks(), 0, SAMPLES_PER_KEY).to_pylist()
    for gk, kk, n, rows in zip(
        by_class["g"].to_pylist(), by_class["k"].to_pylist(), by_class["row_count"].to_pylist(), firsts, strict=True
    ):
        found[gk][kk] = (n, rows)
    columns = {name: totals[name].to_pylist() for name in ("len_max", "int_max", "frac_max", "leap_sum", "lower_sum")}
    picked: list[tuple[int, SampleKey, list[int]]] = []  # (batch, sample key, positions)
    for k, arr in enumerate(g.arrays):
        if arr.null_count == len(arr):
            continue
        per_class = dict(sorted(found[k].items()))
        many = any(per_class.get(c, (0,))[0] > 1 for c in _LOSSY)
        picked.extend(
            (k, class_sample(CLASSES[c]), rows if many and n > 1 else rows[:1]) for c, (n, rows) in per_class.items()
        )
        extras[k] = {
            "classes": {CLASSES[c]: n for c, (n, _) in per_class.items()},
            "max_length": int(columns["len_max"][k] or 0),
            "int_digits": int(columns["int_max"][k] or 0),
            "frac_digits": int(columns["frac_max"][k] or 0),
            "leap_seconds": int(columns["leap_sum"][k] or 0),
            "lowercase_rfc3339": int(columns["lower_sum"][k] or 0),
        }
    values = _values(g, [j for _, _, rows in picked for j in rows], "string")
    for k, name, rows in picked:
        b, start = batches[k], batches[k].row_start - g.starts[k]
        samples[k][name] = tuple(Example(b.file, start + j, None, value_text(next(values))) for j in rows)
    return extras
