"""Tests for driftline.observe.textclass.

Outside facts carry their source beside them.  Library facts are pinned to
pyarrow 26.0.1 (the version pyproject allows); the test module checks it.
"""

from __future__ import annotations

import math
import string
from collections import Counter

import pyarrow as pa
import pyarrow.compute as pc
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from driftline.observe import textclass
from driftline.observe.textclass import (
    CLASSES,
    NULL_TOKENS,
    ClassScan,
    class_masks,
    class_of,
    classify,
)

SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
TIMESTAMP_CLASSES = ("timestamp_rfc3339", "timestamp_offset", "timestamp_local")


def casts(values: list[str], target: pa.DataType) -> bool:
    try:
        pc.cast(pa.array(values, pa.string()), target)
    except pa.ArrowInvalid:
        return False
    return True


def test_pinned_pyarrow_version() -> None:
    # Every "pyarrow accepts / rejects" fact below was found on this version.
    assert pa.__version__ == "26.0.1"


def test_api_constants() -> None:
    assert CLASSES == (
        "empty", "null_token", "boolean", "zero_padded", "integer", "decimal", "float",
        "float_out_of_range", "date", "timestamp_rfc3339", "timestamp_offset", "timestamp_local", "text",
    )  # fmt: skip
    tokens = {"null", "none", "nil", "na", "n/a", "#n/a", "-", "--", "?"}
    assert tokens == NULL_TOKENS


# ---------------------------------------------------------------------------
# RFC 3339
# ---------------------------------------------------------------------------

# Source: RFC 3339 section 5.8 (all five examples).
RFC3339_EXAMPLES = [
    "1985-04-12T23:20:50.52Z",
    "1996-12-19T16:39:57-08:00",
    "1990-12-31T23:59:60Z",
    "1990-12-31T15:59:60-08:00",
    "1937-01-01T12:00:27.87+00:20",
]


def test_rfc3339_section_5_8_examples() -> None:
    for value in RFC3339_EXAMPLES:
        assert class_of(value) == "timestamp_rfc3339", value
    scan = classify(pa.array(RFC3339_EXAMPLES))
    assert scan.counts == {"timestamp_rfc3339": 5}
    # Source: RFC 3339 section 5.8 - the third and fourth are leap seconds.
    assert scan.leap_seconds == 2
    assert scan.first_leap_index == 2
    assert scan.lowercase_rfc3339 == 0


def test_rfc3339_leap_seconds_are_rejected_by_pyarrow() -> None:
    # Source: REFERENCES.md section 1 "Library behaviour" (pyarrow 26.0.1):
    # the RFC's own leap-second example fails cast(timestamp("us", "UTC")),
    # which is why leap seconds are counted apart.
    assert not casts(["1990-12-31T23:59:60Z"], pa.timestamp("us", "UTC"))


# (value, our class, why) - source of "not valid, and why": REFERENCES.md
# section 1, which cites RFC 3339 sections 5.6, 4.4, 3, 5.7, 5.5.
RFC3339_INVALID = [
    ("1985-04-12 23:20:50Z", "timestamp_offset", "space separator (5.6 NOTE, not the ABNF)"),
    ("1985-04-12T23:20:50", "timestamp_local", "no offset (4.4)"),
    ("85-04-12T23:20:50Z", "text", "2-digit year (3)"),
    ("1985-04-12T24:00:00Z", "text", "hour 24 (5.7)"),
    ("1985-02-29T23:20:50Z", "text", "29 February 1985 does not exist (5.7)"),
    ("1985-04-12T23:20:50.Z", "text", "empty fraction: time-secfrac is '.' 1*DIGIT (5.6)"),
    ("1985-04-12T23:20:50+0800", "timestamp_offset", "offset must be hh:mm (5.6)"),
    ("1985-04-12T23:20:50+08", "timestamp_offset", "offset must be hh:mm (5.6)"),
    ("1985-04-12T23:20Z", "text", "seconds missing (5.6)"),
    ("1985-04-12T23:20:50,52Z", "text", "comma decimal mark (5.6)"),
    ("19850412T232050Z", "text", "ISO 8601 basic format (5.5)"),
]


@pytest.mark.parametrize(("value", "expected", "why"), RFC3339_INVALID)
def test_rfc3339_not_valid_examples(value: str, expected: str, why: str) -> None:
    assert class_of(value) == expected, why
    assert classify(pa.array([value])).counts == {expected: 1}, why


def test_offset_forms_that_pyarrow_accepts() -> None:
    # Source: REFERENCES.md section 5 (pyarrow 26.0.1): timestamp("us","UTC")
    # accepts +0800 and +08; section 1: and a space separator with Z.
    offset = [v for v, cls, _ in RFC3339_INVALID if cls == "timestamp_offset"]
    assert casts(offset, pa.timestamp("us", "UTC"))
    # Source: REFERENCES.md section 5: timestamp("us") takes the no-offset form.
    assert casts(["1985-04-12T23:20:50"], pa.timestamp("us"))


def test_lowercase_t_and_z() -> None:
    # Source: RFC 3339 section 5.6 NOTE - "T" and "Z" may be lower case.
    values = ["1985-04-12t23:20:50z", "1985-04-12T23:20:50z", "1985-04-12t23:20:50Z"]
    scan = classify(pa.array(values))
    assert scan.counts == {"timestamp_rfc3339": 3}
    assert scan.lowercase_rfc3339 == 3
    # Source: REFERENCES.md section 1 (pyarrow 26.0.1): lowercase fails the
    # cast, upper-casing first fixes it.
    assert not casts(values[:1], pa.timestamp("us", "UTC"))
    assert casts([v.upper() for v in values], pa.timestamp("us", "UTC"))
    # Outside RFC 3339 pyarrow decides, and it takes upper case only.
    assert class_of("1985-04-12 23:20:50z") == "text"
    assert class_of("1985-04-12t23:20:50+0800") == "text"
    assert class_of("1985-04-12t23:20:50") == "text"


def test_rfc3339_ranges_section_5_7() -> None:
    # Source: RFC 3339 section 5.7: hour 00-23, minute 00-59, second 00-60,
    # and offsets use the same hour and minute ranges (5.6 time-numoffset).
    assert class_of("1985-04-12T23:59:59+23:59") == "timestamp_rfc3339"
    for bad in ("1985-04-12T23:60:00Z", "1985-04-12T23:20:61Z", "1985-04-12T23:20:50+24:00",
                "1985-04-12T23:20:50+12:60", "1985-13-12T23:20:50Z", "1985-04-31T23:20:50Z",
                "1985-04-00T23:20:50Z", "1985-00-12T23:20:50Z"):  # fmt: skip
        assert class_of(bad) == "text", bad
    # RFC 3339 section 4.3: -00:00 is a legal "unknown local offset".
    assert class_of("1985-04-12T23:20:50-00:00") == "timestamp_rfc3339"


def test_fractions_longer_than_microseconds() -> None:
    # RFC 3339 section 5.6: time-secfrac = "." 1*DIGIT, so 9 digits are valid.
    nano = "1985-04-12T23:20:50.123456789Z"
    assert class_of(nano) == "timestamp_rfc3339"
    assert class_of("1985-04-12T23:20:50.1234567") == "timestamp_local"
    assert class_of("1985-04-12 23:20:50.1234567+0800") == "timestamp_offset"
    # pyarrow 26.0.1 (found by running it): unit "us" takes at most 6
    # fraction digits, so the cast rule must cut the rest (a measured loss).
    assert not casts([nano], pa.timestamp("us", "UTC"))
    assert casts([nano[:26] + "Z"], pa.timestamp("us", "UTC"))


def test_calendar_including_year_zero() -> None:
    # Gregorian leap years: 2000 and 2024 yes, 1900 and 1985 no.
    assert class_of("2000-02-29") == "date"
    assert class_of("2024-02-29T00:00:00Z") == "timestamp_rfc3339"
    assert class_of("1900-02-29") == "text"
    assert class_of("1985-02-29 00:00:00") == "text"
    # pyarrow 26.0.1 (found by running it) accepts year 0000, a leap year in
    # the proleptic Gregorian calendar; RFC 3339's 4DIGIT year allows it too.
    assert casts(["0000-02-29"], pa.date32())
    assert class_of("0000-02-29") == "date"
    assert classify(pa.array(["0000-02-29"])).counts == {"date": 1}
    assert not casts(["1985-13-01"], pa.date32())
    assert class_of("1985-13-01") == "text"


# ---------------------------------------------------------------------------
# Numbers
# ---------------------------------------------------------------------------

# Source: REFERENCES.md section 2, RFC 8259 section 6 check values.  Our
# classes describe *strings* and follow pyarrow's casts, not the JSON
# grammar: "01" breaks RFC 8259's "Leading zeros are not allowed", but as a
# string it casts to int64 1, so it is an integer; "NaN" and "Infinity" are
# not JSON numbers but float64 takes them, so they are floats; a leading
# "+" and hex are text because the int64/float64 classes exclude them.
RFC8259_CHECKS = [
    ("01", "zero_padded"),  # JSON: invalid (leading zero)
    ("-01", "zero_padded"),  # JSON: invalid
    (".5", "float"),  # JSON: invalid (no int part); float64 takes it
    ("1.", "float"),  # JSON: invalid (empty frac); float64 takes it
    ("+1", "text"),  # JSON: invalid; leading '+' is excluded here
    ("0x10", "text"),  # JSON: invalid; int64 would take it, we do not
    ("NaN", "float"),  # JSON: not permitted
    ("Infinity", "float"),  # JSON: not permitted
    ("0", "integer"),  # JSON: valid
    ("-0", "integer"),  # JSON: valid
    ("-0.0", "decimal"),  # JSON: valid
    ("1E+05", "float"),  # JSON: valid, leading zeros fine in the exponent
    ("1E400", "float_out_of_range"),  # JSON: valid grammar; float64 makes it inf
]


@pytest.mark.parametrize(("value", "expected"), RFC8259_CHECKS)
def test_rfc8259_number_check_values(value: str, expected: str) -> None:
    assert class_of(value) == expected


def test_pyarrow_string_cast_facts() -> None:
    # Source: REFERENCES.md section 5, pyarrow 26.0.1 pc.cast from string.
    # int64 reads "007" as 7: the zeros are gone, so "007" is a class of its own.
    assert pc.cast(pa.array(["007"]), pa.int64()).to_pylist() == [7]
    assert class_of("007") == "zero_padded"
    assert not casts(["+42"], pa.int64())
    assert class_of("+42") == "text"
    assert not casts([" 42"], pa.int64())
    assert class_of(" 42") == "text"
    assert not casts(["9223372036854775808"], pa.int64())
    assert class_of("9223372036854775808") == "decimal"  # 19 digits, past int64
    assert casts(["9223372036854775807", "-9223372036854775808"], pa.int64())
    assert class_of("9223372036854775807") == class_of("-9223372036854775808") == "integer"
    assert casts(["9223372036854775808"], pa.decimal128(19, 0))
    assert not casts(["4.0"], pa.int64())
    assert class_of("4.0") == "decimal"
    assert not casts(["1e3"], pa.int64())
    assert class_of("1e3") == "float"
    # int64 takes hex, but a person does not write ids as 0x1F and expect
    # a number, so hex stays text.
    assert pc.cast(pa.array(["0x1F"]), pa.int64()).to_pylist() == [31]
    assert class_of("0x1F") == "text"


def test_integer_and_decimal_boundaries() -> None:
    assert class_of("9" * 18) == "integer"
    assert class_of("-" + "9" * 18) == "integer"
    assert class_of("1" * 19) == "integer"  # within int64 (source: 2**63 - 1 = 9223372036854775807)
    assert class_of("9" * 19) == "decimal"
    assert class_of("1" * 20) == "decimal"
    assert class_of("1" * 76) == "decimal"
    assert class_of("1" * 38 + "." + "2" * 38) == "decimal"
    # decimal256 stops at 76 digits; float64 still parses the rest.
    assert class_of("1" * 77) == "float"
    assert class_of("1" * 40 + "." + "2" * 37) == "float"
    assert casts(["1" * 77], pa.float64())


def test_digits() -> None:
    scan = classify(pa.array(["12", "-12345", "0.5", "-1.250", "99", None]))
    assert scan.int_digits == 5  # "-12345"
    assert scan.frac_digits == 3  # "-1.250"
    scan = classify(pa.array(["1" * 30]))
    assert (scan.int_digits, scan.frac_digits) == (30, 0)
    assert (classify(pa.array(["x", "1e3"])).int_digits, classify(pa.array([])).frac_digits) == (
        0,
        0,
    )
    # Digits count only integer and decimal values, not floats.
    assert classify(pa.array(["123456.5e3", "1"])).int_digits == 1


# pyarrow 26.0.1, found by running it.  Accepted by cast(float64):
FLOAT_ACCEPTED_BY_PYARROW = [
    "1.", "-1.", ".5", "-.5", "1e3", "1E+05", "1e-3", "1.e3", ".5e3", "1e0003",
    "inf", "-inf", "Inf", "INF", "infinity", "Infinity", "-Infinity", "INFINITY",
    "nan", "NaN", "NAN", "-nan",
]  # fmt: skip
# ...also accepted by pyarrow but excluded here (a sign '+' like "+42"):
PLUS_ACCEPTED_BY_PYARROW = ["+1.5", "+inf", "+nan"]
# ...rejected by pyarrow:
FLOAT_REJECTED_BY_PYARROW = [
    " 1.5", "1.5 ", "1e", "e3", ".", ".e3", "1.5e+", "0x1F", "1_000", "1,5", "1d",
    "infin", "infinityx", "snan", "--1",
]  # fmt: skip


def test_float_forms() -> None:
    assert casts(FLOAT_ACCEPTED_BY_PYARROW, pa.float64())
    for value in FLOAT_ACCEPTED_BY_PYARROW:
        assert class_of(value) == "float", value
    assert casts(PLUS_ACCEPTED_BY_PYARROW, pa.float64())
    for value in PLUS_ACCEPTED_BY_PYARROW + FLOAT_REJECTED_BY_PYARROW:
        assert class_of(value) == "text", value
        if value in FLOAT_REJECTED_BY_PYARROW:
            assert not casts([value], pa.float64()), value


def test_boolean_case() -> None:
    # pyarrow 26.0.1 (found by running it): cast(bool) ignores letter case
    # entirely, so booleans need no lower-casing; REFERENCES.md section 5
    # lists true/TRUE/1/0 accepted and yes/t rejected.
    mixed = ["true", "false", "True", "False", "TRUE", "FALSE", "tRuE", "fAlSe"]
    assert pc.cast(pa.array(mixed), pa.bool_()).to_pylist() == [True, False] * 4
    assert casts([v.lower() for v in mixed], pa.bool_())
    for value in mixed:
        assert class_of(value) == "boolean"
    for value in ("yes", "t", " true", "true ", "1", "0"):
        assert class_of(value) != "boolean", value
    assert not casts(["yes"], pa.bool_()) and not casts(["t"], pa.bool_())
    assert not casts([" true"], pa.bool_())


def test_empty_null_tokens_and_unicode_traps() -> None:
    assert class_of("") == "empty"
    assert class_of(" \t\u3000\u00a0") == "empty"  # str.isspace whitespace
    assert class_of("\u200b") == "text"  # zero width space is not whitespace
    for token in NULL_TOKENS:
        assert class_of(f"  {token.upper()} ") == "null_token"
    # 'İ' lowers to 'i' + U+0307 in Python but to 'i' in Arrow's utf8_lower,
    # and the long s 'ſ' case-folds to 's' in Unicode-aware regexes.
    traps = ["nİl", "NİL", "falſe", "ınf", "\u212aa", "42\n", "1985-04-12\n"]
    assert [class_of(v) for v in traps] == ["text"] * len(traps)
    assert classify(pa.array(traps)).counts == {"text": len(traps)}


# ---------------------------------------------------------------------------
# Arrays: nulls, types, chunks
# ---------------------------------------------------------------------------


def test_nulls_are_not_counted() -> None:
    arr = pa.array([None, "1", None, "x", None])
    scan = classify(arr)
    assert scan.counts == {"integer": 1, "text": 1}
    assert scan.first_index == {"integer": 1, "text": 3}
    masks = class_masks(arr)
    assert set(masks) == set(CLASSES)
    for mask in masks.values():
        assert mask.null_count == 0
        assert not mask[0].as_py() and not mask[2].as_py()
    assert classify(pa.array([None, None], pa.string())).counts == {}
    # An all-null column of Arrow type null (what JSON readers give) is fine.
    assert classify(pa.array([None, None])).counts == {}
    assert class_masks(pa.array([None]))["text"].to_pylist() == [False]


def test_empty_inputs() -> None:
    empty = ClassScan({}, {}, 0, 0, 0, None, 0)
    assert classify(pa.array([], pa.string())) == empty
    assert classify(pa.chunked_array([], pa.string())) == empty
    assert all(len(m) == 0 for m in class_masks(pa.array([], pa.string())).values())


@pytest.mark.parametrize("typ", [pa.string(), pa.large_string(), pa.string_view()])
def test_string_types(typ: pa.DataType) -> None:
    values = ["1", "2.5", "1985-04-12", None, "1990-12-31T23:59:60Z"]
    scan = classify(pa.array(values, typ))
    assert scan.counts == {"integer": 1, "decimal": 1, "date": 1, "timestamp_rfc3339": 1}
    assert scan.first_leap_index == 4
    masks = class_masks(pa.array(values, typ))
    assert masks["date"].to_pylist() == [False, False, True, False, False]


def test_chunked_arrays_offset_indices() -> None:
    chunked = pa.chunked_array([["a", "1"], [], [None, "1990-12-31T23:59:60Z", "2"], ["true"]], pa.large_string())
    scan = classify(chunked)
    assert scan.counts == {"boolean": 1, "integer": 2, "timestamp_rfc3339": 1, "text": 1}
    assert scan.first_index == {"boolean": 5, "integer": 1, "timestamp_rfc3339": 3, "text": 0}
    assert scan.leap_seconds == 1 and scan.first_leap_index == 3
    assert classify(chunked.combine_chunks()) == scan
    assert class_masks(chunked)["integer"].to_pylist() == [
        False, True, False, False, True, False,
    ]  # fmt: skip


def test_sliced_arrays() -> None:
    arr = pa.array(["x", "1", None, "2.5", "1990-12-31T23:59:60Z", "1985-02-29"])
    part = arr.slice(1, 4)
    scan = classify(part)
    assert scan.counts == {"integer": 1, "decimal": 1, "timestamp_rfc3339": 1}
    assert scan.first_index == {"integer": 0, "decimal": 2, "timestamp_rfc3339": 3}
    assert scan.first_leap_index == 3
    assert class_masks(arr.slice(3))["text"].to_pylist() == [False, False, True]


def test_rejects_non_strings() -> None:
    with pytest.raises(TypeError):
        classify(pa.array([1, 2]))
    with pytest.raises(TypeError):
        classify(pa.chunked_array([], pa.int64()))
    with pytest.raises(TypeError):
        classify(pa.array([b"1"]))
    with pytest.raises(TypeError):
        class_masks(pa.array([b"1"]))


def test_bulk_cast_failure_bisects_only_the_subset(monkeypatch: pytest.MonkeyPatch) -> None:
    # 2000 date-shaped values with two impossible days: the bulk cast raises,
    # the fallback must find exactly those two without casting each value.
    values = [f"{2000 + i % 20}-{1 + i % 12:02d}-{1 + i % 28:02d}" for i in range(2000)]
    values[3] = "1985-02-29"
    values[1500] = "2023-04-31"
    real_cast = pc.cast
    calls = 0

    def counting_cast(*args: object, **kwargs: object) -> object:
        nonlocal calls
        calls += 1
        return real_cast(*args, **kwargs)

    monkeypatch.setattr(textclass.pc, "cast", counting_cast)
    scan = classify(pa.array(values))
    monkeypatch.undo()
    assert scan.counts == {"date": 1998, "text": 2}
    assert scan.first_index == {"date": 0, "text": 3}
    assert calls < 60


# ---------------------------------------------------------------------------
# Property tests
# ---------------------------------------------------------------------------


def _digits(n: int) -> st.SearchStrategy[str]:
    return st.text(string.digits, min_size=n, max_size=n)


def _random_case(word: str) -> st.SearchStrategy[str]:
    return st.lists(st.booleans(), min_size=len(word), max_size=len(word)).map(
        lambda ups: "".join(c.upper() if u else c for c, u in zip(word, ups, strict=True))
    )


_sign = st.sampled_from(["", "", "-", "+"])
_numbers = st.one_of(
    st.integers(-(10**25), 10**25).map(str),
    st.builds(lambda z, n: "0" * z + str(n), st.integers(0, 3), st.integers(0, 10**20)),
    st.builds(
        lambda s, i, dot, f, e: s + i + dot + f + e,
        _sign,
        st.text(string.digits, max_size=45),
        st.sampled_from(["", ".", ".", ","]),
        st.text(string.digits, max_size=45),
        st.sampled_from(["", "", "e3", "E+05", "e-400", "e", "E400"]),
    ),
    st.floats().map(repr),
    st.builds(lambda s, w: s + w, _sign, st.sampled_from(["inf", "infinity", "nan"]).flatmap(_random_case)),
)


def _mostly(valid: st.SearchStrategy[str], wild: st.SearchStrategy[str]) -> st.SearchStrategy[str]:
    # Mostly in range, so that every class gets values, sometimes just out.
    return st.one_of(*[valid] * 7, wild)


def _pad2(lo: int, hi: int) -> st.SearchStrategy[str]:
    return st.integers(lo, hi).map("{:02d}".format)


_date4 = st.builds(
    lambda y, m, d: f"{y:04d}-{m}-{d}",
    st.one_of(st.integers(0, 9999), st.sampled_from([0, 1900, 1985, 2000, 2024])),
    _mostly(_pad2(1, 12), _pad2(0, 13)),
    _mostly(_pad2(1, 31), st.one_of(_pad2(0, 32), st.sampled_from(["29", "30", "31"]))),
)
_date = _mostly(_date4, st.builds(lambda *p: "-".join(p), _pad2(0, 99), _pad2(0, 99), _pad2(0, 99)))
_hour = _mostly(_pad2(0, 23), _pad2(0, 25))
_minute = _mostly(_pad2(0, 59), _pad2(0, 61))
_fraction = st.one_of(
    st.just(""),
    st.integers(1, 6).flatmap(lambda n: _digits(n).map(lambda d: "." + d)),
    st.integers(0, 12).flatmap(lambda n: _digits(n).map(lambda d: "." + d)),
    st.integers(1, 3).flatmap(lambda n: _digits(n).map(lambda d: "," + d)),
)
_zone = st.one_of(
    st.sampled_from(["", "Z", "z", "Z"]),
    st.builds(
        lambda s, h, colon, m: s + h + colon + m,
        st.sampled_from(["+", "-"]),
        _hour,
        st.sampled_from([":", "", ":"]),
        _mostly(_minute, st.just("")),
    ),
)
_timestamp = st.builds(
    lambda d, sep, h, m, sec, frac, zone: f"{d}{sep}{h}:{m}{sec}{frac}{zone}",
    _date,
    _mostly(st.sampled_from(["T", " "]), st.sampled_from(["t", ""])),
    _hour,
    _minute,
    _mostly(_minute.map(lambda s: ":" + s), st.sampled_from([":60", ""])),
    _fraction,
    _zone,
)
# Always-shaped date-times (only the day can be impossible), so that the
# timestamp classes, leap seconds and long fractions turn up in most runs.
_clean_timestamp = st.builds(
    lambda d, sep, h, m, sec, frac, zone: f"{d}{sep}{h}:{m}:{sec}{frac}{zone}",
    _date4,
    st.sampled_from(["T", " ", "t", "T"]),
    _pad2(0, 23),
    _pad2(0, 59),
    st.one_of(_pad2(0, 59), st.just("60")),
    st.one_of(st.just(""), st.integers(1, 10).flatmap(lambda n: _digits(n).map(lambda d: "." + d))),
    st.one_of(
        st.sampled_from(["", "Z", "z"]),
        st.builds(
            lambda s, h, tail: s + h + tail,
            st.sampled_from(["+", "-"]),
            _pad2(0, 23),
            st.one_of(st.just(""), _pad2(0, 59), _pad2(0, 59).map(":".__add__)),
        ),
    ),
)
_keywords = st.one_of(
    st.sampled_from(["true", "false"]).flatmap(_random_case),
    st.sampled_from(sorted(NULL_TOKENS)).flatmap(_random_case),
    st.sampled_from(["nİl", "falſe", "\u212a", "yes", "t", "0x1F", "1_000", "", " ", "\u3000"]),
)
_value = st.one_of(_numbers, _date, _timestamp, _clean_timestamp, _clean_timestamp, _keywords, st.text(max_size=12))
_padded = _mostly(
    _value,
    st.builds(
        lambda pre, v, post: pre + v + post,
        st.sampled_from(["", " ", "\t", "\u00a0"]),
        _value,
        st.sampled_from(["", " ", "\n"]),
    ),
)
_column = st.lists(st.one_of(st.none(), _padded, _padded, _padded), max_size=60)


def _expected_digits(values: list[str], classes: list[str]) -> tuple[int, int]:
    before = after = 0
    for value, cls in zip(values, classes, strict=True):
        if cls in ("zero_padded", "integer", "decimal"):
            head, _, tail = value.lstrip("-").partition(".")
            before, after = max(before, len(head)), max(after, len(tail))
    return before, after


@SETTINGS
@given(_column, st.integers(1, 4))
def test_differential_against_class_of(values: list[str | None], n_chunks: int) -> None:
    present = [(i, v) for i, v in enumerate(values) if v is not None]
    classes = [class_of(v) for _, v in present]
    expected = Counter(classes)
    first: dict[str, int] = {}
    for (i, _), cls in zip(present, classes, strict=True):
        first.setdefault(cls, i)

    arr = pa.array(values, pa.string())
    scan = classify(arr)
    assert scan.counts == dict(expected)
    assert list(scan.counts) == [c for c in CLASSES if c in expected]
    assert scan.first_index == first
    assert list(scan.first_index) == list(scan.counts)
    strs = [v for _, v in present]
    assert (scan.int_digits, scan.frac_digits) == _expected_digits(strs, classes)
    leaps = [i for (i, v), c in zip(present, classes, strict=True)
             if c in TIMESTAMP_CLASSES and v[17:19] == "60"]  # fmt: skip
    assert scan.leap_seconds == len(leaps)
    assert scan.first_leap_index == (leaps[0] if leaps else None)
    assert scan.lowercase_rfc3339 == sum(
        c == "timestamp_rfc3339" and ("t" in v or "z" in v) for v, c in zip(strs, classes, strict=True)
    )

    # Chunking must not change anything.
    step = max(1, -(-len(values) // n_chunks))
    chunks = [values[i : i + step] for i in range(0, len(values), step)]
    assert classify(pa.chunked_array(chunks, pa.large_string())) == scan

    masks = class_masks(arr)
    assert list(masks) == list(CLASSES)
    for i, value in enumerate(values):
        hits = [name for name, mask in masks.items() if mask[i].as_py()]
        assert hits == ([] if value is None else [class_of(value)]), value


def _class_values(values: list[str | None]) -> dict[str, list[str]]:
    arr = pa.array(values, pa.string())
    return {name: arr.filter(mask).to_pylist() for name, mask in class_masks(arr).items()}


def _cut_fraction(value: str) -> str:
    # "…SS.ffffff" keeps 6 digits; the cast rule for unit "us" does the same.
    head, dot, rest = value.partition(".")
    if not dot:
        return value
    digits = len(rest) - len(rest.lstrip(string.digits))
    return head + dot + rest[: min(digits, 6)] + rest[digits:]


@SETTINGS
@given(_column)
def test_soundness_every_class_casts(values: list[str | None]) -> None:
    by_class = _class_values(values)
    scan = classify(pa.array(values, pa.string()))

    assert casts(by_class["integer"], pa.int64())
    p, s = scan.int_digits + scan.frac_digits, scan.frac_digits
    decimals = by_class["decimal"]
    if decimals and p <= 76:
        assert casts(decimals, pa.decimal128(p, s) if p <= 38 else pa.decimal256(p, s))
    for value in decimals:  # each one fits on its own at least
        head, _, tail = value.lstrip("-").partition(".")
        p1, s1 = len(head) + len(tail), len(tail)
        assert casts([value], pa.decimal128(p1, s1) if p1 <= 38 else pa.decimal256(p1, s1))
    assert casts(by_class["float"], pa.float64())
    assert casts(by_class["boolean"], pa.bool_())  # any letter case, see test_boolean_case
    assert casts([v.lower() for v in by_class["boolean"]], pa.bool_())
    assert casts(by_class["date"], pa.date32())

    for name in TIMESTAMP_CLASSES:
        target = pa.timestamp("us") if name == "timestamp_local" else pa.timestamp("us", "UTC")
        stamps = [v.upper() for v in by_class[name]]
        plain = [v for v in stamps if v[17:19] != "60"]
        # Up to 6 fraction digits the values cast as they are ...
        assert casts([v for v in plain if v == _cut_fraction(v)], target), name
        # ... longer ones once cut to microseconds ...
        assert casts([_cut_fraction(v) for v in plain], target), name
        # ... and leap seconds are real date-times one second earlier.
        leaps = [_cut_fraction(v[:17] + "59" + v[19:]) for v in stamps if v[17:19] == "60"]
        assert casts(leaps, target), name


@SETTINGS
@given(_column)
def test_masks_disjoint_and_cover(values: list[str | None]) -> None:
    masks = class_masks(pa.array(values, pa.large_string()))
    hits = [sum(bool(m[i].as_py()) for m in masks.values()) for i in range(len(values))]
    assert hits == [0 if v is None else 1 for v in values]


# ---------------------------------------------------------------------------
# Codes with leading zeros, int64's whole range, floats float64 cannot hold
# ---------------------------------------------------------------------------

# common practice: US ZIP codes, FIPS state and county codes, account numbers and clock
# times like 0900 are fixed-width digit strings whose leading zeros are part of the value.
# The cases at the edges are the decision written in textclass's docstring.
ZERO_PADDED_CASES = [
    ("000009113186", "zero_padded"),
    ("09001", "zero_padded"),
    ("06", "zero_padded"),
    ("0900", "zero_padded"),
    ("00", "zero_padded"),
    ("-007", "zero_padded"),
    ("-00", "zero_padded"),
    ("00.5", "zero_padded"),
    ("-00.50", "zero_padded"),
    ("0" * 100, "zero_padded"),  # no digit limit: a code is a code
    ("0", "integer"),  # one zero is how zero is written
    ("-0", "integer"),  # the integer 0 (int64 has no negative zero)
    ("0.5", "decimal"),  # one zero before the point is how a fraction is written
    ("-0.25", "decimal"),
    ("0e5", "float"),  # float forms: a number cast never keeps their text
    ("00e5", "float"),
    ("007.", "float"),
    ("+0012", "text"),  # a '+' is text, like "+12": int64 casts reject it
    (" 007", "text"),  # padding with spaces is text, like " 42"
]


@pytest.mark.parametrize(("value", "expected"), ZERO_PADDED_CASES)
def test_zero_padded_cases(value: str, expected: str) -> None:
    assert class_of(value) == expected


def test_zero_padded_is_a_class_on_every_path() -> None:
    values = [v for v, _ in ZERO_PADDED_CASES]
    masks = class_masks(pa.array(values))
    assert [next(c for c in CLASSES if masks[c][i].as_py()) for i in range(len(values))] == [
        c for _, c in ZERO_PADDED_CASES
    ]
    # A column of plain numbers takes observe.numbers' path; few distinct values the dictionary's.
    plain = ["000009113186", "09001", "06", "0900", "-007", "00.5", "0", "-0", "0.5", "12"] * 300
    scan = classify(pa.array(plain))
    assert scan.counts == {"zero_padded": 1800, "integer": 900, "decimal": 300}
    assert (scan.int_digits, scan.frac_digits) == (12, 1)  # "000009113186": its zeros are digits


def test_zero_padded_values_lose_their_zeros_in_a_number_cast() -> None:
    # source: REFERENCES.md section 5, pyarrow 26.0.1 pc.cast from string: "007" -> 7.
    codes = [v for v, c in ZERO_PADDED_CASES if c == "zero_padded" and "." not in v]
    as_ints = pc.cast(pa.array(codes), pa.int64()).to_pylist()
    assert [str(n) for n in as_ints] == ["9113186", "9001", "6", "900", "0", "-7", "0", "0"]
    assert all(str(n) != v for n, v in zip(as_ints, codes, strict=True))
    assert pc.cast(pa.array(["00.5", "-00.50"]), pa.float64()).to_pylist() == [0.5, -0.5]


# source: 2**63 - 1 = 9223372036854775807 and -2**63 (two's complement int64, e.g. C's
# INT64_MAX / INT64_MIN); REFERENCES.md section 5: pc.cast accepts 9223372036854775807 and
# rejects 9223372036854775808.
INT64_EDGES = [
    ("9223372036854775807", "integer"),
    ("-9223372036854775808", "integer"),
    ("9223372036854775808", "decimal"),
    ("-9223372036854775809", "decimal"),
    ("1000000000000000000", "integer"),  # the smallest 19-digit number
    ("-1000000000000000000", "integer"),
    ("9999999999999999999", "decimal"),
    ("10000000000000000000", "decimal"),  # 20 digits
]


def test_integers_of_19_digits_are_int64_when_they_fit() -> None:
    values = [v for v, _ in INT64_EDGES]
    assert [class_of(v) for v in values] == [c for _, c in INT64_EDGES]
    masks = class_masks(pa.array(values))
    assert masks["integer"].to_pylist() == [c == "integer" for _, c in INT64_EDGES]
    assert masks["decimal"].to_pylist() == [c == "decimal" for _, c in INT64_EDGES]
    for value, cls in INT64_EDGES:
        assert casts([value], pa.int64()) == (cls == "integer"), value


def test_ids_of_19_digits_are_integers_not_decimals() -> None:
    # Snowflake-style ids (common practice: 64-bit ids of 19 digits) all fit int64.
    ids = [str(2**63 - 1 - 7919 * k) for k in range(2000)] + [str(10**18 + k) for k in range(200)]
    scan = classify(pa.array(ids))
    assert scan.counts == {"integer": 2200}
    assert casts(ids, pa.int64())


# source: IEEE 754 binary64: the largest finite value is 1.7976931348623157e308 (a string
# rounds to infinity from the midpoint to 2**1024 up), the smallest subnormal 4.9e-324 (half
# of it rounds to 0); pyarrow 26.0.1 pc.cast(float64) gives inf / 0 for them (checked below).
FLOAT_RANGE_EDGES = [
    ("3E4415", "float_out_of_range", math.inf),  # a hex colour code read as a number
    ("1e400", "float_out_of_range", math.inf),
    ("-1e400", "float_out_of_range", -math.inf),
    (".5e400", "float_out_of_range", math.inf),
    ("1" * 400, "float_out_of_range", math.inf),
    ("1e-400", "float_out_of_range", 0.0),
    ("-2e-324", "float_out_of_range", -0.0),
    ("1.7976931348623157e308", "float", 1.7976931348623157e308),
    ("1.7976931348623158e308", "float", 1.7976931348623157e308),  # below the midpoint
    ("1.7976931348623159e308", "float_out_of_range", math.inf),
    ("3e-324", "float", 5e-324),
    ("0e999", "float", 0.0),  # zero is zero
    ("0.000e-999", "float", 0.0),
    ("inf", "float", math.inf),  # the text says infinity: nothing is lost
    ("-Infinity", "float", -math.inf),
    ("1" * 77, "float", float("1" * 77)),
]


def test_floats_float64_cannot_hold() -> None:
    values = [v for v, _, _ in FLOAT_RANGE_EDGES]
    got = pc.cast(pa.array(values), pa.float64()).to_pylist()
    assert got == [x for _, _, x in FLOAT_RANGE_EDGES]
    assert [math.copysign(1, g) for g in got] == [math.copysign(1, x) for _, _, x in FLOAT_RANGE_EDGES]
    assert [class_of(v) for v in values] == [c for _, c, _ in FLOAT_RANGE_EDGES]
    scan = classify(pa.array(values))
    assert scan.counts == {"float": 8, "float_out_of_range": 8}
    assert scan.first_index == {"float": 7, "float_out_of_range": 0}


# -- linear time on any input ----------------------------------------------------------------

# Each of these made a backtracking pattern take time quadratic in the length (32,000 digits
# and a letter took 20 s); at 100,000 characters a quadratic pattern needs minutes.
_LONG = 100_000
ADVERSARIAL = [
    "1" * _LONG + "x",
    "1" * _LONG + ".",
    "1." + "1" * _LONG + "x",
    "1e" + "1" * _LONG + "x",
    "0" * _LONG + "x",
    "-" + "0" * _LONG + ".x",
    "-" * _LONG,
    ":" * _LONG,
    "." * _LONG,
    "e" * _LONG,
    "1e" * (_LONG // 2),
    "1." * (_LONG // 2),
    "2024-01-01T00:00:00." + "1" * _LONG + "x",
    "2024-01-01 00:00:00." + "1" * _LONG + "+0",
    "1" * _LONG,
    "1" * (_LONG // 2) + "." + "1" * (_LONG // 2),
]


@pytest.mark.timeout(60)
def test_classifiers_are_linear_on_adversarial_strings() -> None:
    expected = ["text", "float_out_of_range"] + ["text"] * 12 + ["float_out_of_range"] * 2  # "1…1." is "1." form
    assert [class_of(v) for v in ADVERSARIAL] == expected
    arr = pa.array(ADVERSARIAL)
    masks = class_masks(arr)
    assert [next(c for c in CLASSES if masks[c][i].as_py()) for i in range(len(arr))] == expected
    from driftline.observe.fast.strprofile import string_profile

    assert string_profile(pa.array(ADVERSARIAL * 3)).counts == {"float_out_of_range": 9, "text": 39}


_run = st.builds(
    lambda head, unit, n, tail: head + unit * n + tail,
    st.sampled_from(["", "-", "0", "1", "1.", "1e", "2024-01-01T00:00:00.", "00"]),
    st.sampled_from(["1", "0", "-", ":", ".", "e", "E", "1e", "0.", "1-", " "]),
    st.integers(20_000, 60_000),
    st.sampled_from(["", "x", ".", "e", "e+", "Z", "-", "1", " "]),
)


@pytest.mark.timeout(120)
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.lists(_run, min_size=1, max_size=3))
def test_classifiers_are_linear_on_long_runs(values: list[str]) -> None:
    # Whatever a pattern does with a long run, every path agrees with class_of, in bounded time:
    # the masks, string_profile (dictionary and plain-number shortcuts) and the bulk verdicts.
    from driftline.observe.fast.strprofile import string_profile, verdicts

    want = [class_of(v) for v in values]
    masks = class_masks(pa.array(values))
    assert [next(c for c in CLASSES if masks[c][i].as_py()) for i in range(len(values))] == want
    assert string_profile(pa.array(values * 2)).counts == {c: 2 * want.count(c) for c in CLASSES if c in want}
    assert [CLASSES[k] for k in verdicts(pa.array(values)).kind.to_pylist()] == want
