"""Apply the cast rules to raw Arrow batches with pyarrow.compute, counting what each rule does.

apply() takes one batch of variant columns (raw.py) and returns a batch of exactly the
recommended Arrow schema. Each rule's step is a real cast: a string is judged by the
grammar of the classes the rule accepts and then cast by pyarrow; a value the cast
rejects becomes null and is counted 'unparsed'. The Tally it fills holds, per field path
and cause, the counts the recommendation predicted from the profile alone.

>>> import driftline, tempfile, pathlib
>>> from driftline.recommendation.raw import raw_batches
>>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"v": 1.5}\\n{"v": "n/a"}\\n')
>>> rec = driftline.scan(d).recommend()
>>> tally = Tally()
>>> out = [apply(b.batch, rec, tally=tally) for b in raw_batches(d)]
>>> out[0].column("v").to_pylist(), tally.counts["v"]
([1.5, None], {'null_token': 1, 'nulled': 1})
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.lattice import DType, to_arrow
from driftline.core.words import count
from driftline.observe import textclass as tc
from driftline.observe.fast.strprofile import exact_requested
from driftline.recommendation.plan import FieldPlan, Recommendation, arrow_field, arrow_type, target_schema
from driftline.recommendation.raw import TEXT, json_text, jsonable, plain_value

SAFE_INT = 2**53 - 1  # RFC 7493 §2.2
_UNIT_DIGITS = {"s": 0, "ms": 3, "us": 6, "ns": 9}
_CLASS_RE = {
    "date": tc.DATE_RE,
    "timestamp_rfc3339": tc.TIMESTAMP_RFC3339_RE,
    "timestamp_offset": tc.TIMESTAMP_OFFSET_RE,
    "timestamp_local": tc.TIMESTAMP_LOCAL_RE,
}
# Measured on the cast's input and output, not taken from the classes: a positional numeral
# with a zero before another digit, which no number's text has (a float form such as 00e5 is
# read for its value alone); and an input that is not infinity (or zero) itself.
_LEADING_ZERO = r"^-?0[0-9]+(?:\.[0-9]+)?$"
_SPECIAL = r"^-?[IiNn]"
_NONZERO_MANTISSA = r"^-?[0-9]*\.?[0-9]*[1-9]"
_ZONED = ("timestamp_rfc3339", "timestamp_offset")
_TOKENS = pa.array(sorted(tc.NULL_TOKENS), pa.string())
_NESTED = ("struct", "list", "map")


@dataclass(frozen=True, slots=True)
class Touched:
    """The values one cause touched at one path in one batch: their rows and raw values."""

    path: str
    cause: str
    rows: pa.Array  # int64: the batch rows holding the values (a list's items name their row)
    raw: pa.Array  # the values as they arrived, before the cast


@dataclass
class Tally:
    """Counts measured while casting: path → cause → count.

    'nulled' is measured apart from the causes: values that were not null before the
    cast and are null after it. With keep, each counted value is kept too (`touched`),
    with the batch row it sits in, for a quarantine.
    """

    counts: dict[str, dict[str, int]] = field(default_factory=dict)
    keep: bool = False
    touched: list[Touched] = field(default_factory=list)
    # The batch row of each position of the array being cast (None: the batch itself);
    # a list's or map's items push their parents' rows.
    _rows: list[pa.Array] = field(default_factory=list)

    def add(self, path: str, cause: str, n: int) -> None:
        if n:
            per = self.counts.setdefault(path, {})
            per[cause] = per.get(cause, 0) + int(n)

    def mark(self, path: str, cause: str, mask: pa.Array, raw: pa.Array) -> None:
        """Count the values where mask is true, and keep them (with keep)."""
        mask = pc.fill_null(mask, False)
        n = _true(mask)
        self.add(path, cause, n)
        if self.keep and n:
            where = pc.indices_nonzero(mask)
            rows = self._rows[-1].take(where) if self._rows else pc.cast(where, pa.int64())
            self.touched.append(Touched(path, cause, rows, raw.filter(mask)))

    def push_rows(self, positions: pa.Array) -> None:
        """The items about to be cast sit in these positions of the current array."""
        positions = pc.cast(positions, pa.int64())
        self._rows.append(self._rows[-1].take(positions) if self._rows else positions)

    def pop_rows(self) -> None:
        self._rows.pop()

    def get(self, path: str, cause: str) -> int:
        return self.counts.get(path, {}).get(cause, 0)


class SchemaMismatch(ValueError):
    """The data holds a kind the recommendation never saw (the profile is of other data)."""


# -- small helpers ----------------------------------------------------------------------------


def _true(mask: pa.Array) -> int:
    return int(pc.sum(pc.cast(mask, pa.int64())).as_py() or 0) if len(mask) else 0


def _forms(variant: pa.Array) -> dict[str, pa.Array]:
    """The children of a variant, with the variant's own nulls applied."""
    if not isinstance(variant, pa.StructArray) or not variant.type.num_fields:
        return {}
    return {variant.type.field(i).name: child for i, child in enumerate(variant.flatten())}


def _valid_any(forms: dict[str, pa.Array], n: int) -> pa.Array:
    out = pa.repeat(False, n)
    for arr in forms.values():
        out = pc.or_(out, pc.is_valid(arr))
    return out


def _null_where(arr: pa.Array, mask: pa.Array) -> pa.Array:
    return pc.if_else(mask, pa.nulls(len(arr), arr.type), arr)


def _try_cast(values: pa.Array, target: pa.DataType) -> pa.Array:
    """pc.cast, with the values it rejects as null (found by bisecting the failing range)."""
    try:
        return pc.cast(values, target)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    bad: list[int] = []
    stack = [(0, len(values))]
    while stack:
        lo, hi = stack.pop()
        try:
            pc.cast(values.slice(lo, hi - lo), target)
            continue
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            pass
        if hi - lo == 1:
            bad.append(lo)
        else:
            mid = (lo + hi) // 2
            stack += [(lo, mid), (mid, hi)]
    mask = pc.is_in(pa.array(range(len(values)), pa.int64()), value_set=pa.array(bad, pa.int64()))
    return pc.cast(_null_where(values, mask), target)


def _accepted(arr: pa.Array, classes: Iterable[str]) -> pa.Array:
    """Values of the classes a rule parses, exactly as the scan classed them (textclass.class_masks)."""
    wanted = set(classes)
    out = pa.repeat(False, len(arr))
    if not wanted:
        return out
    for name, mask in tc.class_masks(arr).items():
        if name in wanted:
            out = pc.or_(out, mask)
    return out


def _number_changes(arr: pa.Array, out: pa.Array, path: str, tally: Tally, *, plain: bool = False) -> None:
    """Count what a number cast did beyond parsing: leading zeros dropped, values beyond float64.

    plain: every value takes a plain form (_proven): no numeral with a leading zero, so none
    lost a zero nor names infinity, and only the zeros' texts need reading."""
    if not plain:
        parsed = pc.is_valid(out)
        zeros = pc.fill_null(pc.match_substring_regex(arr, _LEADING_ZERO), False)
        tally.mark(path, "leading_zeros", pc.and_(parsed, zeros), arr)
    if not pa.types.is_floating(out.type):
        return
    if plain:
        inf = pc.fill_null(pc.is_inf(out), False)
        zero = pc.fill_null(pc.equal(out, 0.0), False)
        if zero.true_count:  # the regex on the zeros alone, its verdicts put back in place
            zero = pc.replace_with_mask(zero, zero, pc.match_substring_regex(arr.filter(zero), _NONZERO_MANTISSA))
        tally.mark(path, "out_of_range", pc.or_(inf, zero), arr)
        return
    finite_text = pc.invert(pc.fill_null(pc.match_substring_regex(arr, _SPECIAL), False))
    inf = pc.and_(pc.fill_null(pc.is_inf(out), False), finite_text)
    nonzero = pc.fill_null(pc.match_substring_regex(arr, _NONZERO_MANTISSA), False)
    zero = pc.and_(pc.fill_null(pc.equal(out, 0.0), False), nonzero)
    tally.mark(path, "out_of_range", pc.or_(inf, zero), arr)


def _matches(arr: pa.Array, classes: Iterable[str]) -> pa.Array:
    body = "|".join(f"(?:{_CLASS_RE[c]})" for c in sorted(classes) if c in _CLASS_RE)
    if not body:
        return pa.repeat(False, len(arr))
    return pc.fill_null(pc.match_substring_regex(arr, f"^(?:{body})$"), False)


# -- plain forms: proof without the class patterns ----------------------------------------------
# Stricter forms than textclass's classes, each wholly inside one class (and outside the
# classes before it): a column whose values all take one of them needs neither the class
# masks nor the normalising steps. A value that takes none sends the column the full way.
_DAY = r"[0-9]{4}-(?:0[1-9]|1[0-2])-(?:0[1-9]|[12][0-9]|3[01])"  # textclass's full-date
_CLOCK = r"(?:[01][0-9]|2[0-3]):[0-5][0-9]:[0-5][0-9]"  # no leap second
_PLAIN = {
    "integer": r"-?(?:0|[1-9][0-9]{0,17})",  # at most 18 digits: within int64
    "decimal": r"-?(?:0|[1-9][0-9]*)\.[0-9]+",  # at most 76 digits: checked apart
    "boolean": tc.BOOLEAN_RE,
}
_DECIMAL_CHARS = tc.MAX_DECIMAL_DIGITS + 1  # a point, and at most 76 digits (a minus sign: one fewer)


def _plain_forms(values: pa.Array, forms: Iterable[str]) -> pa.Array:
    return pc.fill_null(pc.match_substring_regex(values, "^(?:" + "|".join(f"(?:{f})" for f in forms) + ")$"), False)


def _stamp_form(t: DType) -> tuple[str, str]:
    """The class and plain form of the date-times a timestamp cast takes as they are: RFC 3339 in
    upper case (a zone asked) or local ones (none asked), no leap second, no digits past the unit."""
    assert t.unit is not None
    u = _UNIT_DIGITS[t.unit]
    fraction = rf"(?:\.[0-9]{{1,{u}}})?" if u else ""
    if t.tz:
        return "timestamp_rfc3339", rf"{_DAY}T{_CLOCK}{fraction}(?:Z|[+-](?:[01][0-9]|2[0-3]):[0-5][0-9])"
    return "timestamp_local", rf"{_DAY}[T ]{_CLOCK}{fraction}"


def _proven(arr: pa.Array, accept: Iterable[str], t: DType) -> pa.Array | None:
    """Per value, whether it is provably of a class in accept, in a plain form (false for nulls);
    None when no plain form applies. A timestamp's calendar is left to its cast."""
    wanted = set(accept)
    if t.name == "timestamp":
        cls, form = _stamp_form(t)
        return _plain_forms(arr, [form]) if cls in wanted else None
    forms = [_PLAIN[c] for c in sorted(wanted & set(_PLAIN))]
    if not forms and "date" not in wanted:
        return None
    hit = _plain_forms(arr, forms) if forms else pa.repeat(False, len(arr))
    if (
        "decimal" in wanted
        and hit.true_count
        and (pc.max(pc.binary_length(arr.filter(hit))).as_py() or 0) > _DECIMAL_CHARS
    ):
        return None
    if "date" in wanted:
        day = pc.and_not(_plain_forms(arr, [_DAY]), hit)
        if day.true_count:
            try:  # a real calendar day: what the date class asks of its shape
                pc.cast(arr.filter(day), pa.date32())
            except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
                return None
            hit = pc.or_(hit, day)
    return hit


def _all_proven(proven: pa.Array | None, arr: pa.Array) -> bool:
    valid = len(arr) - arr.null_count
    return proven is not None and (not valid or _true(pc.and_(proven, pc.is_valid(arr))) == valid)


def _plain_stamps(arr: pa.Array, t: DType) -> pa.Array | None:
    """_timestamps' result for values all in _stamp_form: one cast (None if a calendar day fails it)."""
    assert t.unit is not None
    try:
        parsed = pc.cast(arr, pa.timestamp(t.unit, "UTC" if t.tz else None))
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None
    return pc.cast(parsed, to_arrow(t))


# -- strings ----------------------------------------------------------------------------------


def _timestamps(arr: pa.Array, ok: pa.Array, plan: FieldPlan, t: DType, tally: Tally) -> pa.Array:
    """Cast timestamp-shaped strings; leap seconds, lower case and long fractions first."""
    assert t.unit is not None
    path, raw = plan.path, arr
    rfc = _matches(arr, ["timestamp_rfc3339"])
    lower = pc.and_(rfc, pc.fill_null(pc.match_substring_regex(arr, "[tz]"), False))
    arr = pc.if_else(lower, pc.ascii_upper(arr), arr)
    stamp = _matches(arr, ["timestamp_rfc3339", "timestamp_offset", "timestamp_local"])
    leap = pc.and_(stamp, pc.fill_null(pc.equal(pc.utf8_slice_codeunits(arr, 17, 19), "60"), False))
    arr = pc.if_else(leap, pc.utf8_replace_slice(arr, 17, 19, "59"), arr)
    u = _UNIT_DIGITS[t.unit]
    # Digits past the unit are cut; a value changes only when one of them is not 0.
    cut = pc.and_(stamp, pc.fill_null(pc.match_substring_regex(arr, rf"\.[0-9]{{{u}}}[0-9]*[1-9]"), False))
    arr = pc.replace_substring_regex(arr, rf"(\.[0-9]{{{u}}})[0-9]+" if u else r"\.[0-9]+", r"\1" if u else "")
    zoned = _matches(arr, _ZONED)
    local = pc.and_(ok, pc.invert(zoned))
    out_type = to_arrow(t)
    naive = _try_cast(_null_where(arr, pc.invert(local)), pa.timestamp(t.unit))
    if t.tz:
        instants = _try_cast(_null_where(arr, pc.invert(pc.and_(ok, zoned))), pa.timestamp(t.unit, "UTC"))
        naive_valid = pc.is_valid(naive)
        naive = pc.assume_timezone(naive, t.tz, ambiguous="earliest", nonexistent="earliest")
        tally.mark(path, "assumed_zone", naive_valid, raw)
        out = pc.coalesce(pc.cast(instants, out_type), pc.cast(naive, out_type))
    else:
        out = pc.cast(naive, out_type)
    parsed = pc.is_valid(out)
    tally.mark(path, "lowercase", pc.and_(lower, parsed), raw)
    tally.mark(path, "leap_second", pc.and_(leap, parsed), raw)
    tally.mark(path, "truncated", pc.and_(cut, parsed), raw)
    return out


def _strings(arr: pa.Array, source: str, plan: FieldPlan, tally: Tally) -> pa.Array:
    """Strings (source 'string') or CSV cells ('text') by the rule's grammar, then cast.

    The fast way (not DRIFTLINE_EXACT): values that all take a plain form of an accepted class
    (_proven) hold no null token and no blank, and need neither the class masks nor the
    normalising steps; the counts and values are the same (tests/differential)."""
    t = plan.target
    path, params = plan.path, plan.params
    out_type = to_arrow(t)
    accept = params.get("accept", [])
    proven = _proven(arr, accept, t) if t.name != "string" and not exact_requested() else None
    clean = _all_proven(proven, arr)  # no token, no blank: their steps change nothing
    if not clean:
        trimmed = pc.utf8_trim_whitespace(arr)
        if params.get("tokens", {}).get(source) == "null":
            token = pc.fill_null(pc.is_in(pc.ascii_lower(trimmed), value_set=_TOKENS), False)
            tally.mark(path, "null_token", token, arr)
            arr = _null_where(arr, token)
    if t.name == "string":
        return arr if arr.type == out_type else pc.cast(arr, out_type)
    if not clean and source == "string" and params.get("empty") == "null":
        blank = pc.fill_null(pc.equal(pc.utf8_length(trimmed), 0), False)
        tally.mark(path, "empty", pc.and_(blank, pc.is_valid(arr)), arr)
        arr = _null_where(arr, blank)
    plain = clean or _all_proven(proven, arr)
    if plain and t.name == "timestamp":
        out = _plain_stamps(arr, t)
        if out is not None:
            return out  # nothing to count: every value parsed as it is
        plain = False
    ok = pc.is_valid(arr) if plain else pc.and_(pc.is_valid(arr), _accepted(arr, accept))
    if t.name == "timestamp":
        out = _timestamps(arr, ok, plan, t, tally)
    else:
        out = _try_cast(arr if plain else _null_where(arr, pc.invert(ok)), out_type)
        if t.name.startswith(("int", "uint", "float")) or t.name == "decimal":
            _number_changes(arr, out, path, tally, plain=plain)
    tally.mark(path, "unparsed", pc.and_(pc.is_valid(arr), pc.is_null(out)), arr)
    return out


# -- typed values -----------------------------------------------------------------------------


def _typed(arr: pa.Array, key: str, plan: FieldPlan, tally: Tally) -> pa.Array:
    t, path = plan.target, plan.path
    out_type = to_arrow(t)
    if t.name == "string":
        tally.mark(path, "as_text", pc.is_valid(arr), arr)
        return pc.cast(arr, out_type)
    src = arr.type
    if t.name.startswith("float") and pa.types.is_integer(src):
        beyond = pc.greater(pc.abs(pc.cast(arr, pa.decimal128(20, 0))), SAFE_INT)
        tally.mark(path, "unsafe_int", beyond, arr)
        out = pc.cast(arr, out_type, safe=False)
        # Measured apart: how many really changed (2**53 + 2 survives, 2**53 + 1 does not).
        back = pc.cast(out, pa.decimal128(38, 0), safe=False)
        changed = pc.not_equal(back, pc.cast(arr, pa.decimal128(38, 0)))
        tally.add(path, "unsafe_int:changed", _true(pc.fill_null(changed, False)))
        return out
    if t.name.startswith("float") and pa.types.is_decimal(src) and src.scale == 0:
        # Integers as decimal(N,0) (JSON literals past uint64, or a Parquet column): as for int64.
        beyond = pc.greater(pc.abs(arr), pa.scalar(SAFE_INT, pa.int64()))
        tally.mark(path, "unsafe_int", beyond, arr)
        out = pc.cast(arr, out_type, safe=False)
        back = pc.cast(out, src, safe=False)
        tally.add(path, "unsafe_int:changed", _true(pc.fill_null(pc.not_equal(back, arr), False)))
        return out
    if t.name == "timestamp" and t.tz and (pa.types.is_date(src) or pa.types.is_timestamp(src) and not src.tz):
        naive = pc.cast(arr, pa.timestamp(t.unit))
        tally.mark(path, "assumed_zone", pc.is_valid(arr), arr)
        return pc.cast(pc.assume_timezone(naive, t.tz, ambiguous="earliest", nonexistent="earliest"), out_type)
    # decimal → float64 rounds by design (the 'rounded' effect); every other cast is safe.
    return pc.cast(arr, out_type, safe=not (t.name.startswith("float") and pa.types.is_decimal(src)))


# -- one plan ---------------------------------------------------------------------------------


def _scalar(plan: FieldPlan, forms: dict[str, pa.Array], n: int, tally: Tally) -> pa.Array:
    if plan.target.name == "null":  # only nulls were seen; a typed column of nulls stays null
        for key in ("string", TEXT):  # ... or tokens: a CSV column of 'n/a' maps them
            if key in forms and plan.params.get("tokens", {}).get("text" if key == TEXT else key) == "null":
                token = pc.is_in(pc.ascii_lower(pc.utf8_trim_whitespace(forms[key])), value_set=_TOKENS)
                tally.mark(plan.path, "null_token", token, forms[key])
        return pa.nulls(n)
    parts = []
    for key, arr in forms.items():
        if key in _NESTED:
            if arr.null_count == len(arr):  # the kind is in the batch's type, not in these rows
                continue
            raise SchemaMismatch(f"{plan.path}: a {key} value where the schema has {plan.target.key()}")
        if key in ("string", TEXT):
            parts.append(_strings(arr, "string" if key == "string" else "text", plan, tally))
        else:
            parts.append(_typed(arr, key, plan, tally))
    return pc.coalesce(*parts) if parts else pa.nulls(n, to_arrow(plan.target))


def _json_text(plan: FieldPlan, variant: pa.Array, tally: Tally) -> pa.Array:
    """The last resort: each value as its JSON text (the one step done in Python per value)."""
    tokens = plan.params.get("tokens", {}).get("text") == "null"
    out: list[str | None] = []
    nulled: list[bool] = []
    for v in jsonable(variant).to_pylist():
        cell = v.get(TEXT) if v else None
        nulled.append(cell is not None and tokens and cell.strip().lower() in tc.NULL_TOKENS)
        if nulled[-1] or v is None or all(x is None for x in v.values()):
            out.append(None)
        else:
            out.append(json_text(cell if cell is not None else plain_value(v)))
    arr = pa.array(out, pa.string())
    tally.mark(plan.path, "null_token", pa.array(nulled, pa.bool_()), variant)
    tally.mark(plan.path, "as_json_text", pc.is_valid(arr), variant)
    return arr


def _raw_variant(forms: dict[str, pa.Array], n: int) -> pa.Array:
    """Forms back as one variant array (what a quarantine shows as the raw value)."""
    if not forms:
        return pa.nulls(n, pa.struct([]))
    return pa.StructArray.from_arrays(list(forms.values()), names=list(forms))


def _offsets(lengths: pa.Array) -> pa.Array:
    counts = pc.fill_null(pc.cast(lengths, pa.int32()), 0)
    return pa.concat_arrays([pa.array([0], pa.int32()), pc.cumulative_sum(counts)])


def _list(plan: FieldPlan, forms: dict[str, pa.Array], n: int, tally: Tally) -> pa.Array:
    item_plan = plan.children[0]
    lst = forms.get("list", pa.nulls(n, pa.list_(pa.struct([]))))
    flat = _forms(pc.list_flatten(lst))
    parents = pc.list_parent_indices(lst)
    lengths = pc.list_value_length(lst)
    scalars = {k: a for k, a in forms.items() if k != "list"}
    if scalars:  # wrap_scalar_in_list
        for key in list(scalars):
            source = "string" if key == "string" else "text" if key == TEXT else None
            if source is None:
                continue
            arr, trimmed = scalars[key], pc.utf8_trim_whitespace(scalars[key])
            drop = pa.repeat(False, n)
            if plan.params.get("tokens", {}).get(source) == "null":
                token = pc.fill_null(pc.is_in(pc.ascii_lower(trimmed), value_set=_TOKENS), False)
                tally.mark(plan.path, "null_token", token, arr)
                drop = pc.or_(drop, token)
            if source == "string" and plan.params.get("empty") == "null":
                blank = pc.fill_null(pc.equal(pc.utf8_length(trimmed), 0), False)
                tally.mark(plan.path, "empty", blank, arr)
                drop = pc.or_(drop, blank)
            scalars[key] = _null_where(arr, drop)
        wrapped = _valid_any(scalars, n)
        tally.mark(plan.path, "wrapped", wrapped, _raw_variant(scalars, n))
        rows = pc.indices_nonzero(wrapped)
        keys = sorted(set(flat) | set(scalars))
        m = len(parents)
        merged = {}
        for k in keys:
            a = flat.get(k)
            b = scalars.get(k)
            typ = (a if a is not None else b).type  # type: ignore[union-attr]
            merged[k] = pa.concat_arrays(
                [
                    a if a is not None else pa.nulls(m, typ),
                    b.filter(wrapped) if b is not None else pa.nulls(len(rows), typ),
                ]
            )
        owners = pa.concat_arrays([pc.cast(parents, pa.int64()), pc.cast(rows, pa.int64())])
        order = pc.sort_indices(owners)
        flat = {k: a.take(order) for k, a in merged.items()}
        parents = owners.take(order)
        lengths = pc.if_else(wrapped, pa.scalar(1, lengths.type), lengths)
    n_items = int(pc.sum(pc.fill_null(pc.cast(lengths, pa.int64()), 0)).as_py() or 0)
    tally.push_rows(parents)
    try:
        items = _cast_forms(item_plan, flat, n_items, tally)
    finally:
        tally.pop_rows()
    _check_nulls(item_plan, items)
    valid = pc.is_valid(lengths)
    return pa.ListArray.from_arrays(_offsets(lengths), items, type=arrow_type(plan), mask=pc.invert(valid))


def _map(plan: FieldPlan, forms: dict[str, pa.Array], n: int, tally: Tally) -> pa.Array:
    key_plan, value_plan = plan.children
    m = forms.get("map")
    if m is None:
        return pa.nulls(n, arrow_type(plan))
    start, end = m.offsets[0].as_py(), m.offsets[-1].as_py()
    # (list_parent_indices aborts on a map in pyarrow 26: the owners come from the offsets)
    owners = pa.ListArray.from_arrays(pc.subtract(m.offsets, start), pa.nulls(end - start))
    tally.push_rows(pc.list_parent_indices(owners))
    try:
        keys = _cast(key_plan, m.keys.slice(start, end - start), tally)
        values = _cast(value_plan, m.items.slice(start, end - start), tally)
    finally:
        tally.pop_rows()
    _check_nulls(value_plan, values)
    offsets = pc.subtract(m.offsets, start)
    return pa.MapArray.from_arrays(offsets, keys, values, type=arrow_type(plan), mask=pc.is_null(m))


def _struct(plan: FieldPlan, forms: dict[str, pa.Array], n: int, tally: Tally) -> pa.Array:
    st = forms.get("struct")
    kids = _forms(st) if st is not None else {}
    present = pc.is_valid(st) if st is not None else pa.repeat(False, n)
    children = []
    for c in plan.children:
        child = _cast(c, kids[c.name], tally) if c.name in kids else _cast_forms(c, {}, n, tally)
        _check_nulls(c, child, present)
        children.append(child)
    return pa.StructArray.from_arrays(children, fields=[arrow_field(c) for c in plan.children], mask=pc.invert(present))


def _check_nulls(plan: FieldPlan, arr: pa.Array, where: pa.Array | None = None) -> None:
    """A not-null field must hold no null where its container holds a value."""
    if plan.nullable or not arr.null_count:
        return
    nulls = pc.is_null(arr) if where is None else pc.and_(pc.is_null(arr), where)
    if _true(nulls):
        raise SchemaMismatch(
            f"{plan.path}: {count(_true(nulls), 'null')} where the schema says not null; "
            "the data is not what the profile saw"
        )


def _cast_forms(plan: FieldPlan, forms: dict[str, pa.Array], n: int, tally: Tally) -> pa.Array:
    before = _valid_any(forms, n)
    name = plan.target.name
    if plan.rule == "keep_as_json_text":
        kids = {k: v for k, v in forms.items()}
        variant = (
            pa.StructArray.from_arrays(list(kids.values()), names=list(kids), mask=pc.invert(before))
            if kids
            else pa.nulls(n, pa.struct([]))
        )
        out = _json_text(plan, variant, tally)
    elif name == "struct":
        out = _struct(plan, forms, n, tally)
    elif name == "list":
        out = _list(plan, forms, n, tally)
    elif name == "map":
        out = _map(plan, forms, n, tally)
    else:
        out = _scalar(plan, forms, n, tally)
    tally.add(plan.path, "nulled", _true(pc.and_(before, pc.is_null(out))))
    return out


def _cast(plan: FieldPlan, variant: pa.Array, tally: Tally) -> pa.Array:
    return _cast_forms(plan, _forms(variant), len(variant), tally)


THREAD_MIN_ROWS = 4096  # smaller batches cast their columns one after another: threads would cost more
_POOL: dict[int, ThreadPoolExecutor] = {}  # by process: a forked worker has none of its parent's threads


def _pool() -> ThreadPoolExecutor:
    """Threads for the columns of a batch: pyarrow.compute releases the GIL while it works."""
    pid = os.getpid()
    if pid not in _POOL:
        _POOL.clear()
        _POOL[pid] = ThreadPoolExecutor(max_workers=min(4, os.cpu_count() or 1), thread_name_prefix="driftline-cast")
    return _POOL[pid]


def _merge(into: Tally, part: Tally) -> None:
    for path, per in part.counts.items():
        for cause, n in per.items():
            into.add(path, cause, n)
    into.touched.extend(part.touched)


def _column(batch: pa.RecordBatch, plan: FieldPlan, tally: Tally) -> pa.Array:
    names = batch.schema.names
    col = (
        _cast(plan, batch.column(plan.name), tally) if plan.name in names else _cast_forms(plan, {}, len(batch), tally)
    )
    _check_nulls(plan, col)
    return col


def apply(batch: pa.RecordBatch, rec: Recommendation, *, tally: Tally | None = None) -> pa.RecordBatch:
    """One raw batch (variant columns, raw.py) cast into exactly rec's Arrow schema.

    The columns are cast side by side on threads (not with DRIFTLINE_EXACT, nor for small
    batches), each into a tally of its own; the tallies are merged in column order, so the
    counts, the values kept and a failure are those of casting the columns one by one."""
    tally = tally if tally is not None else Tally()
    schema = target_schema(rec)
    if exact_requested() or len(rec.fields) < 2 or batch.num_rows < THREAD_MIN_ROWS or (os.cpu_count() or 1) < 2:
        columns = [_column(batch, plan, tally) for plan in rec.fields]
        return pa.RecordBatch.from_arrays(columns, schema=schema)
    parts = [Tally(keep=tally.keep) for _ in rec.fields]
    futures = [_pool().submit(_column, batch, plan, part) for plan, part in zip(rec.fields, parts, strict=True)]
    columns = []
    for future, part in zip(futures, parts, strict=True):
        try:
            columns.append(future.result())
        finally:  # a column that fails counts what it counted before failing, as one by one
            _merge(tally, part)
    return pa.RecordBatch.from_arrays(columns, schema=schema)
