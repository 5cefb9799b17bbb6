"""strprofile.string_profile equals the per-value definition (textclass.class_of) on every path.

The reference here is textclass.class_of, value by value in Python: the class of each value
(the first class of textclass.CLASSES whose definition it meets), the first three rows of
each class, the longest value, the digits of integers, decimals and zero-padded codes, leap seconds and
lowercase RFC 3339 timestamps.  The columns are built so that each shortcut of
string_profile is taken (few distinct values, a dictionary, one timestamp shape, plain
numbers checked in one pass) and so that each is refused at its edges.
"""

from __future__ import annotations

import random
from pathlib import Path

import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from driftline.observe.fast import strprofile
from driftline.observe.fast.strprofile import StringProfile, string_profile
from driftline.observe.textclass import CLASSES, class_of

SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
_STAMPS = ("timestamp_rfc3339", "timestamp_offset", "timestamp_local")


def reference(values: list[str | None], keep_first: int = 3) -> StringProfile:
    counts: dict[str, int] = {}
    first: dict[str, list[int]] = {}
    longest = int_digits = frac_digits = leap = lower = 0
    for i, v in enumerate(values):
        if v is None:
            continue
        cls = class_of(v)
        counts[cls] = counts.get(cls, 0) + 1
        hits = first.setdefault(cls, [])
        if len(hits) < keep_first:
            hits.append(i)
        longest = max(longest, len(v))
        if cls in ("zero_padded", "integer", "decimal"):
            head, _, tail = v.removeprefix("-").partition(".")
            int_digits, frac_digits = max(int_digits, len(head)), max(frac_digits, len(tail))
        leap += cls in _STAMPS and v[17:19] == "60"
        lower += cls == "timestamp_rfc3339" and ("t" in v or "z" in v)
    order = [c for c in CLASSES if c in counts]
    return StringProfile(
        {c: counts[c] for c in order}, {c: first[c] for c in order}, longest, int_digits, frac_digits, leap, lower
    )


def check(values: list[str | None], typ: pa.DataType = pa.string()) -> StringProfile:
    got = string_profile(pa.array(values, typ))
    assert got == reference(values)
    return got


# -- plain numbers: one anchored pass instead of class_masks ----------------------------

# textclass: zero_padded is a '0' before another digit, integer within int64 (19 digits up to the
# bound), decimal a point form or an integer past int64 up to 76 digits in all, float beyond that;
# a leading '+', a bare point side or an exponent is not this shape.
_EDGES = [
    "0",
    "-0",
    "007",
    "9" * 18,
    "-" + "9" * 18,
    "1" * 19,
    "-" + "1" * 19,
    "1" * 76,
    "1" * 75 + ".5",
    "0.5",
    "-0.5",
    "00.50",
    "12345678901234567.8",
    "9223372036854775807",
    "9223372036854775808",
    "-9223372036854775808",
    "-9223372036854775809",
    "-00",
    "0" * 20,
]
_NOT_PLAIN = [
    "1" * 77,
    "1" * 76 + ".5",
    ".5",
    "5.",
    "-.5",
    "+1",
    "1e5",
    "-",
    "",
    " 1",
    "1 ",
    "1.2.3",
    "--1",
    "1-",
    "0x1F",
    "١٢",
    "nan",
    "１",
]


def test_plain_number_columns_take_one_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    calls: list[int] = []
    real = strprofile.class_masks
    monkeypatch.setattr(strprofile, "class_masks", lambda arr: calls.append(len(arr)) or real(arr))
    rng = random.Random(3)
    ints = [str(rng.randrange(-(10**12), 10**12)) for _ in range(5000)]
    p = check(ints)
    assert set(p.counts) == {"integer"} and p.first == {"integer": [0, 1, 2]}
    mixed = [
        rng.choice(_EDGES) if rng.random() < 0.2 else f"{rng.uniform(-1e6, 1e6):.{rng.randrange(5)}f}"
        for _ in range(5000)
    ]
    p = check(mixed)
    assert set(p.counts) == {"zero_padded", "integer", "decimal"}
    assert (p.int_digits, p.frac_digits) == (76, 4)  # "1" * 76, and the 4-place amounts
    assert calls == []  # neither column needed class_masks


@pytest.mark.parametrize("odd", _NOT_PLAIN)
@pytest.mark.parametrize("where", [0, 7, 3000, 4999])  # the first value, in the probe, past it, the last
def test_one_value_off_the_shape_gives_the_reference_answer(odd: str, where: int) -> None:
    rng = random.Random(where)
    values: list[str | None] = [f"{rng.randrange(10**9)}.{rng.randrange(100):02d}" for _ in range(5000)]
    values[where] = odd
    values[where // 2 + 1] = None
    check(values)
    check(values, pa.large_string())


def test_nulls_slices_and_repeats() -> None:
    rng = random.Random(5)
    values = [
        None if rng.random() < 0.1 else str(rng.randrange(-500, 500)) + rng.choice(["", ".25"]) for _ in range(6000)
    ]
    check(values)
    arr = pa.array(values, pa.string())
    for start, n in ((1, 4000), (2500, 3500), (5999, 1)):  # an offset into shared buffers
        assert string_profile(arr.slice(start, n)) == reference(values[start : start + n])
    assert string_profile(pa.array([None] * 2000 + ["1"], pa.string())) == reference([None] * 2000 + ["1"])


_number = st.one_of(
    st.integers(-(10**80), 10**80).map(str),
    st.builds(
        lambda s, a, b: f"{s}{a}.{b}",
        st.sampled_from(["", "-"]),
        st.integers(0, 10**40),
        st.text("0123456789", min_size=1, max_size=40),
    ),
    st.sampled_from(_EDGES + _NOT_PLAIN),
)


@SETTINGS
@given(st.lists(st.one_of(st.none(), _number), max_size=40), st.booleans(), st.integers(0, 2**32))
def test_numbers_against_the_reference(odd: list[str | None], repeats: bool, seed: int) -> None:
    # Hypothesis's values among plain numbers: 3,000 distinct ones (one pass over the column)
    # or 700 distinct ones repeated (one pass over the dictionary of more than FEW values).
    rng = random.Random(seed)
    n = 700 if repeats else 3000
    base = [str(rng.randrange(-(10**6), 10**6)) + rng.choice(["", ".5", ".125"]) for _ in range(n)]
    values: list[str | None] = list(base * 3 if repeats else base)
    for v in odd:
        values.insert(rng.randrange(len(values) + 1), v)
    check(values)


@pytest.mark.parametrize("hidden", [b"x", b"-", b".", b"12", b"-1.5", b""])
def test_bytes_under_null_values_change_nothing(hidden: bytes) -> None:
    # Arrow lets a null value's slot hold bytes (the format leaves them undefined); the byte
    # counts of the plain-number check see them, the answer must not.
    # source: Arrow columnar format, variable-size binary layout (null slots' contents are unspecified)
    cells = [b"7", hidden, b"-3.25"] * 700
    offsets = [0]
    for c in cells:
        offsets.append(offsets[-1] + len(c))
    validity = pa.array([i % 3 != 1 for i in range(len(cells))]).buffers()[1]
    arr = pa.Array.from_buffers(
        pa.string(), len(cells), [validity, pa.array(offsets, pa.int32()).buffers()[1], pa.py_buffer(b"".join(cells))]
    )
    assert arr.null_count == 700
    assert string_profile(arr) == reference(arr.to_pylist())


def test_few_values_with_leap_seconds_and_lowercase() -> None:
    # source: RFC 3339 section 5.6 (date-time; 't' and 'z' may be lowercase) and 5.7 (second 60)
    few = [
        "1990-12-31T23:59:60Z",
        "1985-04-12t23:20:50.52z",
        "1996-12-19T16:39:57-08:00",
        "2026-02-30T00:00:00Z",
        "1990-12-31 23:59:60",
        "x",
        None,
    ]
    rng = random.Random(2)
    values = [rng.choice(few) for _ in range(3000)]
    p = check(values)
    assert p.leap_seconds == values.count("1990-12-31T23:59:60Z") + values.count("1990-12-31 23:59:60")
    assert p.lowercase_rfc3339 == values.count("1985-04-12t23:20:50.52z")


@pytest.mark.parametrize("extra", [None, "", "1" * 19, "0" * 76, "9" * 77, "007"])
def test_digit_strings_that_repeat(extra: str | None) -> None:
    # Digits alone are checked whole before any dictionary; an empty value has no bytes to
    # show it, a 19-digit one is a decimal, 77 digits a float (textclass.CLASSES).
    rng = random.Random(4)
    values: list[str | None] = [str(rng.randrange(2000)) for _ in range(5000)]
    values[2500] = extra
    check(values)


@pytest.mark.parametrize("typ", [pa.string(), pa.large_string(), pa.binary(), pa.large_binary()])
def test_value_bytes_of_slices(typ: pa.DataType) -> None:
    # source: Arrow columnar format, variable-size binary layout (offsets into one data buffer;
    # a slice keeps the buffers and moves its offset)
    from driftline.observe.fast.valuebytes import value_bytes

    arr = pa.array(["ab", "", None, "cde", "f"], typ)
    assert value_bytes(arr) == b"abcdef"
    assert value_bytes(arr.slice(1, 3)) == b"cde"
    assert value_bytes(arr.slice(3)) == b"cdef"
    assert value_bytes(arr.slice(2, 1)) == b""
    assert value_bytes(arr.slice(5)) == b""


# -- a column read with its dictionary: the dictionary classified, the rows counted through it --

_POOL = ["7", "-12.50", "0042", "x", "", "2026-02-03", "2026-02-03T10:11:60Z", "2026-02-03t10:11:12z", "NaN", "é"]


@SETTINGS
@given(st.lists(st.sampled_from([*_POOL, None]), min_size=1, max_size=3000))
def test_dictionary_rows_against_the_reference(values: list[str | None]) -> None:
    # source: textclass.class_of value by value (the module's reference)
    dense = pa.array(values, pa.string())
    enc = dense.dictionary_encode()
    assert strprofile.encoded_rows(enc) is enc
    assert string_profile(dense, encoded=enc) == reference(values)


def test_parquet_dictionary_pages(tmp_path: Path) -> None:
    # source: pyarrow.parquet.read_table(read_dictionary=...), the column's dictionary pages as Arrow gives them
    import pyarrow.parquet as pq

    rng = random.Random(5)
    values = [rng.choice([*_POOL, None]) for _ in range(20_000)]
    path = f"{tmp_path}/d.parquet"
    pq.write_table(pa.table({"s": pa.array(values, pa.string())}), path, row_group_size=5_000)
    col = pq.read_table(path, read_dictionary=["s"])["s"]
    for chunk, start in zip(col.chunks, range(0, 20_000, 5_000), strict=True):
        assert pa.types.is_dictionary(chunk.type)
        enc = strprofile.encoded_rows(chunk)
        assert enc is chunk
        dense = chunk.cast(pa.string())
        assert string_profile(dense, encoded=enc) == reference(values[start : start + 5_000])


@pytest.mark.parametrize(
    "arr",
    [
        pa.DictionaryArray.from_arrays(pa.array([0, 0, 2], pa.int32()), pa.array(["a", "b", "7"])),  # 'b' unused
        pa.DictionaryArray.from_arrays(pa.array([0, 1, 2], pa.int32()), pa.array(["a", None, "7"])),  # null value
        pa.DictionaryArray.from_arrays(pa.array([0, 1, 2], pa.int32()), pa.array(["7", "a", "7"])),  # repeated
        pa.array(["a", "7"], pa.large_string()).dictionary_encode(),
        pa.array(["a", "7"]),
    ],
)
def test_dictionaries_not_classified_through(arr: pa.Array) -> None:
    # common practice: a dictionary with values no row uses, nulls or repeats would count them
    # (the longest value, the digits), so the column is classified row by row
    assert strprofile.encoded_rows(arr) is None
