"""Columnar observation of Arrow data (Parquet batches, CSV text columns, typed JSON batches).

Everything here is a pyarrow.compute call over whole arrays; no per-value Python.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import paths
from driftline.core.lattice import from_arrow, unsupported_reason
from driftline.core.observation import TEXT_CLASS_TYPE, Observation
from driftline.core.stagetime import staged
from driftline.core.stats import (
    NULL_SAMPLE,
    SAMPLES_PER_KEY,
    Example,
    FieldStats,
    Measured,
    Samples,
    class_sample,
    merge_all,
    type_sample,
)
from driftline.observe.fast.strprofile import (
    StringProfile,
    encoded_rows,
    exact_requested,
    string_profile,
    string_profiles,
)
from driftline.observe.records import SAFE_INT, pa_indices, value_text
from driftline.observe.textclass import class_masks, classify

# Classes a cast may null or change: once one repeats, each class keeps 3 examples, not 1.
_LOSSY_CLASSES = ("text", "null_token", "empty", "zero_padded", "float_out_of_range")


class _Ctx:
    __slots__ = ("file", "row_start", "lines", "text_source", "out", "exact", "profiles")

    def __init__(
        self, file: str, row_start: int, lines: Sequence[int] | None, text_source: bool, exact: bool = False
    ) -> None:
        self.exact = exact
        self.file = file
        self.row_start = row_start
        self.lines = lines
        self.text_source = text_source
        self.out: dict[str, FieldStats] = {}
        self.profiles: dict[str, StringProfile] = {}  # top-level string columns, classified together first

    def example(self, row: int, value: Any) -> Example:
        line = self.lines[row] if self.lines is not None else None
        return Example(self.file, self.row_start + row, line, value_text(value))


@staged("columnar")
def observe_table(
    table: pa.Table | pa.RecordBatch,
    *,
    file: str,
    batch: int,
    row_start: int,
    lines: Sequence[int] | None = None,
    text_source: bool = False,
    exact: bool | None = None,
) -> Observation:
    """Observe an Arrow batch column by column.

    With text_source, string columns are untyped text (CSV cells): each cell's type is
    inferred from its content class and empty cells count as null.

    >>> obs = observe_table(pa.table({"a": [1, None, 3]}), file="f.parquet", batch=0, row_start=0)
    >>> obs.fields["a"].types, obs.fields["a"].nulls
    ({'int64': 2}, 1)
    """
    ctx = _Ctx(file, row_start, lines, text_source, exact_requested() if exact is None else exact)
    unobserved: dict[str, str] = {}
    arrays = [col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col for col in table.columns]
    ctx.profiles = _string_columns(table.column_names, arrays, ctx)
    for name, arr in zip(table.column_names, arrays, strict=True):
        reason = _observe_or_why(arr, name, ctx)
        if reason is not None:
            unobserved[name] = reason
    return Observation(
        file=file,
        batch=batch,
        row_start=row_start,
        rows=table.num_rows,
        fields=dict(sorted(ctx.out.items())),
        unobserved=tuple(sorted(unobserved.items())),
    )


@staged("columnar")
def _string_columns(names: Sequence[str], arrays: Sequence[pa.Array], ctx: _Ctx) -> dict[str, StringProfile]:
    """The profiles of a batch's plain string columns, by path, classified together (string_profiles:
    on a few threads when they pay); _string_stats takes each from here as string_profile would give it."""
    if ctx.exact:
        return {}
    twice = {name for name, n in Counter(names).items() if n > 1}  # one path for two columns: each alone
    picked = [
        (paths.child(None, name), arr)
        for name, arr in zip(names, arrays, strict=True)
        if (pa.types.is_string(arr.type) or pa.types.is_large_string(arr.type))
        and arr.null_count < len(arr)
        and name not in twice
    ]
    if len(picked) < 2:
        return {}
    try:
        got = string_profiles([(arr, None) for _, arr in picked], SAMPLES_PER_KEY)
    except pa.ArrowException:
        return {}  # each column alone then, where _observe_or_why reports the one that fails
    return {path: prof for (path, _), prof in zip(picked, got, strict=True)}


def observe_column(arr: pa.Array, name: str, *, file: str, row_start: int) -> dict[str, FieldStats] | str:
    """The statistics one top-level column of a (non-text) batch gives: its path and those below it;
    or, for a column of a type driftline cannot observe, why (see unsupported_reason)."""
    ctx = _Ctx(file, row_start, None, False, exact_requested())
    reason = _observe_or_why(arr, name, ctx)
    return ctx.out if reason is None else reason


def _observe_or_why(arr: pa.Array, name: str, ctx: _Ctx) -> str | None:
    """Observe one top-level column into ctx, or leave ctx as it was and say why it cannot be.

    A column of a type with no driftline type, or one a pyarrow kernel cannot compute over,
    costs that column only: the caller reports it, and the batch's other columns are kept.
    """
    reason = unsupported_reason(arr.type)
    if reason is not None:
        return reason
    done, ctx.out = ctx.out, {}  # this column's paths apart, so a failure leaves nothing of it
    try:
        _observe(arr, paths.child(None, name), None, ctx)
    except pa.ArrowNotImplementedError as exc:
        return f"pyarrow cannot compute its statistics ({str(exc).splitlines()[0]})"
    else:
        done.update(ctx.out)
    finally:
        ctx.out = done
    return None


def _rows(rows: pa.Array | None, idx: int) -> int:
    return idx if rows is None else rows[idx].as_py()


def _first_valid(arr: pa.Array) -> int | None:
    if arr.null_count == len(arr):
        return None
    if arr.null_count == 0:
        return 0
    return pc.index(pc.is_valid(arr), True).as_py()


def _first_null(arr: pa.Array) -> int | None:
    if arr.null_count == 0:
        return None
    return pc.index(pc.is_null(arr), True).as_py()


def _take_rows(rows: pa.Array | None, mask: pa.Array) -> pa.Array:
    base = pa.array(range(len(mask)), pa.int64()) if rows is None else rows
    return base.filter(mask)


def _plain(arr: pa.Array) -> pa.Array:
    """arr as the plain array of its logical type: encodings and extension wrappers removed.

    The lattice (from_arrow) folds the same wrappers, so the type key comes out the same.
    Loops because wrappers nest: an extension over a dictionary, a dictionary of a view type.
    """
    while True:
        t = arr.type
        if pa.types.is_dictionary(t):  # values unwrapped first: no take kernel for view types (pyarrow 26)
            arr = _plain(arr.dictionary).take(arr.indices)
        elif isinstance(t, pa.Bool8Type):  # canonical bool8: int8 storage, 0 false, other values true
            arr = pc.cast(arr.storage, pa.bool_())
        elif isinstance(t, pa.BaseExtensionType):  # json, uuid, tensors, opaque, user types: their storage
            arr = arr.storage
        elif pa.types.is_run_end_encoded(t):
            arr = pc.run_end_decode(arr)
        elif pa.types.is_string_view(t) or pa.types.is_binary_view(t):
            arr = arr.cast(pa.large_string() if pa.types.is_string_view(t) else pa.large_binary())
        else:
            return arr


def _observe(arr: pa.Array, path: str, rows: pa.Array | None, ctx: _Ctx) -> None:
    shown = arr
    arr = _plain(arr)
    t = arr.type
    if pa.types.is_union(t):
        _observe_union(arr, path, rows, ctx)
        return
    if ctx.text_source and (pa.types.is_string(t) or pa.types.is_large_string(t)):
        _observe_text(arr, path, rows, ctx)
        return
    nulls = arr.null_count if not pa.types.is_null(t) else len(arr)
    nonnull = len(arr) - nulls
    samples: Samples = {}
    fn = _first_null(arr) if not pa.types.is_null(t) else (0 if len(arr) else None)
    if fn is not None:
        samples[NULL_SAMPLE] = (ctx.example(_rows(rows, fn), None),)
    if pa.types.is_null(t):
        ctx.out[path] = FieldStats(nulls=nulls, samples=samples)
        return
    key = from_arrow(t).shallow_key()
    fv = _first_valid(arr)
    if fv is not None:
        samples[type_sample(key)] = (ctx.example(_rows(rows, fv), _sample(shown, arr, fv)),)
    extra: Measured = {}
    if pa.types.is_struct(t):
        valid = pc.is_valid(arr)
        sub_rows = _take_rows(rows, valid) if arr.null_count else rows
        for i in range(t.num_fields):
            child = arr.field(i)
            if arr.null_count:
                child = child.filter(valid)
            _observe(child, paths.child(path, t.field(i).name), sub_rows, ctx)
    elif pa.types.is_map(t):
        # Seen as a list of its entries: list kernels on a MapArray abort the process
        # (pyarrow 26.0.1 list_parent_indices), and .keys/.items ignore a slice's offset.
        entry = pa.field("entries", pa.struct([t.key_field, t.item_field]), nullable=False)
        entries = arr.cast(pa.list_(entry))
        parents = pc.list_parent_indices(entries)
        sub_rows = parents if rows is None else rows.take(parents)
        flat = pc.list_flatten(entries)
        keys, items = flat.field(0), flat.field(1)
        extra["items"] = len(keys)
        _observe(keys, paths.map_part(path, "key"), sub_rows, ctx)
        _observe(items, paths.map_part(path, "value"), sub_rows, ctx)
    elif _is_list(t):
        flat = pc.list_flatten(arr)
        parents = pc.list_parent_indices(arr)
        sub_rows = parents if rows is None else rows.take(parents)
        extra["items"] = len(flat)
        if len(flat):
            _observe(flat, paths.element(path), sub_rows, ctx)
        else:
            _empty_items(path, ctx)
    elif pa.types.is_string(t) or pa.types.is_large_string(t):
        extra.update(_string_stats(arr, rows, ctx, samples, encoded_rows(shown), path))
    elif pa.types.is_binary(t) or pa.types.is_large_binary(t) or pa.types.is_fixed_size_binary(t):
        if nonnull:
            fixed = pa.types.is_fixed_size_binary(t)
            extra["max_length"] = t.byte_width if fixed else _max_or_zero(pc.binary_length(arr))
    elif pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t):
        extra.update(_number_stats(arr, t))
    elif pa.types.is_temporal(t) and not pa.types.is_duration(t) and nonnull:
        # A duration has no extremes here: its text does not order, and a number would
        # mix units with the field's other types when observations merge.
        lo, hi = _min_max(arr)
        extra["minimum"], extra["maximum"] = _temporal_text(lo), _temporal_text(hi)
    ctx.out[path] = FieldStats(
        types={key: nonnull} if nonnull else {}, nulls=nulls, samples=dict(sorted(samples.items())), **extra
    )


def _sample(shown: pa.Array, plain: pa.Array, i: int) -> Any:
    """The value at i as _scalar shows it; a UUID as its canonical text rather than 16 raw bytes."""
    if isinstance(shown.type, pa.UuidType) and shown[i].is_valid:
        return str(shown[i].as_py())  # source: RFC 9562 section 4 (8-4-4-4-12 hex digits)
    return _scalar(plain[i])


def _observe_union(arr: pa.UnionArray, path: str, rows: pa.Array | None, ctx: _Ctx) -> None:
    """A union column: each member's values are observed at the union's own path and merged,
    as a JSON field holding sometimes a number, sometimes a string is. A union has no nulls
    of its own: a null is a null of the member that holds it."""
    t = arr.type
    dense = t.mode == "dense"
    codes = _union_buffer(arr, 1, pa.int8())
    offsets = _union_buffer(arr, 2, pa.int32()) if dense else None
    parts: list[dict[str, FieldStats]] = [{path: FieldStats()}]
    for i, code in enumerate(t.type_codes):
        mask = pc.equal(codes, pa.scalar(code, codes.type))
        if not pc.any(mask).as_py():
            continue
        child = arr.field(i)
        values = child.take(offsets.filter(mask)) if offsets is not None else child.filter(mask)
        sub = _Ctx(ctx.file, ctx.row_start, ctx.lines, ctx.text_source, ctx.exact)
        _observe(values, path, _take_rows(rows, mask), sub)
        parts.append(sub.out)
    ctx.out.update(merge_all(parts))


def _union_buffer(arr: pa.UnionArray, i: int, t: pa.DataType) -> pa.Array:
    """A union's type codes (i=1) or dense offsets (i=2) for its own rows: .type_codes and
    .offsets start at the buffer's first value even when the array is a slice (pyarrow 26)."""
    whole = pa.Array.from_buffers(t, arr.offset + len(arr), [None, arr.buffers()[i]])
    return whole.slice(arr.offset, len(arr))


def _empty_items(path: str, ctx: _Ctx) -> None:
    # Lists that are always empty: the element path exists with nothing known about it.
    ctx.out.setdefault(paths.element(path), FieldStats())


def _is_list(t: pa.DataType) -> bool:
    return (
        pa.types.is_list(t)
        or pa.types.is_large_list(t)
        or pa.types.is_fixed_size_list(t)
        or pa.types.is_list_view(t)
        or pa.types.is_large_list_view(t)
    )


def _display_type(t: pa.DataType) -> pa.DataType:
    """t with every temporal leaf as string: Arrow formats any value, Python's datetime cannot."""
    if pa.types.is_temporal(t):
        return pa.string()
    if pa.types.is_struct(t):
        fields = [t.field(i) for i in range(t.num_fields)]
        return pa.struct([f.with_type(_display_type(f.type)) for f in fields])
    if pa.types.is_map(t):
        return pa.map_(
            t.key_field.with_type(_display_type(t.key_type)), t.item_field.with_type(_display_type(t.item_type))
        )
    if pa.types.is_list(t) or pa.types.is_large_list(t) or pa.types.is_fixed_size_list(t):
        item = t.value_field.with_type(_display_type(t.value_type))
        if pa.types.is_fixed_size_list(t):
            return pa.list_(item, t.list_size)
        return pa.large_list(item) if pa.types.is_large_list(t) else pa.list_(item)
    return t


def _scalar(s: pa.Scalar) -> Any:
    if pa.types.is_duration(s.type) and s.is_valid:
        # One form for every unit: a timedelta cannot hold nanoseconds, and its text differs by size.
        return f"{s.value} {s.type.unit}"
    try:
        v = s.as_py()
    except (ValueError, OverflowError, pa.ArrowException):
        # Out of Python's datetime range (year 1..9999, microseconds): let Arrow write it.
        try:
            return pa.array([s], s.type).cast(_display_type(s.type)).to_pylist()[0]
        except (ValueError, OverflowError, TypeError, pa.ArrowException):
            return f"<{s.type} value>"
    if isinstance(v, bytes):
        return v.decode("utf-8", "backslashreplace")
    if isinstance(v, dict | list | tuple | str | int | float | bool) or v is None:
        return v if not isinstance(v, tuple) else list(v)
    return str(v)


def _max_or_zero(arr: pa.Array) -> int:
    m = pc.max(arr).as_py()
    return int(m) if m is not None else 0


def _min_max(arr: pa.Array) -> tuple[Any, Any]:
    mm = pc.min_max(arr)
    return mm["min"], mm["max"]


def _temporal_text(s: pa.Scalar) -> str | None:
    if not s.is_valid:
        return None
    try:
        v = s.as_py()
        return v.isoformat() if hasattr(v, "isoformat") else str(v)
    except (ValueError, OverflowError, pa.ArrowException):
        # Out of Python's datetime range; str(s) would call as_py again. Arrow's text
        # has a space where isoformat has 'T'; align them so extremes still order as text.
        try:
            return pc.cast(s, pa.string()).as_py().replace(" ", "T", 1)
        except pa.ArrowException:
            return f"<{s.type} value>"


def _number_stats(arr: pa.Array, t: pa.DataType) -> Measured:
    out: Measured = {}
    if arr.null_count == len(arr):
        return out
    work = arr
    if pa.types.is_decimal(t) and t.bit_width < 128:  # decimal32/64 have no min_max kernel (pyarrow 26)
        work = arr.cast(pa.decimal128(t.precision, t.scale))
    if pa.types.is_floating(t):
        if pa.types.is_float16(t):
            work = arr.cast(pa.float32())
        work = pc.if_else(pc.is_nan(work), None, work)
    lo, hi = _min_max(work)
    if lo.is_valid:
        lv, hv = lo.as_py(), hi.as_py()
        if pa.types.is_decimal(t):
            lv, hv = float(lv), float(hv)
        out["minimum"], out["maximum"] = lv, hv
    if pa.types.is_integer(t) and t.bit_width == 64:
        big = (
            pc.greater(arr, pa.scalar(SAFE_INT, t))
            if pa.types.is_unsigned_integer(t)
            else pc.or_(pc.greater(arr, pa.scalar(SAFE_INT, t)), pc.less(arr, pa.scalar(-SAFE_INT, t)))
        )
        out["unsafe_ints"] = int(pc.sum(big).as_py() or 0)
    elif pa.types.is_decimal(t) and t.scale == 0:  # integers too: float64 holds them only up to 2**53
        out["unsafe_ints"] = pc.sum(pc.greater(pc.abs(arr), pa.scalar(SAFE_INT, pa.int64()))).as_py() or 0
    return out


def _string_stats(
    arr: pa.Array,
    rows: pa.Array | None,
    ctx: _Ctx,
    samples: Samples,
    encoded: pa.DictionaryArray | None = None,
    path: str | None = None,
) -> Measured:
    if arr.null_count == len(arr):
        return {}
    if ctx.exact:
        return _string_stats_reference(arr, rows, ctx, samples)
    # A top-level plain string column was classified with its batch's others (arr is that column then).
    prof = ctx.profiles.pop(path, None) if path is not None and encoded is None else None
    if prof is None:
        prof = string_profile(arr, SAMPLES_PER_KEY, encoded)
    # Three examples per class once any lossy class repeats, else the first of each (as before).
    many = any(prof.counts.get(c, 0) > 1 for c in _LOSSY_CLASSES)
    for cls, firsts in prof.first.items():
        picks = firsts if many and prof.counts[cls] > 1 else firsts[:1]
        samples[class_sample(cls)] = tuple(ctx.example(_rows(rows, j), arr[j].as_py()) for j in picks)
    return {
        "classes": dict(prof.counts),
        "max_length": prof.max_length,
        "int_digits": prof.int_digits,
        "frac_digits": prof.frac_digits,
        "leap_seconds": prof.leap_seconds,
        "lowercase_rfc3339": prof.lowercase_rfc3339,
    }


def _string_stats_reference(arr: pa.Array, rows: pa.Array | None, ctx: _Ctx, samples: Samples) -> Measured:
    """textclass.classify over every value: what string_profile must equal (the exact switch)."""
    scan = classify(arr)
    masks = class_masks(arr) if any(scan.counts.get(c, 0) > 1 for c in _LOSSY_CLASSES) else {}
    for cls, first in scan.first_index.items():
        picks = pa_indices(masks[cls], SAMPLES_PER_KEY) if cls in masks and scan.counts[cls] > 1 else [first]
        samples[class_sample(cls)] = tuple(ctx.example(_rows(rows, j), arr[j].as_py()) for j in picks)
    return {
        "classes": dict(scan.counts),
        "max_length": _max_or_zero(pc.utf8_length(arr)),
        "int_digits": scan.int_digits,
        "frac_digits": scan.frac_digits,
        "leap_seconds": scan.leap_seconds,
        "lowercase_rfc3339": scan.lowercase_rfc3339,
    }


_INT64_DIGITS = 19  # 9223372036854775807: the decimal class's integers start here
_INTEGER_TEXT = r"^\s*-?[0-9]+\s*$"


def _integer_text(arr: pa.Array) -> pa.Array:
    return pc.fill_null(pc.match_substring_regex(arr, _INTEGER_TEXT), False)


def _firsts(arr: pa.Array, rows: pa.Array | None, mask: pa.Array) -> list[tuple[int, Any]]:
    """The first value where mask holds: a type inferred from text keeps one example, as below."""
    return [(_rows(rows, i), arr[i].as_py()) for i in pa_indices(mask, 1)]


def _big_integers(arr: pa.Array, rows: pa.Array | None, ctx: _Ctx, types: dict[str, int], samples: Samples) -> int:
    """Integer literals of the decimal class (19 digits or more: past int64 or near it) as a type
    of their own, decimal(N,0) with N the literal's digits, as a JSON literal is (observe.records),
    never float64, which rounds them (RFC 8259 section 6 leaves integer length open; IEEE 754
    binary64 holds 15 to 17 digits).  Returns how many there were."""
    mask = pc.and_(class_masks(arr)["decimal"], _integer_text(arr))
    n = mask.true_count
    if n:
        digits = pc.utf8_length(pc.utf8_ltrim(pc.utf8_trim_whitespace(arr), characters="-"))
        digits = pc.if_else(mask, digits, None)
        for d in sorted(pc.unique(digits.drop_null()).to_pylist()):
            at = pc.fill_null(pc.equal(digits, d), False)
            key = f"decimal({d},0)"
            types[key] = types.get(key, 0) + at.true_count
            samples[type_sample(key)] = tuple(ctx.example(r, v) for r, v in _firsts(arr, rows, at))
    return n


def _observe_text(arr: pa.Array, path: str, rows: pa.Array | None, ctx: _Ctx) -> None:
    """A text column: types are inferred from content classes; empty and null tokens are null."""
    samples: Samples = {}
    stats = _string_stats(arr, rows, ctx, samples, None, path)
    classes: dict[str, int] = stats.get("classes", {})
    types: dict[str, int] = {}
    nulls = arr.null_count
    null_examples: list[Example] = []
    if arr.null_count:
        fn = _first_null(arr)
        assert fn is not None
        null_examples.append(ctx.example(_rows(rows, fn), None))
    for cls, n in classes.items():
        inferred = TEXT_CLASS_TYPE[cls]
        if inferred is None:
            nulls += n
            null_examples.extend(samples.get(class_sample(cls), ()))
        elif cls == "decimal" and stats.get("int_digits", 0) >= _INT64_DIGITS:
            n -= _big_integers(arr, rows, ctx, types, samples)
            if n:
                types[inferred] = types.get(inferred, 0) + n
                samples[type_sample(inferred)] = tuple(
                    ctx.example(r, v)
                    for r, v in _firsts(arr, rows, pc.and_(class_masks(arr)["decimal"], pc.invert(_integer_text(arr))))
                )
        else:
            types[inferred] = types.get(inferred, 0) + n
            first = samples.get(class_sample(cls), ())[:1]
            key = type_sample(inferred)
            samples[key] = tuple(sorted(set(samples.get(key, ())) | set(first)))[:SAMPLES_PER_KEY]
    if null_examples:
        samples[NULL_SAMPLE] = tuple(sorted(set(null_examples)))[:SAMPLES_PER_KEY]
    stats["text"] = len(arr) - arr.null_count
    ctx.out[path] = FieldStats(
        types=dict(sorted(types.items())), nulls=nulls, samples=dict(sorted(samples.items())), **stats
    )
