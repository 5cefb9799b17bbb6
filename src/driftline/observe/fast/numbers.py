"""Columns of plain integers and point decimals, classified without a pass per class.

Nothing before zero_padded in textclass.CLASSES takes a digit string, and a value shaped
-?[0-9]+(.[0-9]+)? is zero_padded (a '0' and another digit before the point), an integer (no
point, within int64: up to 18 digits always, 19 digits when the text is at most the bound's)
or a decimal (a point, or an integer beyond int64, at most 76 digits in all); past 76 digits
it would be a float.  So when every value of a column has that shape, lengths, the first
characters and the position of the point give textclass's verdict; ids and amounts then
cost a few byte operations instead of class_masks' ten passes.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

from driftline.observe.textclass import CLASSES, INT64_MAX, INT64_MIN, MAX_DECIMAL_DIGITS

_PLAIN = re.compile(r"-?[0-9]+(?:\.[0-9]+)?")  # fullmatch, as textclass
_INTEGER_DIGITS = 18  # at most 18 digits always fits int64; 19 digits fit up to the bound
_DIGITS = b"0123456789"


@dataclass(frozen=True, slots=True)
class Numbers:
    masks: dict[str, pa.Array]  # one per class of CLASSES, as textclass.class_masks gives them
    int_digits: int
    frac_digits: int


def number_masks(values: pa.Array, raw: bytes) -> Numbers | None:
    """textclass's masks of a column whose every value is a plain number, else None.

    raw is valuebytes.value_bytes(values).  The shape is checked with byte counts, not a regular
    expression: besides digits only '-' and '.' occur; there are as many '-' as values that
    start with one and as many '.' as values that hold one (so each holds at most one of
    each, the '-' first); and each value has a digit, and one on each side of its point.
    A null value's bytes can only make the counts disagree, which answers None.
    """
    if len(values) == values.null_count:
        return None
    first = values[0 if values.null_count == 0 else pc.index(pc.is_valid(values), True).as_py()].as_py()
    if not _PLAIN.fullmatch(first):
        return None
    rest = raw.translate(None, _DIGITS)
    if rest.translate(None, b"-."):
        return None
    length = pc.binary_length(values)
    body = length  # without the sign
    if n_minus := rest.count(b"-"):
        minus = pc.starts_with(values, "-")
        if minus.true_count != n_minus:
            return None
        body = pc.subtract(length, pc.cast(minus, length.type))
    if n_point := rest.count(b"."):
        point = pc.find_substring(values, ".")  # -1 without a point
        has_point = pc.greater_equal(point, 0)
        if has_point.true_count != n_point:
            return None
        digits = pc.subtract(body, pc.cast(has_point, length.type))
        # a digit before the point (after the sign) and one after it
        sign = pc.subtract(length, body)
        inside = pc.and_(pc.greater(point, sign), pc.less(point, pc.subtract(length, 1)))
        if pc.or_(pc.invert(has_point), inside).false_count:
            return None
    else:
        digits = body
    extremes = pc.min_max(digits)
    most = extremes["max"].as_py() or 0
    if (extremes["min"].as_py() or 0) < 1 or most > MAX_DECIMAL_DIGITS:
        return None
    before = body if not n_point else pc.if_else(has_point, pc.subtract(point, pc.subtract(length, body)), body)
    # A '0' first (after the sign) and another digit before the point: zero_padded.
    none = pa.repeat(False, len(values))
    lead = pc.starts_with(values, "0")
    if n_minus:
        lead = pc.or_(lead, pc.starts_with(values, "-0"))
    padded = pc.fill_null(pc.and_(lead, pc.greater_equal(before, 2)), False) if lead.true_count else none
    whole = pc.invert(has_point) if n_point else None  # None: every value
    if padded.true_count:
        whole = pc.and_not(pc.is_valid(values) if whole is None else whole, padded)
    short = pc.less_equal(digits, _INTEGER_DIGITS)
    integer = short if whole is None else pc.and_(whole, short)
    if most > _INTEGER_DIGITS:
        # 19 digits without a leading zero: as long as the bound, so the text compares as the number.
        at_bound = pc.equal(digits, _INTEGER_DIGITS + 1)
        if whole is not None:
            at_bound = pc.and_(whole, at_bound)
        fits = pc.less_equal(values, str(INT64_MAX))
        if n_minus:
            fits = pc.if_else(minus, pc.less_equal(values, str(INT64_MIN)), fits)
        integer = pc.or_(integer, pc.and_(at_bound, fits))
    integer = pc.fill_null(integer, False)
    masks = {cls: none for cls in CLASSES}
    masks["zero_padded"] = padded
    masks["integer"] = integer
    decimal = pc.and_not(pc.is_valid(values), integer)
    masks["decimal"] = pc.and_not(decimal, padded) if padded.true_count else decimal
    if not n_point:
        return Numbers(masks, most, 0)
    after = pc.if_else(has_point, pc.subtract(pc.subtract(length, point), 1), 0)
    return Numbers(masks, pc.max(before).as_py() or 0, pc.max(after).as_py() or 0)
