"""The recommended Arrow type against pyarrow's own answer for each pair of observed types.

source: pyarrow 26.0.1 pa.unify_schemas(..., promote_options="permissive"), the pairs of
REFERENCES.md section 5. Where pyarrow answers, the recommendation agrees, or DIFFERENT
says why it does not; where pyarrow raises, RAISES says what the recommendation does.
"""

from __future__ import annotations

import datetime as dt
import decimal
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest

import driftline
from driftline.core.lattice import from_arrow

D = decimal.Decimal
T0 = dt.datetime(2026, 1, 2, 3, 4, 5)
PAIRS: dict[str, tuple[pa.Array, pa.Array]] = {
    "int8+int64": (pa.array([1], pa.int8()), pa.array([2], pa.int64())),
    "int32+uint32": (pa.array([1], pa.int32()), pa.array([2], pa.uint32())),
    "int64+uint64": (pa.array([-1], pa.int64()), pa.array([2**64 - 1], pa.uint64())),
    "int64+float64": (pa.array([1], pa.int64()), pa.array([0.5], pa.float64())),
    "int64 past 2**53+float64": (pa.array([2**53 + 1], pa.int64()), pa.array([0.5], pa.float64())),
    "float32+int64": (pa.array([0.5], pa.float32()), pa.array([2], pa.int64())),
    "null+int32": (pa.array([None], pa.null()), pa.array([2], pa.int32())),
    "decimal(5,2)+decimal(10,4)": (
        pa.array([D("1.25")], pa.decimal128(5, 2)),
        pa.array([D("1.2345")], pa.decimal128(10, 4)),
    ),
    "decimal(38,10)+decimal(38,0)": (pa.array([D(1)], pa.decimal128(38, 10)), pa.array([D(1)], pa.decimal128(38, 0))),
    "decimal(5,2)+int64": (pa.array([D("1.25")], pa.decimal128(5, 2)), pa.array([10**17], pa.int64())),
    "decimal(5,2)+float64": (pa.array([D("1.25")], pa.decimal128(5, 2)), pa.array([0.5], pa.float64())),
    "string+large_string": (pa.array(["a"], pa.string()), pa.array(["b"], pa.large_string())),
    "list<int64>+list<double>": (pa.array([[1]], pa.list_(pa.int64())), pa.array([[0.5]], pa.list_(pa.float64()))),
    "struct<a>+struct<b>": (
        pa.array([{"a": 1}], pa.struct([("a", pa.int64())])),
        pa.array([{"b": "x"}], pa.struct([("b", pa.string())])),
    ),
    "timestamp[ms]+timestamp[us]": (pa.array([T0], pa.timestamp("ms")), pa.array([T0], pa.timestamp("us"))),
    "date32+date64": (pa.array([T0.date()], pa.date32()), pa.array([T0.date()], pa.date64())),
    "timestamp[ms]+timestamp[us, UTC]": (
        pa.array([T0], pa.timestamp("ms")),
        pa.array([T0.replace(tzinfo=dt.UTC)], pa.timestamp("us", "UTC")),
    ),
    "date32+timestamp[us]": (pa.array([T0.date()], pa.date32()), pa.array([T0], pa.timestamp("us"))),
    "int64+string": (pa.array([1], pa.int64()), pa.array(["5"], pa.string())),
    "bool+int8": (pa.array([True], pa.bool_()), pa.array([1], pa.int8())),
}
# pyarrow answers, and driftline answers otherwise, on purpose.
DIFFERENT = {
    "int64+uint64": ("decimal(20,0)", "pyarrow gives int64, which cannot hold uint64 values over 2**63-1"),
    "decimal(5,2)+int64": (
        "decimal(21,2)",
        "pyarrow's decimal128(20,2) has 18 integer digits: pc.cast of an "
        "int64 into it fails (checked below); int64 needs 19",
    ),
}
# pyarrow raises ArrowTypeError (or, for a string, cannot merge with a number); what driftline does.
RAISES = {
    "timestamp[ms]+timestamp[us, UTC]": ("timestamp[us, UTC]", "assumed_zone"),
    "date32+timestamp[us]": ("timestamp[us]", None),
    "int64+string": ("int64", None),  # the string "5" reads as an integer beside real ones
    "bool+int8": ("string", "as_text"),
}


def _scan_pair(tmp_path: Path, a: pa.Array, b: pa.Array) -> tuple[pa.DataType, pa.DataType, driftline.Profile]:
    pq.write_table(pa.table({"x": a}), tmp_path / "a.parquet")
    pq.write_table(pa.table({"x": b}), tmp_path / "b.parquet")
    # The types as the files hold them (Parquet stores timestamp[s] as ms, for one).
    ta, tb = (pq.read_schema(tmp_path / f"{n}.parquet").field("x").type for n in "ab")
    return ta, tb, driftline.scan(tmp_path)


@pytest.mark.parametrize("pair", list(PAIRS))
def test_recommended_type_agrees_with_unify_schemas_or_says_why(tmp_path: Path, pair: str):
    ta, tb, profile = _scan_pair(tmp_path, *PAIRS[pair])
    rec = profile.recommend()
    plan = rec.plan("x")
    ours = rec.arrow_schema().field("x").type
    try:
        theirs = (
            pa.unify_schemas([pa.schema([("x", ta)]), pa.schema([("x", tb)])], promote_options="permissive")
            .field("x")
            .type
        )
    except (pa.ArrowTypeError, pa.ArrowInvalid):
        theirs = None
    if theirs is None:
        key, cause = RAISES[pair]
        assert plan.target.key() == key
        assert cause is None or plan.effect(cause) is not None
        return
    assert pair not in RAISES
    if pair in DIFFERENT:
        assert plan.target.key() == DIFFERENT[pair][0] != from_arrow(theirs).key()
    else:
        # Logical equality: pyarrow's large_string is driftline's string, and element
        # nullability is driftline's own finding (no element was null).
        assert from_arrow(ours).key() == from_arrow(theirs).key()
    if pair == "int64 past 2**53+float64":
        assert plan.effect("unsafe_int").count == 1  # agrees on double, and says what it costs


def test_pyarrow_cannot_fill_its_own_decimal_from_int64():
    # source: pyarrow 26.0.1 pc.cast(int64 -> decimal128(20,2)) "Precision ... should be at
    # least 21" (REFERENCES.md section 5); the recommended decimal(21,2) takes the value.
    with pytest.raises(pa.ArrowInvalid, match="at least 21"):
        pc.cast(pa.array([10**17]), pa.decimal128(20, 2))
    assert pc.cast(pa.array([10**17]), pa.decimal128(21, 2)).to_pylist() == [D("100000000000000000.00")]


def test_pyarrow_string_casts_that_the_rules_refuse():
    # source: pyarrow 26.0.1 pc.cast from string (REFERENCES.md section 5): "0x1F" -> 31 and
    # "1" -> true; the content classes call both text, so no parse rule accepts them.
    assert pc.cast(pa.array(["0x1F"]), pa.int64()).to_pylist() == [31]
    assert pc.cast(pa.array(["1", "0"]), pa.bool_()).to_pylist() == [True, False]
    with pytest.raises(pa.ArrowInvalid):
        pc.cast(pa.array(["1990-12-31T23:59:60Z"]), pa.timestamp("us", "UTC"))
    with pytest.raises(pa.ArrowInvalid):
        pc.cast(pa.array(["1985-04-12t23:20:50.52z"]), pa.timestamp("us", "UTC"))
    from driftline.observe.textclass import class_of

    assert [class_of(s) for s in ("0x1F", "1", "+42")] == ["text", "integer", "text"]
