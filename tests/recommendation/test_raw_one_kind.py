"""records_to_batch builds a column of one scalar kind with Arrow at once: the same variant array
as the per-value path (variant_value, then pyarrow.array of the shapes' type), for any values."""

from __future__ import annotations

from typing import Any

import pyarrow as pa
from hypothesis import given, settings
from hypothesis import strategies as st

from driftline.recommendation import raw

SCALARS = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(2**70), 2**70),  # past int64: the per-value path's uint64 and decimal kinds
    st.floats(allow_nan=False),
    st.text(max_size=5),
)


def _per_value(values: list[Any]) -> pa.Array:
    variants = [raw.variant_value(v) for v in values]
    shape = raw._Shape()
    for v in variants:
        shape.add(v)
    return pa.array(variants, type=shape.arrow())


@settings(max_examples=400, deadline=None)
@given(
    st.one_of(
        st.lists(SCALARS, min_size=1, max_size=8),  # mixed kinds: the per-value path itself
        st.lists(st.one_of(st.none(), st.text(max_size=3)), min_size=1, max_size=8),
        st.lists(st.one_of(st.none(), st.integers(-(2**64), 2**64)), min_size=1, max_size=8),
        st.lists(st.one_of(st.none(), st.floats(allow_nan=False)), min_size=1, max_size=8),  # (JSON has no NaN)
        st.lists(st.one_of(st.none(), st.booleans()), min_size=1, max_size=8),
        # objects and lists, of one kind all the way down or mixed
        st.lists(
            st.one_of(st.none(), st.dictionaries(st.sampled_from("abc"), SCALARS, max_size=3)), min_size=1, max_size=6
        ),
        st.lists(
            st.one_of(st.none(), st.lists(st.one_of(st.none(), st.text(max_size=2)), max_size=3)),
            min_size=1,
            max_size=6,
        ),
        st.lists(
            st.recursive(
                SCALARS,
                lambda k: st.one_of(st.lists(k, max_size=2), st.dictionaries(st.sampled_from("ab"), k, max_size=2)),
                max_leaves=6,
            ),
            min_size=1,
            max_size=6,
        ),
    )
)
def test_one_kind_columns_equal_the_per_value_path(values: list[Any]):
    got = raw.records_to_batch([{"x": v} for v in values]).column("x")
    want = _per_value(values)
    assert got.type == want.type  # source: pyarrow's own type of the per-value variants
    assert got.equals(want)
