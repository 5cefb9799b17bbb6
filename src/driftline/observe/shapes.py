"""The shape tally of a batch of JSON records (core/shapetally.py): for each candidate field,
which paths the records of each of its values hold.

Both JSON observation paths call tally_records on the batch's parsed records (the fast path
parses its lines only when the batch has a candidate), so the two agree by construction;
tests/observe/test_shapes_tally.py holds them equal on varied batches.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping, Sequence
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc

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


def _candidates(fields: Mapping[str, FieldStats], rows: int) -> list[str]:
    """The top-level paths holding a string in every row, in path order, at most MAX_CANDIDATES."""
    return sorted(
        p
        for p, st in fields.items()
        if st.nulls == 0 and st.types.get("string") == rows and len(st.types) == 1 and paths.parent(p)[0] is None
    )[:MAX_CANDIDATES]


def uniform_tally(fields: Mapping[str, FieldStats], rows: int, table: pa.Table) -> ShapeTally | None:
    """The tally of a batch whose every row holds the same fields, from its statistics and the
    candidates' columns of Arrow's table of all its rows; None when the batch's rows differ (or
    a column is not a plain string column): tally_records then walks the records.

    A field is in every row when it is a top-level field present in every row, or a field
    of a struct that is in every row (never null) and present in every such struct.

    >>> from driftline.core.stats import FieldStats
    >>> f = {"k": FieldStats(types={"string": 3}), "s": FieldStats(types={"struct": 3}), "s.x": FieldStats(nulls=3)}
    >>> t = uniform_tally(f, 3, pa.table({"k": ["a", "b", "a"]}))
    >>> {v: (s.rows, sorted(s.always)) for v, s in t["k"].items()}
    {'a': (2, ['k', 's', 's.x']), 'b': (1, ['k', 's', 's.x'])}
    """
    shape: set[str] = set()
    for p in sorted((p for p in fields if _field_path(p)), key=lambda q: len(paths.split(q))):  # structs first
        st = fields[p]
        parent, _ = paths.parent(p)
        if parent is None:
            every = st.present == rows
        else:
            pst = fields[parent]
            structs = pst.types.get("struct", 0)
            every = parent in shape and pst.present == structs and st.present == structs
        if not every:
            return None
        shape.add(p)
    frozen = frozenset(shape)
    out: dict[str, dict[str, ValueShape]] = {}
    for path in _candidates(fields, rows):
        name = paths.split(path)[0][1]
        if name not in table.column_names or not pa.types.is_string(table.schema.field(name).type):
            return None
        counts = pc.value_counts(table.column(name))
        if len(counts) > MAX_VALUES:
            continue
        values = counts.field("values").to_pylist()
        ns = counts.field("counts").to_pylist()
        out[path] = {v: ValueShape(n, frozen, frozen) for v, n in sorted(zip(values, ns, strict=True))}
    return out


def _field_path(path: str) -> bool:
    return all(kind == "field" for kind, _ in paths.split(path))


def has_candidates(fields: Mapping[str, FieldStats], rows: int) -> bool:
    """Whether a batch's statistics show a top-level field holding a string in every row: the
    only batches whose tally is not empty."""
    return bool(_candidates(fields, rows))
