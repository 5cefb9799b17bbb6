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
integer               :data:`INTEGER_RE` - at most 18 digits, always int64
decimal               :data:`DECIMAL_RE` (point form, or 19+ digits), at most
                      76 digits in all (decimal256's precision limit)
float                 :data:`FLOAT_RE` - the rest of what a person calls a
                      number and ``cast(float64)`` accepts
date                  :data:`DATE_RE` and a real calendar day
timestamp_rfc3339     :data:`TIMESTAMP_RFC3339_RE` (RFC 3339 section 5.6
                      ``date-time`` with the section 5.7 ranges) and a real day
timestamp_offset      :data:`TIMESTAMP_OFFSET_RE`: a zoned form pyarrow parses
                      that is not RFC 3339 (space separator, ``+hhmm``, ``+hh``)
timestamp_local       :data:`TIMESTAMP_LOCAL_RE`: no offset at all
text                  everything else
==================== ==========================================================

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
import re
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

__all__ = [
    "CLASSES",
    "NULL_TOKENS",
    "BOOLEAN_RE",
    "INTEGER_RE",
    "DECIMAL_RE",
    "FLOAT_RE",
    "DATE_RE",
    "TIMESTAMP_RFC3339_RE",
    "TIMESTAMP_OFFSET_RE",
    "TIMESTAMP_LOCAL_RE",
    "MAX_DECIMAL_DIGITS",
    "ClassScan",
    "classify",
    "class_masks",
    "class_of",
    "digit_counts",
    "max_digits",
]

CLASSES: tuple[str, ...] = (
    "empty",
    "null_token",
    "boolean",
    "integer",
    "decimal",
    "float",
    "date",
    "timestamp_rfc3339",
    "timestamp_offset",
    "timestamp_local",
    "text",
)

#: Compared with ``value.strip().lower()``.
NULL_TOKENS: frozenset[str] = frozenset(
    {"null", "none", "nil", "na", "n/a", "#n/a", "-", "--", "?"}
)

# The patterns below are written *unanchored* and only with constructs that
# mean the same in RE2 (pyarrow) and in Python's ``re``: ASCII classes such as
# [0-9] (never \d, which is Unicode-aware in ``re``) and explicit [Tt]-style
# letter classes (never (?i), whose Unicode case folding would let the long
# s 'ſ' match 's' in "false").  RE2 gets them as ^(?:...)$ and Python uses
# fullmatch, because Python's $ would also match before a trailing newline.

#: ``true`` / ``false`` in any letter case.
BOOLEAN_RE = r"[Tt][Rr][Uu][Ee]|[Ff][Aa][Ll][Ss][Ee]"

#: Up to 18 digits always fits int64 (max 9223372036854775807 has 19).
#: Leading zeros are fine (pyarrow casts "007" to 7); a leading '+' is not
#: (pyarrow's int64 cast rejects it).
INTEGER_RE = r"-?[0-9]{1,18}"

#: A point with digits on both sides, or an integer too long for the
#: integer class.  At most MAX_DECIMAL_DIGITS digits in all, checked apart
#: (a counted repetition over two groups is not expressible here).
DECIMAL_RE = r"-?[0-9]+\.[0-9]+|-?[0-9]{19,}"

#: decimal256's largest precision.
MAX_DECIMAL_DIGITS = 76

#: What is left of pyarrow's float64 grammar once integers and decimals are
#: taken: exponent forms, "1.", ".5", digit strings too long for decimal256,
#: and the IEEE specials inf / infinity / nan in any letter case.
FLOAT_RE = (
    r"-?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
    r"|-?(?:[Ii][Nn][Ff](?:[Ii][Nn][Ii][Tt][Yy])?|[Nn][Aa][Nn])"
)

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
TIMESTAMP_RFC3339_RE = (
    _FULL_DATE + "[Tt]" + _PARTIAL_TIME + "(?:[Zz]|[+-]" + _HOUR + ":" + _MINUTE + ")"
)

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
    ``int_digits + frac_digits`` is the precision that holds every integer and
    decimal value at scale ``frac_digits``.  Each decimal value has at most 76
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
    for name in ("boolean", "integer"):
        if _PY[name].fullmatch(value):
            return name
    if _PY["decimal"].fullmatch(value) and _digit_count(value) <= MAX_DECIMAL_DIGITS:
        return "decimal"
    if _PY["float"].fullmatch(value):
        return "float"
    # The clock ranges are in the patterns, so only the day can still be
    # wrong; the temporal shapes exclude one another, so a shaped value with
    # an impossible day matches nothing further and is text.
    for name in ("date", *_TIMESTAMP_CLASSES):
        if _PY[name].fullmatch(value):
            return name if _real_day(value) else "text"
    return "text"


def _digit_count(value: str) -> int:
    return len(value) - value.startswith("-") - ("." in value)


# ---------------------------------------------------------------------------
# Vectorised path
# ---------------------------------------------------------------------------


def _check_type(t: pa.DataType) -> None:
    if not (
        pa.types.is_string(t)
        or pa.types.is_large_string(t)
        or pa.types.is_string_view(t)
        or pa.types.is_null(t)
    ):
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
    return _false_if_null(
        pc.equal(pc.utf8_slice_codeunits(values, _SECONDS_AT, _SECONDS_AT + 2), "60")
    )


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

    trimmed = pc.utf8_trim_whitespace(arr)
    take("empty", pc.equal(pc.binary_length(trimmed), 0))
    # ascii_lower, not utf8_lower: Arrow lowers U+0130 'İ' to a plain 'i'
    # while str.lower() gives 'i' + U+0307, so "nİl" would differ.  No other
    # non-ASCII character lowers to ASCII letters used by the tokens.
    take("null_token", pc.is_in(pc.ascii_lower(trimmed), value_set=_NULL_TOKEN_SET))
    for name in ("boolean", "integer"):
        take(name, pc.match_substring_regex(arr, _RE2[name]))
    decimal = _false_if_null(pc.match_substring_regex(arr, _RE2["decimal"]))
    if decimal.true_count:
        digits = pc.subtract(
            pc.subtract(pc.binary_length(arr), pc.cast(pc.starts_with(arr, "-"), pa.int64())),
            pc.cast(pc.match_substring(arr, "."), pa.int64()),
        )
        decimal = pc.and_(decimal, _false_if_null(pc.less_equal(digits, MAX_DECIMAL_DIGITS)))
    take("decimal", decimal)
    take("float", pc.match_substring_regex(arr, _RE2["float"]))
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


def class_masks(arr: pa.Array | pa.ChunkedArray) -> dict[str, pa.BooleanArray]:
    """One boolean mask per class over ``arr``; disjoint, covering all non-nulls."""
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks else pa.array([], arr.type)
    return _masks(_as_string_array(arr))


def _first_true(mask: pa.BooleanArray) -> int:
    return pc.index(mask, True).as_py()


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
        number = pc.or_(masks["integer"], masks["decimal"])
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
    """Per integer or decimal string: its digits before and after the point."""
    length = pc.cast(pc.binary_length(numbers), pa.int64())
    minus = pc.cast(pc.starts_with(numbers, "-"), pa.int64())
    point = pc.cast(pc.find_substring(numbers, "."), pa.int64())  # -1: no point
    has_point = pc.greater_equal(point, 0)
    before = pc.if_else(has_point, pc.subtract(point, minus), pc.subtract(length, minus))
    after = pc.if_else(has_point, pc.subtract(pc.subtract(length, point), 1), 0)
    return before, after


def max_digits(numbers: pa.Array) -> tuple[int, int]:
    """Max digits before and after the point over integer/decimal strings."""
    before, after = digit_counts(numbers)
    return pc.max(before).as_py() or 0, pc.max(after).as_py() or 0
