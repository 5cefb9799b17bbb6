"""Vectorised classification of string values into content classes.

Every string column of every batch goes through :func:`classify`, so the
common path is a handful of ``pyarrow.compute`` passes over whole arrays
(trim, regex match, cast).  Python only touches single values when a bulk
calendar check of a temporal subset fails; it then bisects *that subset*
to find the offending values.

A value gets the first class in :data:`CLASSES` whose definition it meets:

==================== ==========================================================
empty                 length 0 or whitespace only (``str.isspace`` whitespace,
                      which is exactly Arrow's ``utf8_trim_whitespace`` set)
null_token            ``value.strip().lower() in NULL_TOKENS``
boolean               ``true`` / ``false`` in any letter case
zero_padded           :data:`ZERO_PADDED_RE` - digits with a leading zero before
                      another digit (``007``, ``-0012``, ``00.5``): codes such as
                      ZIP and FIPS codes, whose zeros no number keeps
integer               :data:`INTEGER_RE` and within int64 (-2**63 .. 2**63 - 1),
                      whatever its digit count
decimal               :data:`DECIMAL_RE` (point form, or an integer beyond
                      int64), at most 76 digits in all (decimal256's limit)
float                 :data:`FLOAT_RE` - the rest of what a person calls a
                      number and ``cast(float64)`` accepts
float_out_of_range    a ``float`` whose magnitude float64 cannot hold: it
                      rounds to infinity (``1e400``, ``3E4415``) or to zero
                      (``1e-400``) although the text is a finite, non-zero number
date                  :data:`DATE_RE` and a real calendar day
timestamp_rfc3339     :data:`TIMESTAMP_RFC3339_RE` (RFC 3339 section 5.6
                      ``date-time`` with the section 5.7 ranges) and a real day
timestamp_offset      :data:`TIMESTAMP_OFFSET_RE`: a zoned form pyarrow parses
                      that is not RFC 3339 (space separator, ``+hhmm``, ``+hh``)
timestamp_local       :data:`TIMESTAMP_LOCAL_RE`: no offset at all
text                  everything else
==================== ==========================================================

Which strings are ``zero_padded`` (decided here; the tests pin each case): an
optional ``-``, a ``0``, at least one more digit, then optionally a point and
digits.  So ``0``, ``-0``, ``0.5`` and ``-0.25`` are not (one zero before the point
is how a number is written: ``-0`` is the integer 0), ``00``, ``007``, ``-007``,
``00.5`` and ``0900`` are.  ``+0012`` is ``text``, like ``+12`` (int64 casts reject
a ``+``).  Float forms are not: ``0e5`` and ``00e5`` are ``float``, ``007.``
too - a number cast never keeps the text of a float form (``1e3`` becomes
1000.0), so a zero before one is part of that rewrite.  A number keeps none of a
``zero_padded`` value's leading zeros, so every cast of one to a number changes it.

Every pattern is matched in time linear in the value's length, by Python's ``re``
(no pattern can match a run of digits two ways, so a failed match backtracks
over each character at most a fixed number of times) and by RE2 (linear by design).

What pyarrow 26.0.1 ``pc.cast`` from string accepts (checked by running it;
the tests pin these facts):

* bool: ``true``/``false`` in *any* letter case (``True``, ``TRUE``,
  ``tRuE``), plus ``1``/``0``; no surrounding spaces, no ``t``/``yes``.  So
  the boolean class needs no normalisation before its cast.
* float64: ``1.``, ``.5``, ``-.5``, ``1e3``, ``1E+05``, ``1.e3``, ``00.5``,
  digit strings of any length, exponents of any length (``1e400`` -> inf),
  ``inf``/``infinity``/``nan`` in any letter case with an optional sign.  It
  also accepts a leading ``+`` (``+1.5``, ``+inf``), which this module leaves
  to ``text`` on purpose, like ``+42``.  It rejects spaces, ``1e``, ``.``,
  ``0x1F``, ``1_000`` and ``1,5``.
* int64 also takes ``0x1F`` (-> 31); the integer class does not, so hex
  strings are ``text``.
* date32 / timestamp: the year ``0000`` is accepted (so it is accepted here
  too, although Python's ``datetime`` cannot hold it).  Month and day are
  checked against the proleptic Gregorian calendar; hour 24, minute 60,
  second 60, offset hour 24 and offset minute 60 are rejected; lowercase
  ``t``/``z`` are rejected; unit ``us`` rejects more than 6 fraction digits.

Two things RFC 3339 allows but those casts reject are kept in their class and
normalised only for the validity check (a cast rule has to do the same):
leap seconds (``:60``, counted in ``ClassScan.leap_seconds``) and lowercase
``t``/``z`` (counted in ``ClassScan.lowercase_rfc3339``).  A third one is
fractions longer than microseconds (RFC 3339 has ``1*DIGIT``; Go's
RFC3339Nano and .NET's round-trip format write 9 and 7 digits): every
timestamp class accepts any number of fraction digits and checks validity on
the value cut to 6 digits, so casting such a value to unit ``us`` needs a
truncation step (which loses the sub-microsecond part).
"""

from __future__ import annotations

import calendar
import math
import re
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.stagetime import staged

__all__ = [
    "CLASSES",
    "NULL_TOKENS",
    "BOOLEAN_RE",
    "ZERO_PADDED_RE",
    "INTEGER_RE",
    "DECIMAL_RE",
    "FLOAT_RE",
    "DATE_RE",
    "TIMESTAMP_RFC3339_RE",
    "TIMESTAMP_OFFSET_RE",
    "TIMESTAMP_LOCAL_RE",
    "MAX_DECIMAL_DIGITS",
    "INT64_MAX",
    "INT64_MIN",
    "ClassScan",
    "classify",
    "class_masks",
    "class_of",
    "plain_numerals",
    "digit_counts",
    "max_digits",
]

CLASSES: tuple[str, ...] = (
    "empty",
    "null_token",
    "boolean",
    "zero_padded",
    "integer",
    "decimal",
    "float",
    "float_out_of_range",
    "date",
    "timestamp_rfc3339",
    "timestamp_offset",
    "timestamp_local",
    "text",
)

#: Compared with ``value.strip().lower()``.
NULL_TOKENS: frozenset[str] = frozenset({"null", "none", "nil", "na", "n/a", "#n/a", "-", "--", "?"})

# The patterns below are written *unanchored* and only with constructs that
# mean the same in RE2 (pyarrow) and in Python's ``re``: ASCII classes such as
# [0-9] (never \d, which is Unicode-aware in ``re``) and explicit [Tt]-style
# letter classes (never (?i), whose Unicode case folding would let the long
# s 'ſ' match 's' in "false").  RE2 gets them as ^(?:...)$ and Python uses
# fullmatch, because Python's $ would also match before a trailing newline.

#: ``true`` / ``false`` in any letter case.
BOOLEAN_RE = r"[Tt][Rr][Uu][Ee]|[Ff][Aa][Ll][Ss][Ee]"

#: Digits led by a zero that stands before another digit.  A ``+`` is left to
#: ``text`` (like ``+12``), and float forms (an exponent, a point without
#: digits after it) to ``float``.
ZERO_PADDED_RE = r"-?0[0-9]+(?:\.[0-9]+)?"

#: No leading zero (those are zero_padded), at most 19 digits; the 19-digit ones
#: are checked against int64's range apart (a regular expression cannot say
#: 9223372036854775807 briefly).  A leading '+' is not an integer (pyarrow's int64
#: cast rejects it).
INTEGER_RE = r"-?(?:0|[1-9][0-9]{0,18})"

#: The int64 range; integers of 19 digits beyond it are decimals.
INT64_MAX = 2**63 - 1
INT64_MIN = -(2**63)

#: A point with digits on both sides (one zero at most before the point), or
#: an integer beyond int64.  At most MAX_DECIMAL_DIGITS digits in all, checked
#: apart (a counted repetition over two groups is not expressible here).
DECIMAL_RE = r"-?(?:0|[1-9][0-9]*)\.[0-9]+|-?[1-9][0-9]{18,}"

#: decimal256's largest precision.
MAX_DECIMAL_DIGITS = 76

#: What is left of pyarrow's float64 grammar once integers and decimals are
#: taken: exponent forms, "1.", ".5", digit strings too long for decimal256,
#: and the IEEE specials inf / infinity / nan in any letter case.  The digits
#: before an optional point are one group, so a run of digits has one parse.
FLOAT_RE = (
    r"-?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
    r"|-?(?:[Ii][Nn][Ff](?:[Ii][Nn][Ii][Tt][Yy])?|[Nn][Aa][Nn])"
)

_INT64_TEXT = (str(INT64_MAX), str(INT64_MIN))
# The plain numerals: what zero_padded, integer and decimal split between them (RE2 syntax).
_PLAIN_RE2 = r"^-?[0-9]+(?:\.[0-9]+)?$"
# A non-zero digit in the mantissa (the part before any exponent): RE2 syntax.
_NONZERO_MANTISSA = r"^-?[0-9]*\.?[0-9]*[1-9]"

# Building blocks.  Clock ranges (RFC 3339 section 5.7) are in the pattern;
# day-of-month is left to the cast (it depends on month and year).
_FULL_DATE = r"[0-9]{4}-(?:0[1-9]|1[0-2])-(?:0[1-9]|[12][0-9]|3[01])"
_HOUR = r"(?:[01][0-9]|2[0-3])"
_MINUTE = r"[0-5][0-9]"
# Second 60 is a leap second.  RFC 3339 only allows it where a leap second
# was really inserted; which minute that is depends on the offset and on a
# table of past leap seconds, so any minute is accepted here.
_PARTIAL_TIME = _HOUR + ":" + _MINUTE + r":(?:[0-5][0-9]|60)(?:\.[0-9]+)?"

#: ``full-date``: 4-digit year, month 01-12, day 01-31, and (checked by
#: casting to date32) a day that exists in that month and year.
DATE_RE = _FULL_DATE

#: RFC 3339 section 5.6 ``date-time``: T or t, seconds required, optional
#: ``.1*DIGIT`` fraction, then Z / z or ``+hh:mm`` / ``-hh:mm``.
TIMESTAMP_RFC3339_RE = _FULL_DATE + "[Tt]" + _PARTIAL_TIME + "(?:[Zz]|[+-]" + _HOUR + ":" + _MINUTE + ")"

#: Zoned date-times that ``cast(timestamp("us", "UTC"))`` parses but that
#: are not RFC 3339: a space separator with Z or any pyarrow offset, or a T
#: with ``+hhmm`` / ``+hh``.  Upper case only, like pyarrow.
TIMESTAMP_OFFSET_RE = (
    _FULL_DATE
    + "(?: "
    + _PARTIAL_TIME
    + "(?:Z|[+-]"
    + _HOUR
    + "(?::?"
    + _MINUTE
    + ")?)|T"
    + _PARTIAL_TIME
    + "[+-]"
    + _HOUR
    + "(?:"
    + _MINUTE
    + ")?)"
)

#: Date-times without any offset, T or space separator, seconds required.
TIMESTAMP_LOCAL_RE = _FULL_DATE + "[T ]" + _PARTIAL_TIME

# Where the seconds field sits in every timestamp shape above: 10 date
# characters, the separator, "hh:mm:".
_SECONDS_AT = 17

_TEMPORAL_CAST: dict[str, pa.DataType] = {
    "date": pa.date32(),
    "timestamp_rfc3339": pa.timestamp("us", "UTC"),
    "timestamp_offset": pa.timestamp("us", "UTC"),
    "timestamp_local": pa.timestamp("us"),
}

_REGEX: dict[str, str] = {
    "boolean": BOOLEAN_RE,
    "zero_padded": ZERO_PADDED_RE,
    "integer": INTEGER_RE,
    "decimal": DECIMAL_RE,
    "float": FLOAT_RE,
    "date": DATE_RE,
    "timestamp_rfc3339": TIMESTAMP_RFC3339_RE,
    "timestamp_offset": TIMESTAMP_OFFSET_RE,
    "timestamp_local": TIMESTAMP_LOCAL_RE,
}
_RE2: dict[str, str] = {name: f"^(?:{body})$" for name, body in _REGEX.items()}
_PY: dict[str, re.Pattern[str]] = {name: re.compile(body) for name, body in _REGEX.items()}

_NULL_TOKEN_SET = pa.array(sorted(NULL_TOKENS), pa.large_string())
_TIMESTAMP_CLASSES = ("timestamp_rfc3339", "timestamp_offset", "timestamp_local")


@dataclass(frozen=True, slots=True)
class ClassScan:
    """What :func:`classify` found in one column (nulls are not counted).

    ``counts`` and ``first_index`` hold only classes that occur, in CLASSES
    order; indices are positions in the whole (possibly chunked) input.
    ``int_digits + frac_digits`` is the precision that holds every integer,
    decimal and zero_padded value at scale ``frac_digits`` (a zero_padded
    value's zeros count as digits).  Each decimal value has at most 76
    digits, but the two maxima can come from different values and add up to
    more, in which case no decimal type holds the column.
    """

    counts: dict[str, int]
    first_index: dict[str, int]
    int_digits: int
    frac_digits: int
    leap_seconds: int
    first_leap_index: int | None
    lowercase_rfc3339: int


# ---------------------------------------------------------------------------
# Per-value reference
# ---------------------------------------------------------------------------

_DAYS_IN_MONTH = (31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)


def _real_day(value: str) -> bool:
    # calendar.isleap is plain arithmetic, so year 0000 (which pyarrow
    # accepts and datetime.date cannot hold) is handled like pyarrow does.
    year, month, day = int(value[0:4]), int(value[5:7]), int(value[8:10])
    last = 29 if month == 2 and calendar.isleap(year) else _DAYS_IN_MONTH[month - 1]
    return day <= last


def class_of(value: str) -> str:
    """Classify one value; the slow reference that the vectorised path must equal."""
    stripped = value.strip()
    if not stripped:
        return "empty"
    if stripped.lower() in NULL_TOKENS:
        return "null_token"
    for name in ("boolean", "zero_padded"):
        if _PY[name].fullmatch(value):
            return name
    if _PY["integer"].fullmatch(value) and _fits_int64(value):
        return "integer"
    if _PY["decimal"].fullmatch(value) and _digit_count(value) <= MAX_DECIMAL_DIGITS:
        return "decimal"
    if _PY["float"].fullmatch(value):
        return "float_out_of_range" if _beyond_float64(value) else "float"
    # The clock ranges are in the patterns, so only the day can still be
    # wrong; the temporal shapes exclude one another, so a shaped value with
    # an impossible day matches nothing further and is text.
    for name in ("date", *_TIMESTAMP_CLASSES):
        if _PY[name].fullmatch(value):
            return name if _real_day(value) else "text"
    return "text"


def _fits_int64(value: str) -> bool:
    # INTEGER_RE allows 19 digits at most, so int() is cheap here.
    return INT64_MIN <= int(value) <= INT64_MAX


def _beyond_float64(value: str) -> bool:
    """A FLOAT_RE match that float64 turns to infinity, or to zero from a non-zero number.

    Python's float() rounds to nearest like pyarrow's parser (both correctly
    rounded), so it meets the same bounds.
    """
    body = value.lstrip("-")
    if body[:1].isalpha():  # inf, infinity, nan: the value itself
        return False
    got = float(value)
    if got in (math.inf, -math.inf):
        return True
    mantissa = body.partition("e")[0].partition("E")[0]
    return got == 0.0 and mantissa.strip("0.") != ""


def _digit_count(value: str) -> int:
    return len(value) - value.startswith("-") - ("." in value)


# ---------------------------------------------------------------------------
# Vectorised path
# ---------------------------------------------------------------------------


def _check_type(t: pa.DataType) -> None:
    if not (pa.types.is_string(t) or pa.types.is_large_string(t) or pa.types.is_string_view(t) or pa.types.is_null(t)):
        raise TypeError(f"textclass needs a string array, got {t}")


def _as_string_array(arr: pa.Array) -> pa.Array:
    _check_type(arr.type)
    if pa.types.is_string_view(arr.type) or pa.types.is_null(arr.type):
        # No string kernels for string_view in pyarrow 26; large_string
        # cannot overflow its offsets whatever the view array holds.  An
        # all-null column (type null, common in JSON) is simply all null.
        return arr.cast(pa.large_string())
    return arr


def _false_if_null(mask: pa.Array) -> pa.BooleanArray:
    return pc.fill_null(mask, False) if mask.null_count else mask


def _cast_ok(values: pa.Array, target: pa.DataType) -> pa.BooleanArray:
    """Which of ``values`` cast to ``target``; one bulk cast when all do."""
    n = len(values)
    try:
        pc.cast(values, target)
        return pa.repeat(True, n)
    except pa.ArrowInvalid:
        pass
    # Bisect the failing subset: k bad values cost about 2k*log2(n/k)
    # casts instead of n, and a single bad date does not make every batch
    # fall back to one Python call per value.
    bad: list[int] = []
    stack = [(0, n // 2), (n // 2, n)]
    while stack:
        lo, hi = stack.pop()
        if hi <= lo:
            continue
        try:
            pc.cast(values.slice(lo, hi - lo), target)
            continue
        except pa.ArrowInvalid:
            pass
        if hi - lo == 1:
            bad.append(lo)
        else:
            mid = (lo + hi) // 2
            stack.append((lo, mid))
            stack.append((mid, hi))
    positions = pc.subtract(pc.cumulative_sum(pa.repeat(1, n)), 1)
    return pc.invert(pc.is_in(positions, value_set=pa.array(bad, pa.int64())))


def _seconds_are_60(values: pa.Array) -> pa.BooleanArray:
    return _false_if_null(pc.equal(pc.utf8_slice_codeunits(values, _SECONDS_AT, _SECONDS_AT + 2), "60"))


def _normalise_for_cast(values: pa.Array, name: str) -> pa.Array:
    """Turn valid values the casts reject into equivalents they take."""
    if name == "date":
        return values
    if name == "timestamp_rfc3339":
        # Only t/z can be lower case in a matched value, so ASCII upper is
        # exact; the other two patterns admit upper case only.
        values = pc.ascii_upper(values)
    leap = _seconds_are_60(values)
    if leap.true_count:
        # :59 has the same calendar validity as the :60 it stands in for.
        replaced = pc.utf8_replace_slice(values, _SECONDS_AT, _SECONDS_AT + 2, "59")
        values = pc.if_else(leap, replaced, values)
    if pc.any(pc.match_substring_regex(values, r"\.[0-9]{7}")).as_py():
        # Fraction digits past microseconds cannot change calendar validity.
        values = pc.replace_substring_regex(values, r"(\.[0-9]{6})[0-9]+", r"\1")
    return values


def _masks(arr: pa.Array) -> dict[str, pa.BooleanArray]:
    """Disjoint class masks over a string / large_string array (null -> false)."""
    remaining = pc.is_valid(arr)
    masks: dict[str, pa.BooleanArray] = {}

    def take(name: str, candidate: pa.Array) -> None:
        nonlocal remaining
        mask = pc.and_(_false_if_null(candidate), remaining)
        masks[name] = mask
        remaining = pc.and_not(remaining, mask)

    def settled() -> bool:
        """Every value has its class: the classes left hold none (their patterns need not run)."""
        if pc.any(remaining).as_py():
            return False
        for name in CLASSES:
            masks.setdefault(name, remaining)  # all false
        return True

    trimmed = pc.utf8_trim_whitespace(arr)
    take("empty", pc.equal(pc.binary_length(trimmed), 0))
    # ascii_lower, not utf8_lower: Arrow lowers U+0130 'İ' to a plain 'i'
    # while str.lower() gives 'i' + U+0307, so "nİl" would differ.  No other
    # non-ASCII character lowers to ASCII letters used by the tokens.
    take("null_token", pc.is_in(pc.ascii_lower(trimmed), value_set=_NULL_TOKEN_SET))
    take("boolean", pc.match_substring_regex(arr, _RE2["boolean"]))
    # One pattern finds the plain numerals; lengths and first characters then split them into
    # zero_padded, integer and decimal (what their three patterns and bounds say).
    plain = pc.and_(_false_if_null(pc.match_substring_regex(arr, _PLAIN_RE2)), remaining)
    split = plain_numerals(arr.filter(plain)) if plain.true_count else None
    for name in ("zero_padded", "integer", "decimal"):
        take(name, plain if split is None else pc.replace_with_mask(plain, plain, split[name]))
    if settled():  # a column of numerals (the common case) needs no float or date pattern
        return {name: masks[name] for name in CLASSES}
    floats = pc.and_(_false_if_null(pc.match_substring_regex(arr, _RE2["float"])), remaining)
    beyond = _beyond_float64_mask(arr, floats)
    take("float", pc.and_not(floats, beyond))
    take("float_out_of_range", beyond)
    if settled():
        return {name: masks[name] for name in CLASSES}
    for name in ("date", *_TIMESTAMP_CLASSES):
        shaped = pc.and_(_false_if_null(pc.match_substring_regex(arr, _RE2[name])), remaining)
        if shaped.true_count:
            subset = _normalise_for_cast(arr.filter(shaped), name)
            ok = _cast_ok(subset, _TEMPORAL_CAST[name])
            # Scatter the subset's verdicts back to their positions.
            shaped = pc.replace_with_mask(shaped, shaped, ok)
        take(name, shaped)
    masks["text"] = remaining
    return {name: masks[name] for name in CLASSES}


def plain_numerals(values: pa.Array) -> dict[str, pa.BooleanArray]:
    """zero_padded / integer / decimal masks of values that all have the shape -?[0-9]+(.[0-9]+)?.

    Such a value is zero_padded (a '0' and another digit before the point), an integer (no
    point, within int64), a decimal (at most 76 digits), or else (a float) in none of them.

    >>> m = plain_numerals(pa.array(["007", "9223372036854775807", "9223372036854775808", "0.5"]))
    >>> m["zero_padded"].to_pylist(), m["integer"].to_pylist(), m["decimal"].to_pylist()
    ([True, False, False, False], [False, True, False, False], [False, False, True, True])
    """
    length = pc.cast(pc.binary_length(values), pa.int64())
    minus = pc.starts_with(values, "-")
    body = pc.subtract(length, pc.cast(minus, pa.int64()))
    point = pc.cast(pc.find_substring(values, "."), pa.int64())  # -1: no point
    has_point = pc.greater_equal(point, 0)
    digits = pc.subtract(body, pc.cast(has_point, pa.int64()))
    before = pc.if_else(has_point, pc.subtract(point, pc.cast(minus, pa.int64())), body)
    lead = pc.or_(pc.starts_with(values, "0"), pc.starts_with(values, "-0"))
    padded = pc.and_(lead, pc.greater_equal(before, 2)) if lead.true_count else pa.repeat(False, len(values))
    whole = pc.and_not(pc.invert(has_point), padded)
    integer = pc.and_(whole, pc.less_equal(digits, 18))
    wide = pc.and_(whole, pc.equal(digits, 19))
    if wide.true_count:
        # Digit strings of one length (no leading zero) order as their numbers do.
        fits = pc.if_else(minus, pc.less_equal(values, _INT64_TEXT[1]), pc.less_equal(values, _INT64_TEXT[0]))
        integer = pc.or_(integer, pc.and_(wide, fits))
    decimal = pc.and_(pc.and_not(pc.invert(padded), integer), pc.less_equal(digits, MAX_DECIMAL_DIGITS))
    return {"zero_padded": padded, "integer": integer, "decimal": decimal}


def _beyond_float64_mask(arr: pa.Array, floats: pa.BooleanArray) -> pa.BooleanArray:
    """Of the FLOAT_RE matches, those float64 turns to infinity or (from non-zero) to zero."""
    if not floats.true_count:
        return floats
    got = pc.cast(arr.filter(floats), pa.float64())
    edge = pc.or_(pc.is_inf(got), pc.equal(got, 0.0))  # the candidates; their text decides
    if not edge.true_count:
        return pa.repeat(False, len(arr))
    at = pc.replace_with_mask(floats, floats, edge)
    values, got = arr.filter(at), got.filter(edge)
    letters = pc.match_substring_regex(values, "^-?[IiNn]")  # inf, infinity, nan: the value itself
    lost = pc.or_(
        pc.and_not(pc.is_inf(got), letters),
        pc.and_(pc.equal(got, 0.0), pc.match_substring_regex(values, _NONZERO_MANTISSA)),
    )
    return pc.replace_with_mask(at, at, lost)


@staged("classify")
def class_masks(arr: pa.Array | pa.ChunkedArray) -> dict[str, pa.BooleanArray]:
    """One boolean mask per class over ``arr``; disjoint, covering all non-nulls."""
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks else pa.array([], arr.type)
    return _masks(_as_string_array(arr))


def _first_true(mask: pa.BooleanArray) -> int:
    return pc.index(mask, True).as_py()


@staged("classify")
def classify(arr: pa.Array | pa.ChunkedArray) -> ClassScan:
    """Count the content classes of a string column; nulls are skipped.

    Accepts string, large_string, string_view and (all-null) null arrays;
    anything else raises TypeError.  Chunks are scanned one at a time.
    """
    _check_type(arr.type)
    chunks = arr.chunks if isinstance(arr, pa.ChunkedArray) else [arr]
    counts = dict.fromkeys(CLASSES, 0)
    first_index: dict[str, int] = {}
    int_digits = frac_digits = leap_seconds = lowercase = 0
    first_leap: int | None = None
    offset = 0
    for chunk in chunks:
        chunk = _as_string_array(chunk)
        masks = _masks(chunk)
        for name, mask in masks.items():
            n = mask.true_count
            if n:
                counts[name] += n
                if name not in first_index:
                    first_index[name] = offset + _first_true(mask)
        number = pc.or_(pc.or_(masks["integer"], masks["decimal"]), masks["zero_padded"])
        if number.true_count:
            i, f = max_digits(chunk.filter(number))
            int_digits, frac_digits = max(int_digits, i), max(frac_digits, f)
        stamp = pc.or_(
            pc.or_(masks["timestamp_rfc3339"], masks["timestamp_offset"]),
            masks["timestamp_local"],
        )
        if stamp.true_count:
            leap = pc.and_(stamp, _seconds_are_60(chunk))
            if leap.true_count:
                leap_seconds += leap.true_count
                if first_leap is None:
                    first_leap = offset + _first_true(leap)
        if masks["timestamp_rfc3339"].true_count:
            rfc = chunk.filter(masks["timestamp_rfc3339"])
            # Only the separator and the zone can be letters in a match.
            lowercase += pc.match_substring_regex(rfc, "[tz]").true_count
        offset += len(chunk)
    return ClassScan(
        counts={name: n for name, n in counts.items() if n},
        first_index={name: first_index[name] for name in CLASSES if name in first_index},
        int_digits=int_digits,
        frac_digits=frac_digits,
        leap_seconds=leap_seconds,
        first_leap_index=first_leap,
        lowercase_rfc3339=lowercase,
    )


def digit_counts(numbers: pa.Array) -> tuple[pa.Array, pa.Array]:
    """Per integer, decimal or zero_padded string: its digits before and after the point."""
    length = pc.cast(pc.binary_length(numbers), pa.int64())
    minus = pc.cast(pc.starts_with(numbers, "-"), pa.int64())
    point = pc.cast(pc.find_substring(numbers, "."), pa.int64())  # -1: no point
    has_point = pc.greater_equal(point, 0)
    before = pc.if_else(has_point, pc.subtract(point, minus), pc.subtract(length, minus))
    after = pc.if_else(has_point, pc.subtract(pc.subtract(length, point), 1), 0)
    return before, after


def max_digits(numbers: pa.Array) -> tuple[int, int]:
    """Max digits before and after the point over integer/decimal/zero_padded strings."""
    before, after = digit_counts(numbers)
    return pc.max(before).as_py() or 0, pc.max(after).as_py() or 0
