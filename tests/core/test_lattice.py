"""driftline.core.lattice: join laws, the pyarrow oracle, Arrow conversion and parse_key."""

from __future__ import annotations

import dataclasses
import itertools

import pyarrow as pa
import pyarrow.compute as pc
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from driftline.core.lattice import (
    BINARY,
    BOOL,
    DATE32,
    DELIBERATE_DIFFERENCES,
    FLOAT64,
    INT64,
    NAMES,
    NULL,
    STRING,
    UNKNOWN,
    DType,
    family,
    from_arrow,
    is_widening,
    join,
    join_all,
    parse_key,
    to_arrow,
)

# ---------------------------------------------------------------------------------------------
# Strategies: scalars -> nested types -> (through join) unions
# ---------------------------------------------------------------------------------------------

_SIMPLE = (
    "bool",
    "int8",
    "int16",
    "int32",
    "int64",
    "uint8",
    "uint16",
    "uint32",
    "uint64",
    "float16",
    "float32",
    "float64",
    "string",
    "binary",
    "date32",
    "date64",
)
_TZS = (None, "UTC", "+01:00", "America/New_York")
# Names that need backtick quoting in keys sit beside plain ones.
_FIELD_NAMES = ("a", "b", "c", "x y", "a:b", "p|q", "<>", "it`s", "o'k", '"q"', "", "ü", "a,b")

_decimals = st.integers(1, 76).flatmap(
    lambda p: st.integers(0, p).map(lambda s: DType("decimal", precision=p, scale=s))
)
_scalars = st.one_of(
    st.sampled_from([DType(n) for n in _SIMPLE]),
    _decimals,
    st.sampled_from(
        [DType("time32", unit=u) for u in ("s", "ms")]
        + [DType("time64", unit=u) for u in ("us", "ns")]
        + [DType("duration", unit=u) for u in ("s", "ms", "us", "ns")]
    ),
    st.builds(
        lambda u, tz: DType("timestamp", unit=u, tz=tz), st.sampled_from(("s", "ms", "us", "ns")), st.sampled_from(_TZS)
    ),
)


def _maybe_nullable(types: st.SearchStrategy[DType]) -> st.SearchStrategy[DType]:
    return st.builds(lambda t, n: t.with_nullable(n), types, st.booleans())


def _nested(with_unknown: bool) -> st.SearchStrategy[DType]:
    leaves = st.one_of(_scalars, st.just(NULL), *([st.just(UNKNOWN)] if with_unknown else []))

    def extend(children: st.SearchStrategy[DType]) -> st.SearchStrategy[DType]:
        return _maybe_nullable(
            st.one_of(
                st.builds(lambda t: DType("list", item=t), children),
                st.dictionaries(st.sampled_from(_FIELD_NAMES), children, max_size=3).map(
                    lambda d: DType("struct", fields=tuple(d.items()))
                ),
                st.builds(lambda k, v: DType("map", fields=(("key", k), ("value", v))), _scalars, children),
            )
        )

    return st.recursive(_maybe_nullable(leaves), extend, max_leaves=6)


nested = _nested(with_unknown=True)
arrow_types = _nested(with_unknown=False)  # unknown has no Arrow type of its own
# join builds unions, so the laws are checked on union inputs too.
any_types = st.lists(nested, min_size=1, max_size=3).map(join_all)

_FAST = settings(max_examples=200, deadline=None)


def strip(t: DType) -> DType:
    """t with every nullability flag cleared (null stays nullable by definition)."""
    return dataclasses.replace(
        t.with_nullable(False),
        item=strip(t.item) if t.item is not None else None,
        fields=tuple((n, strip(c)) for n, c in t.fields),
        members=tuple(strip(m) for m in t.members),
    )


# ---------------------------------------------------------------------------------------------
# Laws
# ---------------------------------------------------------------------------------------------


@_FAST
@given(any_types, any_types)
def test_join_is_commutative(a: DType, b: DType) -> None:
    assert join(a, b) == join(b, a)


@_FAST
@given(any_types, any_types, any_types)
def test_join_is_associative(a: DType, b: DType, c: DType) -> None:
    assert join(join(a, b), c) == join(a, join(b, c))


@_FAST
@given(any_types)
def test_join_is_idempotent(t: DType) -> None:
    assert join(t, t) == t


@_FAST
@given(any_types)
def test_null_is_identity_up_to_nullability(t: DType) -> None:
    assume(t.name != "unknown")  # unknown is the identity of everything, null included
    assert join(NULL, t) == t.with_nullable(True)
    assert join(t, NULL) == t.with_nullable(True)


@_FAST
@given(any_types)
def test_unknown_is_identity(t: DType) -> None:
    assert join(UNKNOWN, t) == t
    assert join(t, UNKNOWN) == t


@_FAST
@given(any_types)
def test_parse_key_inverts_key(t: DType) -> None:
    assert parse_key(t.key()) == strip(t)


@_FAST
@given(arrow_types)
def test_arrow_round_trip(t: DType) -> None:
    # A bare Arrow type has no nullability of its own; children keep theirs through fields.
    assert from_arrow(to_arrow(t)) == t.with_nullable(False)


@_FAST
@given(any_types)
def test_unions_are_flat_with_one_member_per_family(t: DType) -> None:
    if t.name == "union":
        fams = [family(m) for m in t.members]
        assert len(fams) == len(set(fams)) >= 2
        assert not {"null", "unknown", "union"} & set(fams)
        assert [m.key() for m in t.members] == sorted(m.key() for m in t.members)


_NUMERIC = [DType(n) for n in _SIMPLE[1:12]] + [
    DType("decimal", precision=p, scale=s)
    for p, s in [(1, 0), (3, 0), (5, 2), (10, 4), (20, 0), (38, 10), (76, 0), (76, 76), (5, 7), (5, -2)]
]


def test_numeric_join_is_associative_exhaustively() -> None:
    # Hypothesis rarely draws int8, uint8 and float16 together, where pyarrow's table is not
    # associative; walk every triple instead.
    bad = [
        (a.key(), b.key(), c.key())
        for a, b, c in itertools.product(_NUMERIC, repeat=3)
        if join(join(a, b), c) != join(a, join(b, c))
    ]
    assert bad == []


def test_uint8_widens_float16_as_int16_does() -> None:
    int8, uint8, f16 = DType("int8"), DType("uint8"), DType("float16")
    assert join(int8, f16) == f16  # as pyarrow
    assert join(join(int8, uint8), f16) == DType("float32")
    assert join(int8, join(uint8, f16)) == DType("float32")


# ---------------------------------------------------------------------------------------------
# Oracle: pyarrow's permissive unify
# ---------------------------------------------------------------------------------------------

# source: pyarrow 26.0.1 unify_schemas(promote_options="permissive"), values in REFERENCES
# section 5
ORACLE_TYPES = [
    pa.int8(),
    pa.int16(),
    pa.int32(),
    pa.int64(),
    pa.uint8(),
    pa.uint16(),
    pa.uint32(),
    pa.uint64(),
    pa.float16(),
    pa.float32(),
    pa.float64(),
    pa.decimal128(5, 2),
    pa.decimal128(10, 4),
    pa.decimal128(38, 10),
    pa.decimal128(38, 0),
    pa.string(),
    pa.large_string(),
    pa.binary(),
    pa.bool_(),
    pa.date32(),
    pa.date64(),
    pa.timestamp("s"),
    pa.timestamp("ms"),
    pa.timestamp("us"),
    pa.timestamp("ns"),
    pa.timestamp("s", "UTC"),
    pa.timestamp("us", "UTC"),
    pa.timestamp("ms", "+01:00"),
    pa.time32("s"),
    pa.time32("ms"),
    pa.time64("us"),
    pa.time64("ns"),
    pa.duration("s"),
    pa.duration("us"),
    pa.list_(pa.int64()),
    pa.list_(pa.float64()),
    pa.struct([("a", pa.int64())]),
    pa.struct([("b", pa.string())]),
    pa.null(),
]


def _unify(a: pa.DataType, b: pa.DataType) -> pa.DataType | None:
    try:
        schema = pa.unify_schemas([pa.schema([("x", a)]), pa.schema([("x", b)])], promote_options="permissive")
    except (pa.ArrowTypeError, pa.ArrowInvalid):
        return None
    return schema.field("x").type


def _listed(ka: str, kb: str) -> bool:
    return (ka, kb) in DELIBERATE_DIFFERENCES or (kb, ka) in DELIBERATE_DIFFERENCES


def test_join_agrees_with_pyarrow_except_deliberately() -> None:
    wrong, stale, seen = [], [], set()
    for a, b in itertools.product(ORACLE_TYPES, repeat=2):
        da, db = from_arrow(a), from_arrow(b)
        ours = join(da, db)  # must not raise, whatever pyarrow does
        assert ours.name in NAMES
        theirs = _unify(a, b)
        seen |= {(da.key(), db.key())}
        if theirs is None:
            continue
        agrees = ours.key() == from_arrow(theirs).key()
        if _listed(da.key(), db.key()):
            stale += [] if not agrees else [(da.key(), db.key())]
        elif not agrees:
            wrong.append((da.key(), db.key(), ours.key(), str(theirs)))
    assert wrong == []
    assert stale == []
    # Every listed difference is a pair the oracle walks, so none can linger unchecked.
    assert [p for p in DELIBERATE_DIFFERENCES if p not in seen] == []


def _pa_join(a: pa.DataType, b: pa.DataType) -> DType:
    return join(from_arrow(a), from_arrow(b))


def _non_null(name: str, t: pa.DataType) -> pa.Field:
    return pa.field(name, t, nullable=False)


def test_reference_table() -> None:
    # source: pyarrow 26.0.1 unify_schemas(promote_options="permissive"), values in REFERENCES
    # section 5 (ours where the reference marks pyarrow in bold, see DELIBERATE_DIFFERENCES)
    assert _pa_join(pa.int8(), pa.int64()) == INT64
    assert _pa_join(pa.int32(), pa.uint32()) == INT64
    assert _pa_join(pa.int64(), pa.float64()) == FLOAT64
    assert _pa_join(pa.float32(), pa.int64()) == FLOAT64
    assert _pa_join(pa.null(), pa.int32()) == DType("int32", nullable=True)
    assert _pa_join(pa.decimal128(5, 2), pa.decimal128(10, 4)) == DType("decimal", precision=10, scale=4)
    d48 = _pa_join(pa.decimal128(38, 10), pa.decimal128(38, 0))
    assert d48 == DType("decimal", precision=48, scale=10)
    assert to_arrow(d48) == pa.decimal256(48, 10)
    assert _pa_join(pa.decimal128(5, 2), pa.float64()) == FLOAT64
    assert _pa_join(pa.string(), pa.large_string()) == STRING
    assert _pa_join(pa.list_(pa.int64()), pa.list_(pa.float64())).key() == "list<float64>"
    ab = _pa_join(pa.struct([_non_null("a", pa.int64())]), pa.struct([_non_null("b", pa.string())]))
    assert ab == DType("struct", fields=(("a", INT64.with_nullable(True)), ("b", STRING.with_nullable(True))))
    assert ab.key() == "struct<a: int64, b: string>"
    assert _pa_join(pa.timestamp("s"), pa.timestamp("us")) == DType("timestamp", unit="us")
    assert _pa_join(pa.date32(), pa.date64()) == DType("date64")
    assert _pa_join(pa.int64(), pa.string()).key() == "union<int64 | string>"
    assert _pa_join(pa.bool_(), pa.int8()).key() == "union<bool | int8>"
    # local time and instants are different families: pyarrow raises, we keep both
    assert _pa_join(pa.timestamp("s"), pa.timestamp("us", "UTC")).key() == "union<timestamp[s] | timestamp[us, UTC]>"


def test_deliberate_differences_hold_their_values() -> None:
    # source: REFERENCES section 5: pc.cast(int64 -> decimal128(20,2)) fails for 10**17
    big = pa.array([10**17], pa.int64())
    with pytest.raises(pa.ArrowInvalid, match="at least 21"):
        pc.cast(big, pa.decimal128(20, 2))
    ours = _pa_join(pa.decimal128(5, 2), pa.int64())
    assert ours == DType("decimal", precision=21, scale=2)
    assert pc.cast(big, to_arrow(ours)).to_pylist() == [10**17]
    assert _pa_join(pa.int64(), pa.uint64()) == DType("decimal", precision=20, scale=0)
    assert _pa_join(pa.date32(), pa.timestamp("ms")) == DType("timestamp", unit="ms")
    assert _pa_join(pa.string(), pa.binary()).key() == "union<binary | string>"


_INTS = [pa.int8(), pa.int16(), pa.int32(), pa.int64(), pa.uint8(), pa.uint16(), pa.uint32(), pa.uint64()]


def _extremes(t: pa.DataType) -> pa.Array:
    bits = t.bit_width
    lo, hi = (0, 2**bits - 1) if pa.types.is_unsigned_integer(t) else (-(2 ** (bits - 1)), 2 ** (bits - 1) - 1)
    return pa.array([lo, hi], t)


@pytest.mark.parametrize("dec", [t for t in ORACLE_TYPES if pa.types.is_decimal(t)], ids=str)
@pytest.mark.parametrize("it", _INTS, ids=str)
def test_int_plus_decimal_holds_every_int(it: pa.DataType, dec: pa.DataType) -> None:
    values = _extremes(it)
    assert pc.cast(values, to_arrow(_pa_join(it, dec))).to_pylist() == values.to_pylist()


@pytest.mark.parametrize("ft", [pa.float16(), pa.float32(), pa.float64()], ids=str)
@pytest.mark.parametrize("it", _INTS[:3] + _INTS[4:7], ids=str)
def test_int_plus_float_holds_every_int(it: pa.DataType, ft: pa.DataType) -> None:
    # int64/uint64 -> float64 is accepted as lossy; every narrower int must survive exactly.
    values = _extremes(it)
    joined = to_arrow(_pa_join(it, ft))
    assert pc.cast(pc.cast(values, joined, safe=False), it).to_pylist() == values.to_pylist()


# ---------------------------------------------------------------------------------------------
# Conversion, keys and parse_key
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("arrow", "key"),
    [
        (pa.large_string(), "string"),
        (pa.string_view(), "string"),
        (pa.dictionary(pa.int32(), pa.string()), "string"),
        (pa.binary(16), "binary"),
        (pa.binary_view(), "binary"),
        (pa.large_list(pa.int64()), "list<int64>"),
        (pa.list_(pa.int32(), 3), "list<int32>"),
        (pa.list_view(pa.string()), "list<string>"),
        (pa.decimal256(40, 2), "decimal(40,2)"),
        (pa.decimal32(5, 2), "decimal(5,2)"),
        (pa.map_(pa.string(), pa.int64()), "map<string, int64>"),
        (pa.run_end_encoded(pa.int32(), pa.float32()), "float32"),
        (pa.uuid(), "binary"),
        (pa.json_(), "string"),
        (pa.timestamp("us", "UTC"), "timestamp[us, UTC]"),
        (pa.time32("ms"), "time32[ms]"),
        (pa.duration("s"), "duration[s]"),
        (pa.struct([("b", pa.string()), ("a", pa.int64())]), "struct<a: int64, b: string>"),
        (pa.dense_union([pa.field("i", pa.int32()), pa.field("s", pa.string())]), "union<int32 | string>"),
    ],
)
def test_from_arrow_normalises(arrow: pa.DataType, key: str) -> None:
    assert from_arrow(arrow).key() == key


def test_from_arrow_keeps_child_nullability() -> None:
    assert from_arrow(pa.null()) == NULL
    t = from_arrow(pa.struct([pa.field("b", pa.int64(), nullable=False), ("a", pa.string())]))
    assert t.fields == (("a", STRING.with_nullable(True)), ("b", INT64))
    m = from_arrow(pa.map_(pa.string(), pa.field("value", pa.int64(), nullable=False)))
    assert m.fields == (("key", STRING), ("value", INT64))


def test_to_arrow() -> None:
    assert to_arrow(DType("decimal", precision=38, scale=2)) == pa.decimal128(38, 2)
    assert to_arrow(DType("decimal", precision=39, scale=2)) == pa.decimal256(39, 2)
    assert to_arrow(UNKNOWN) == pa.null()
    assert to_arrow(DType("struct", fields=(("a", INT64),))) == pa.struct([pa.field("a", pa.int64(), nullable=False)])
    with pytest.raises(ValueError, match="no single Arrow type"):
        to_arrow(join(INT64, STRING))
    with pytest.raises(ValueError, match="no single Arrow type"):
        to_arrow(DType("list", item=join(BOOL, DATE32)))
    with pytest.raises(ValueError, match="decimal256"):
        to_arrow(DType("decimal", precision=77, scale=0))


def test_keys() -> None:
    assert [t.key() for t in (NULL, UNKNOWN, BOOL, BINARY, DATE32)] == ["null", "unknown", "bool", "binary", "date32"]
    assert DType("decimal", precision=10, scale=2).key() == "decimal(10,2)"
    assert DType("time64", unit="us").key() == "time64[us]"
    assert DType("timestamp", unit="us", tz="+01:00").key() == "timestamp[us, +01:00]"
    m = DType("map", fields=(("key", STRING), ("value", DType("list", item=INT64))))
    assert m.key() == "map<string, list<int64>>"
    assert m.shallow_key() == "map"
    assert INT64.shallow_key() == "int64"
    s = DType("struct", fields=(("x`y", STRING), ("a:b", INT64.with_nullable(True)), ("", BOOL)))
    assert s.key() == "struct<``: bool, `a:b`: int64, `x``y`: string>"
    assert parse_key(s.key()) == strip(s)


def test_wide_decimals_fall_back_to_float64() -> None:
    wide = join(DType("decimal", precision=76, scale=0), DType("decimal", precision=76, scale=76))
    assert wide == FLOAT64


@pytest.mark.parametrize(
    "text",
    [
        "",
        "int",
        "int64 ",
        "list<int64",
        "decimal(5)",
        "decimal(05,2)",
        "time32[ns]",
        "timestamp[us, ]",
        "struct<b: int64, a: int64>",
        "struct<a b: int64>",
        "union<string | int64>",
        "union<int64 | int32>",
        "union<int64>",
        "map<string>",
        "struct<`a: int64>",
        "list<null | int64>",
    ],
)
def test_parse_key_rejects_garbage(text: str) -> None:
    with pytest.raises(ValueError) as err:
        parse_key(text)
    assert repr(text) in str(err.value)


def test_join_all_and_family() -> None:
    assert join_all([]) == UNKNOWN
    assert join_all([NULL]) == NULL
    assert join(NULL, UNKNOWN) == join(UNKNOWN, NULL) == NULL
    assert join_all([INT64, NULL, FLOAT64]) == FLOAT64.with_nullable(True)
    assert family(DType("timestamp", unit="s")) == "local-time"
    assert family(DType("timestamp", unit="s", tz="UTC")) == "instant"
    assert family(DType("decimal", precision=3, scale=1)) == "numeric"


def test_is_widening() -> None:
    assert is_widening(INT64, FLOAT64) is True
    assert is_widening(INT64, STRING) is False
    assert is_widening(FLOAT64, INT64) is False  # join is float64 == old
