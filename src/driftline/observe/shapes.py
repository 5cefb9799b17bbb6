"""The shape tally of a batch of JSON records (core/shapetally.py): for each candidate field,
which paths the records of each of its values hold.

Both JSON observation paths make it from the batch's statistics and its records: the paths
in every row come from the statistics (a top-level field present in every row; a field of
a struct that is in every row, never null, and present in every such struct), and only
the other paths are looked up record by record. The exact walk passes its records; the
fast path takes the candidates' values from Arrow's table when every row holds the same
fields, and parses its lines again otherwise (only when some field could be a
discriminator). tests/differential holds the two equal.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from functools import lru_cache
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import paths
from driftline.core.shapetally import MAX_CANDIDATES, MAX_VALUES, ShapeTally, ValueShape
from driftline.core.stats import FieldStats

_PROBE_ROWS = 1024  # a column with more than MAX_VALUES values among its first rows is not counted in full


def candidates(fields: Mapping[str, FieldStats], rows: int) -> list[str]:
    """The top-level paths holding a string in every row, in path order, at most MAX_CANDIDATES:
    the batch's tally is empty without one."""
    return sorted(
        p
        for p, st in fields.items()
        if st.nulls == 0
        and st.types.get("string") == rows
        and len(st.types) == 1
        and _parent(p)[0] is None
        and p != paths.ROOT  # bare strings, not records
    )[:MAX_CANDIDATES]


@lru_cache(maxsize=65_536)
def _segments(path: str) -> tuple[tuple[str, str], ...]:
    """paths.split, remembered: the same paths come back in every batch of a scan of many small files."""
    return tuple(paths.split(path))


@lru_cache(maxsize=65_536)
def _parent(path: str) -> tuple[str | None, str]:
    return paths.parent(path)


def _field_path(path: str) -> bool:
    return all(kind == "field" for kind, _ in _segments(path))


def split_fields(fields: Mapping[str, FieldStats], rows: int) -> tuple[frozenset[str], list[str]]:
    """(the field paths in every row, the other field paths: structs before their fields)."""
    every: set[str] = set()
    others: list[str] = []
    for p in sorted((p for p in fields if _field_path(p)), key=lambda q: (len(_segments(q)), q)):
        st = fields[p]
        parent, _ = _parent(p)
        if parent is None:
            always = st.present == rows
        else:
            pst = fields[parent]
            structs = pst.types.get("struct", 0)
            always = parent in every and pst.present == structs and st.present == structs
        if always:
            every.add(p)
        elif st.present > 0:
            others.append(p)
    return frozenset(every), others


def tally_records(records: Sequence[Any], fields: Mapping[str, FieldStats]) -> ShapeTally:
    """The tally of a whole batch: its records and their statistics.

    >>> from driftline.observe.records import observe_records
    >>> recs = [{"k": "a", "x": 1}, {"k": "b", "y": {"z": None}}, {"k": "a"}]
    >>> t = tally_records(recs, observe_records(recs, file="f", batch=0, row_start=0).fields)
    >>> {v: (s.rows, sorted(s.always), sorted(s.ever)) for v, s in t["k"].items()}
    {'a': (2, ['k'], ['k', 'x']), 'b': (1, ['k', 'y', 'y.z'], ['k', 'y', 'y.z'])}
    """
    names = candidates(fields, len(records))
    if not names:
        return {}
    every, others = split_fields(fields, len(records))
    if not others:
        return _uniform(every, {p: Counter(r[_name(p)] for r in records) for p in names})
    steps = [(p, [name for _, name in _segments(p)]) for p in others]
    interned: dict[frozenset[str], frozenset[str]] = {}
    shapes: list[frozenset[str]] = []
    for r in records:
        shape = every.union(p for p, keys in steps if _holds(r, keys))
        shapes.append(interned.setdefault(shape, shape))
    out: dict[str, dict[str, ValueShape]] = {}
    for path in names:
        name = _name(path)
        rows: dict[str, list[frozenset[str]]] = {}
        for r, shape in zip(records, shapes, strict=True):
            rows.setdefault(r[name], []).append(shape)
        if len(rows) <= MAX_VALUES:
            out[path] = {value: _shape_of(got) for value, got in sorted(rows.items())}
    return out


def _name(path: str) -> str:
    return _segments(path)[0][1]


def _holds(record: Any, keys: list[str]) -> bool:
    v = record
    for key in keys:
        if type(v) is not dict or key not in v:
            return False
        v = v[key]
    return True


def _shape_of(shapes: list[frozenset[str]]) -> ValueShape:
    distinct = set(shapes)
    return ValueShape(len(shapes), frozenset.intersection(*distinct), frozenset.union(*distinct))


def _uniform(every: frozenset[str], counts: Mapping[str, Mapping[str, int]]) -> ShapeTally:
    return {
        p: {v: ValueShape(n, every, every) for v, n in sorted(c.items())}
        for p, c in counts.items()
        if len(c) <= MAX_VALUES
    }


Piece = tuple[pa.Table, Sequence[int] | None]  # Arrow's table of some rows of a batch (None: rows 0, 1, 2, ...)


def table_tally(
    fields: Mapping[str, FieldStats], rows: int, pieces: Sequence[Piece], rest: Mapping[int, Any]
) -> ShapeTally | None:
    """The tally of a batch from its statistics and Arrow's tables of its rows (pieces), with the
    parsed records of the rows no table holds (rest, by row). None when the tables cannot tell
    (a field that varies holds JSON nulls, which Arrow writes as it writes an absent field; a
    column of another type than expected): tally_records then takes the records.

    >>> from driftline.core.stats import FieldStats
    >>> f = {"k": FieldStats(types={"string": 3}), "s": FieldStats(types={"struct": 2})}
    >>> f["s.x"] = FieldStats(types={"int64": 1})  # rows: {"k": "a", "s": {"x": 1}}, {"k": "a"}, {"k": "b", "s": {}}
    >>> t = table_tally(f, 3, [(pa.table({"k": ["a", "b"], "s": [{"x": 1}, {"x": None}]}), [0, 2])], {1: {"k": "a"}})
    >>> {v: (s.rows, sorted(s.always), sorted(s.ever)) for v, s in t["k"].items()}
    {'a': (2, ['k'], ['k', 's', 's.x']), 'b': (1, ['k', 's'], ['k', 's'])}
    """
    names = candidates(fields, rows)
    every, others = split_fields(fields, rows)
    if any(fields[p].nulls for p in others):
        return None
    counts: dict[str, Counter[str]] = {p: Counter() for p in names}
    for table, _ in pieces:
        for path in list(counts):
            column = _column(table, [_name(path)])
            if column is None or not pa.types.is_string(column.type):
                return None
            if len(pc.value_counts(column.slice(0, _PROBE_ROWS))) > MAX_VALUES:
                del counts[path]  # many values early on (ids, times): no full count
                continue
            got = pc.value_counts(column)
            counts[path].update(
                dict(zip(got.field("values").to_pylist(), got.field("counts").to_pylist(), strict=True))
            )
    for r in rest.values():
        for path, tally in counts.items():
            tally[r[_name(path)]] += 1
    counts = {p: c for p, c in counts.items() if len(c) <= MAX_VALUES}
    if not others or not counts:
        return _uniform(every, counts)
    # Each row's shape: every, and those of the others it holds (Arrow's validity: no JSON null among them).
    shapes: dict[str, dict[str, list[frozenset[str]]]] = {p: {} for p in counts}
    interned: dict[tuple[bool, ...], frozenset[str]] = {}
    for table, _ in pieces:
        held = [_present(table, p) for p in others]
        if any(h is None for h in held):
            return None
        flags = list(zip(*held, strict=True)) if held else []
        values = {p: _column(table, [_name(p)]).to_pylist() for p in counts}  # type: ignore[union-attr]
        for i in range(table.num_rows):
            key = flags[i]
            shape = interned.get(key)
            if shape is None:
                shape = interned[key] = every.union(p for p, h in zip(others, key, strict=True) if h)
            for path, vals in values.items():
                shapes[path].setdefault(vals[i], []).append(shape)
    steps = [(p, [name for _, name in _segments(p)]) for p in others]
    for r in rest.values():
        shape = every.union(p for p, keys in steps if _holds(r, keys))
        for path in counts:
            shapes[path].setdefault(r[_name(path)], []).append(shape)
    return {p: {v: _shape_of(got) for v, got in sorted(by.items())} for p, by in shapes.items()}


def _column(table: pa.Table, names: list[str]) -> pa.Array | None:
    if names[0] not in table.column_names:
        return None
    col = table.column(names[0])
    arr = col.chunk(0) if col.num_chunks == 1 else col.combine_chunks()
    return arr


def _present(table: pa.Table, path: str) -> list[bool] | None:
    """Per row of the table, whether it holds a value of path (None: a step is not a struct)."""
    names = [name for _, name in paths.split(path)]
    arr = _column(table, names)
    if arr is None:
        return [False] * table.num_rows
    valid = arr.is_valid()
    for name in names[1:]:
        if not pa.types.is_struct(arr.type):
            return None
        if arr.type.get_field_index(name) < 0:
            return [False] * table.num_rows
        arr = pc.struct_field(arr, [name])
        valid = pc.and_(valid, arr.is_valid())
    return valid.to_pylist()


def has_candidates(fields: Mapping[str, FieldStats], rows: int) -> bool:
    """Whether the batch's tally can be other than empty."""
    return bool(candidates(fields, rows))
