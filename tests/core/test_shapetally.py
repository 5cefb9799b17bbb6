"""Shape tallies merge as statistics do: in any order, to the same tally (DEVELOPERS.md, "One way
to combine results: merge"), and within their bounds."""

from __future__ import annotations

import itertools

from driftline.core.shapetally import MAX_VALUES, ShapeTally, ValueShape, merge_all_tallies, merge_tallies


def _s(rows: int, always: set[str], ever: set[str] | None = None) -> ValueShape:
    return ValueShape(rows, frozenset(always), frozenset(ever if ever is not None else always))


PARTS: list[ShapeTally | None] = [
    {"kind": {"a": _s(2, {"kind", "x"})}, "region": {"n": _s(2, {"kind", "x"})}},
    {"kind": {"a": _s(1, {"kind"}, {"kind", "x"}), "b": _s(3, {"kind", "y"})}, "region": {"s": _s(4, {"kind"})}},
    None,  # a CSV batch: no tally, merges as nothing
    {"kind": {"c": _s(1, {"kind", "z"})}, "region": {f"r{i}": _s(1, {"kind"}) for i in range(MAX_VALUES)}},
]


def test_merge_is_the_same_in_any_order() -> None:
    results = {repr(merge_all_tallies(order)) for order in itertools.permutations(PARTS)}
    assert len(results) == 1
    # and in any grouping: ((a b) (c d)) as (a (b (c d)))
    a, b, c, d = PARTS
    assert merge_tallies(merge_tallies(a, b), merge_tallies(c, d)) == merge_tallies(
        a, merge_tallies(b, merge_tallies(c, d))
    )


def test_the_merged_tally_counts_and_bounds() -> None:
    merged = merge_all_tallies(PARTS)
    assert merged is not None
    # region: 2 + 32 values past MAX_VALUES once merged: dropped; kind: rows add, always meets, ever joins
    assert sorted(merged) == ["kind"]
    assert merged["kind"]["a"] == _s(3, {"kind"}, {"kind", "x"})
    assert merged["kind"]["b"] == _s(3, {"kind", "y"})
    assert merged["kind"]["c"] == _s(1, {"kind", "z"})


def test_a_candidate_missing_from_a_batch_is_dropped() -> None:
    assert merge_tallies({"kind": {"a": _s(1, {"kind"})}}, {}) == {}
    assert merge_tallies(None, None) is None
