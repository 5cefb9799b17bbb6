"""Shape tallies: which field paths the records of each value of a label field hold.

A JSON batch records, for a few candidate fields (top-level fields that hold a string in
every record of the batch, with few distinct values), the shape of the records of each
value: how many rows hold it, the paths present in every one of those rows (``always``)
and the paths present in any (``ever``). results/shapes.py reads the merged tallies of a
scan to tell whether one field explains which fields a record holds.

A tally is bounded (at most MAX_CANDIDATES fields and MAX_VALUES values each) and merges
like a statistic: commutative and associative, so batches, files and workers combine in
any order. A candidate missing from one side, or past MAX_VALUES values once merged, is
dropped (a discriminator is in every record and has few values). ``None`` is a batch that
has no tally at all (a CSV or Parquet batch, whose columns are in every row): it merges as
nothing.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from functools import reduce

MAX_VALUES = 32  # distinct values of one candidate field; past it the field is no discriminator
MAX_CANDIDATES = 64  # candidate fields kept per batch, the first ones in path order


@dataclass(frozen=True, slots=True)
class ValueShape:
    """What the rows holding one value of a candidate field hold: how many, and their paths."""

    rows: int
    always: frozenset[str]  # paths present in every one of those rows
    ever: frozenset[str]  # paths present in at least one of them

    def merge(self, other: ValueShape) -> ValueShape:
        return ValueShape(self.rows + other.rows, self.always & other.always, self.ever | other.ever)


# candidate field path → value → its shape
ShapeTally = Mapping[str, Mapping[str, ValueShape]]


def merge_tallies(a: ShapeTally | None, b: ShapeTally | None) -> ShapeTally | None:
    """The tally of the rows of a and b together.

    >>> s = lambda n, *p: ValueShape(n, frozenset(p), frozenset(p))
    >>> a = {"kind": {"x": s(2, "kind", "a")}, "id": {"1": s(1, "id")}}
    >>> b = {"kind": {"x": s(1, "kind"), "y": s(1, "kind", "b")}}
    >>> m = merge_tallies(a, b)
    >>> sorted(m), m["kind"]["x"].rows, sorted(m["kind"]["x"].always), sorted(m["kind"]["x"].ever)
    (['kind'], 3, ['kind'], ['a', 'kind'])
    >>> merge_tallies(None, b) is b
    True
    """
    if a is None:
        return b
    if b is None:
        return a
    out: dict[str, dict[str, ValueShape]] = {}
    for name in sorted(a.keys() & b.keys()):
        merged = dict(a[name])
        for value, shape in b[name].items():
            got = merged.get(value)
            merged[value] = shape if got is None else got.merge(shape)
        if len(merged) <= MAX_VALUES:
            out[name] = dict(sorted(merged.items()))
    return out


def merge_all_tallies(tallies: Iterable[ShapeTally | None]) -> ShapeTally | None:
    return reduce(merge_tallies, tallies, None)


def tally_to_json(tally: ShapeTally) -> dict[str, dict[str, dict[str, object]]]:
    return {
        name: {
            value: {"rows": s.rows, "always": sorted(s.always), "optional": sorted(s.ever - s.always)}
            for value, s in values.items()
        }
        for name, values in tally.items()
    }
