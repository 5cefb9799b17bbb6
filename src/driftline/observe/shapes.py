"""The shape tally of a batch of JSON records (core/shapetally.py): for each candidate field,
which paths the records of each of its values hold.

Both JSON observation paths call tally_records on the batch's parsed records (the fast path
parses its lines only when the batch has a candidate), so the two agree by construction;
tests/observe/test_shapes_tally.py holds them equal on varied batches.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping, Sequence
from typing import Any

from driftline.core import paths
from driftline.core.shapetally import MAX_CANDIDATES, MAX_VALUES, ShapeTally, ValueShape
from driftline.core.stats import FieldStats


def tally_records(records: Sequence[Any], kept: Collection[str]) -> ShapeTally:
    """The batch's shape tally; kept is the batch's observed paths (a path past the cap on
    paths is in no shape).

    >>> t = tally_records([{"k": "a", "x": 1}, {"k": "b", "y": {"z": None}}, {"k": "a"}], {"k", "x", "y", "y.z"})
    >>> {v: (s.rows, sorted(s.always), sorted(s.ever)) for v, s in t["k"].items()}
    {'a': (2, ['k'], ['k', 'x']), 'b': (1, ['k', 'y', 'y.z'], ['k', 'y', 'y.z'])}
    """
    if not records or any(type(r) is not dict for r in records):
        return {}
    first = records[0]
    kept_set = set(kept)
    by_path = {paths.child(None, n): n for n in first}
    names = sorted(p for p, n in by_path.items() if type(first[n]) is str and p in kept_set)
    candidates = [p for p in names if all(type(r.get(by_path[p])) is str for r in records)][:MAX_CANDIDATES]
    if not candidates:
        return {}
    interned: dict[frozenset[str], frozenset[str]] = {}
    shapes: list[frozenset[str]] = []
    for r in records:
        got: set[str] = set()
        _struct_paths(r, None, got, 0)
        shape = frozenset(got & kept_set)
        shapes.append(interned.setdefault(shape, shape))
    out: dict[str, dict[str, ValueShape]] = {}
    for path in candidates:
        name = by_path[path]
        rows: dict[str, list[frozenset[str]]] = {}
        for r, shape in zip(records, shapes, strict=True):
            rows.setdefault(r[name], []).append(shape)
            if len(rows) > MAX_VALUES:
                break
        if len(rows) > MAX_VALUES:
            continue
        out[path] = {value: _shape_of(got) for value, got in sorted(rows.items())}
    return out


def _shape_of(shapes: list[frozenset[str]]) -> ValueShape:
    distinct = set(shapes)
    return ValueShape(len(shapes), frozenset.intersection(*distinct), frozenset.union(*distinct))


_DEPTH = 64  # shapes are about fields, not deep nesting


def _struct_paths(v: Mapping[str, Any], parent: str | None, out: set[str], depth: int) -> None:
    """The paths of fields (struct members, not list elements or anything below them) present in v."""
    for name, sub in v.items():
        path = paths.child(parent, name)
        out.add(path)
        if type(sub) is dict and depth < _DEPTH:
            _struct_paths(sub, path, out, depth + 1)


def has_candidates(fields: Mapping[str, FieldStats], rows: int) -> bool:
    """Whether a batch's statistics show a top-level field holding a string in every row: the
    only batches whose tally is not empty."""
    return any(
        st.nulls == 0 and st.types.get("string") == rows and len(st.types) == 1 and paths.parent(p)[0] is None
        for p, st in fields.items()
    )
