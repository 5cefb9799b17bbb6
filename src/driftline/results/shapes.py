"""Shapes: a partition key or a record field that explains which fields a record holds.

A folder of mixed event types (webhook payloads under ``event=…`` folders, or a ``type``
field in each record) holds another field set per event type. Walked in scan order, each
type's fields would look like fields that come and go. When one label explains them, the
scan says so once (the discriminator, and the shape of each of its values), and the drift
walk (results/drift.py) leaves out the presence episodes that only restate the shapes.

The measure ("explains"), documented in docs/drift.md:

* the candidates are the partition keys every file has (with at least MIN_PARTITION_VALUES
  values), and the top-level fields of JSON
  records that hold a string in every record, with at most MAX_VALUES values
  (core/shapetally.py); every value reads as a label (content class ``text``), not as a
  date, a time or a number, since a field set that changes with those is change over time;
* a value's **shape** is the set of fields (struct members, not list elements) present in
  every one of its rows; its **optional** fields are present in some of its rows only;
* the fields whose presence varies are those present somewhere but not in every row of
  every value; a varying field is **explained** when each value has it in all its rows or
  in none;
* the candidate explains the field set when at least two values have shapes apart (each
  holds a field the other lacks: a value whose shape is part of another's is a series
  that never had a field, which is drift), and at least EXPLAINED_SHARE of the varying
  fields are explained (the rest are optional within a value, a tolerance for real
  optional fields).

Among the candidates that explain, the one explaining the most fields wins (then a
partition key before a field, then by name). A pure function of the ordered file results.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import pyarrow as pa

from driftline.core import paths
from driftline.core.files import FileResult
from driftline.core.jsontypes import JSONObject, JSONValue
from driftline.core.shapetally import MAX_VALUES, merge_all_tallies
from driftline.core.stats import FieldStats, merge_all
from driftline.observe.textclass import classify

EXPLAINED_SHARE = 0.8  # of the fields whose presence varies, the share the values must explain
# A partition's files are read one value after another: with two values, fields of their own
# are as likely a change between two producers as two kinds of record. A record field's values
# mix within files, so two are enough.
MIN_PARTITION_VALUES = 3

Source = Literal["partition", "field"]


@dataclass(frozen=True, slots=True)
class Shape:
    """The records of one value of the discriminator: how many, and the fields they hold."""

    value: str
    rows: int
    fields: tuple[str, ...]  # present in every one of its rows
    optional: tuple[str, ...] = ()  # present in some of its rows only

    def to_json(self) -> JSONObject:
        return {"value": self.value, "rows": self.rows, "fields": list(self.fields), "optional": list(self.optional)}


@dataclass(frozen=True, slots=True)
class Discriminator:
    """A label that explains which fields a record holds: its name, and the shape of each value.

    explained: the fields whose presence the value explains (in all rows of some values,
    in none of the others): their coming and going is the shapes, not drift. shared: the
    fields every value holds in every row.
    """

    source: Source
    name: str  # the partition key, or the field's path
    shapes: tuple[Shape, ...]
    explained: tuple[str, ...]
    shared: tuple[str, ...]

    @property
    def partition_keys(self) -> tuple[str, ...]:
        """The partition keys whose values are compared as shapes, not as drift (none for a field)."""
        return (self.name,) if self.source == "partition" else ()

    def own(self, shape: Shape) -> tuple[str, ...]:
        """A value's fields that not every value holds."""
        shared = set(self.shared)
        return tuple(p for p in shape.fields if p not in shared)

    def to_json(self) -> JSONObject:
        """The report's "shapes" entry."""
        return {
            "by": self.source,
            "name": self.name,
            "explained": list(self.explained),
            "shared": list(self.shared),
            "values": [s.to_json() for s in self.shapes],
        }

    @staticmethod
    def from_json(data: Mapping[str, JSONValue]) -> Discriminator:
        d: Mapping[str, Any] = data  # checked against docs/report.schema.json when a report is loaded
        return Discriminator(
            d["by"],
            d["name"],
            tuple(Shape(s["value"], s["rows"], tuple(s["fields"]), tuple(s.get("optional", ()))) for s in d["values"]),
            tuple(d["explained"]),
            tuple(d["shared"]),
        )


@dataclass(frozen=True, slots=True)
class _Seen:
    rows: int
    always: frozenset[str]
    ever: frozenset[str]


def find_discriminator(files: Sequence[FileResult]) -> Discriminator | None:
    """The label that explains the scan's field sets best, or None when none does.

    >>> from driftline.core.observation import Observation
    >>> from driftline.core.stats import FieldStats
    >>> def f(rel, event, *names):
    ...     obs = Observation(rel, 0, 0, 2, {n: FieldStats(types={"int64": 2}) for n in names})
    ...     return FileResult(rel, "jsonl", None, (("event", event),), 1, 0, 2, (obs,))
    >>> pull, push = f("event=pull/a.jsonl", "pull", "id", "pr"), f("event=push/a.jsonl", "push", "id", "ref")
    >>> d = find_discriminator([pull, push, f("event=star/a.jsonl", "star", "id")])
    >>> d.source, d.name, d.explained, d.shared, [(s.value, s.fields) for s in d.shapes]
    ('partition', 'event', ('pr', 'ref'), ('id',), [('pull', ('id', 'pr')), ('push', ('id', 'ref')), ('star', ('id',))])
    """
    found: list[tuple[tuple[int, int, str], Discriminator]] = []
    for key, groups in _partition_groups(files).items():
        got = _judge("partition", key, groups)
        if got is not None:
            found.append(((-len(got.explained), 0, key), got))
    tally = merge_all_tallies(o.shapes for f in files for o in f.observations)
    for name, values in (tally or {}).items():
        seen = {v: _Seen(s.rows, s.always, s.ever) for v, s in values.items()}
        got = _judge("field", name, seen)
        if got is not None:
            found.append(((-len(got.explained), 1, name), got))
    return min(found, key=lambda t: t[0])[1] if found else None


def _partition_groups(files: Sequence[FileResult]) -> dict[str, dict[str, _Seen]]:
    """Per partition key that every file has (at most MAX_VALUES values): each value's shape."""
    if not files:
        return {}
    keys = [k for k, _ in files[0].partitions if all(k in dict(f.partitions) for f in files)]
    out: dict[str, dict[str, _Seen]] = {}
    for key in keys:
        groups: dict[str, list[FileResult]] = {}
        for f in files:
            groups.setdefault(dict(f.partitions)[key], []).append(f)
        if not MIN_PARTITION_VALUES <= len(groups) <= MAX_VALUES or not _labels(sorted(groups)):
            continue  # before merging statistics: dated and numbered keys are the common ones
        seen: dict[str, _Seen] = {}
        for value, members in sorted(groups.items()):
            rows = sum(f.rows for f in members)
            if rows:
                merged = merge_all(o.fields for f in members for o in f.observations)
                seen[value] = _Seen(rows, *_always_ever(merged, rows))
        out[key] = seen
    return out


def _is_field_path(path: str) -> bool:
    return all(kind == "field" for kind, _ in paths.split(path))


def _always_ever(fields: Mapping[str, FieldStats], rows: int) -> tuple[frozenset[str], frozenset[str]]:
    """The field paths present in every row, and in any row, from merged statistics.

    A nested field is in every row when its struct is (as a struct, never null) and the
    field is in every one of those structs.
    """
    ever = {p for p, st in fields.items() if st.present > 0 and _is_field_path(p)}
    always: set[str] = set()
    for p in sorted(ever, key=lambda q: len(paths.split(q))):  # a struct before its fields
        st = fields[p]
        parent, _ = paths.parent(p)
        if parent is None:
            if st.present == rows:
                always.add(p)
            continue
        pst = fields[parent]
        structs = pst.types.get("struct", 0)
        if parent in always and pst.present == structs and st.present == structs:
            always.add(p)
    return frozenset(always), frozenset(ever)


def _labels(values: Sequence[str]) -> bool:
    """Whether every value reads as a label (content class text), not a date, time or number."""
    scan = classify(pa.array(list(values), pa.string()))
    return scan.counts.get("text", 0) == len(values)


def _apart(seen: list[_Seen]) -> bool:
    """Whether two values have shapes apart: each holds a field the other lacks. A value whose
    shape is a part of the others' (a series that never had a field) is drift to report."""
    shapes = sorted({s.always for s in seen}, key=sorted)
    return any(not a <= b and not b <= a for a, b in itertools.combinations(shapes, 2))


def _judge(source: Source, name: str, seen: Mapping[str, _Seen]) -> Discriminator | None:
    """The discriminator a candidate makes, when it explains the field set (the module's measure)."""
    if len(seen) < 2 or not _apart(list(seen.values())) or not _labels(list(seen)):
        return None
    shared = frozenset.intersection(*(s.always for s in seen.values()))
    varying = frozenset.union(*(s.ever for s in seen.values())) - shared
    explained = {p for p in varying if all(p in s.always or p not in s.ever for s in seen.values())}
    if not explained or len(explained) < EXPLAINED_SHARE * len(varying):
        return None
    shapes = tuple(Shape(v, s.rows, tuple(sorted(s.always)), tuple(sorted(s.ever - s.always))) for v, s in seen.items())
    return Discriminator(source, name, shapes, tuple(sorted(explained)), tuple(sorted(shared)))
