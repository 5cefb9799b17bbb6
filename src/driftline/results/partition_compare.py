"""Partitions compared with each other: for each partition key, the few values that never hold
what the others hold (docs/drift.md, "Partitions compared with each other").

The walk in scan order (results/drift.py) sees a change against what came before; a partition
value that differs from its very first file has no "before" in its own series, so the walk is
silent about it. This comparison is order-free: for each key, each value's files (the grouping
of Profile.by_partition, ``partition_groups``) are set beside the other values' files, and a
finding names the values that differ and how many were compared:

- ``partition-lacks``: the values that never hold a field they could hold (rows, or their
  parent struct, arrive) after it first arrived in the scan, while a strict majority of the
  values hold it in at least half of their places, and chance does not explain the lack: with
  those values' share s of places holding it, a value of n places lacks it by chance with
  probability (1 - s) ** n, which must be below CHANCE.
- ``partition-type``: the values whose field holds values, none of them of the type a strict
  majority of the values holds most (each value's most frequent type, ties to the first key).
- ``partition-nulls``: the values where a field holds nulls, while the values where it is
  present without any null are a strict majority.

A value that held the field (or its type) and then lost it is a change in time: the walk tells
it (field-gone per series, type-conflict), not this comparison. Nulls are where they are: a
value with nulls where most others have none is named whenever they began.
Types are compared by what the values read as (``logical_counts``), so that the same values
in a CSV file and a JSON Lines file are no partition difference.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import pyarrow as pa

from driftline.core import paths
from driftline.core.files import FileResult
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.core.stats import FieldStats, merge_all
from driftline.observe.textclass import classify

# The kinds this comparison finds, in the order they are listed for one batch.
PARTITION_KINDS: dict[str, str] = {
    "partition-lacks": "some values of a partition key never hold a field that most of the others hold",
    "partition-type": "some values of a partition key hold a field in none of the type most of the others hold",
    "partition-nulls": "a field holds nulls in some values of a partition key and in none of most of the others",
}

# A value lacking a field is a finding only when the holders' share of it makes the lack
# this unlikely by chance: (1 - share) ** places < CHANCE.
CHANCE = 0.001

# Content classes of text that spell a date or time: JSON has no temporal type, so a string
# of one reads as that type, as a CSV cell or a Parquet column of the same values does.
_TEMPORAL = frozenset(c for c, t in TEXT_CLASS_TYPE.items() if t is not None and t.startswith(("date", "timestamp")))


@dataclass(frozen=True, slots=True)
class PartitionFinding:
    """Values of one partition key that differ from the others about one field path.

    before is what the others hold (their type; None for nulls), after what the values
    concerned hold (None for a lacking field, "null" for nulls).
    """

    kind: str
    path: str
    key: str  # the partition key
    values: tuple[str, ...]  # the values concerned, sorted
    compared: int  # values of the key compared (those that could hold the field)
    before: str | None
    after: str | None


def partition_keys(files: Sequence[FileResult]) -> list[str]:
    """Partition keys (key=value folder names) in the order they first appear."""
    keys: list[str] = []
    for f in files:
        for k, _ in f.partitions:
            if k not in keys:
                keys.append(k)
    return keys


def partition_groups(files: Sequence[FileResult], key: str) -> dict[str, list[FileResult]]:
    """Per value of the partition key, sorted: its files in scan order (files without the key
    are in no group). The one notion of "a partition value" (Profile.by_partition too)."""
    groups: dict[str, list[FileResult]] = {}
    for f in files:
        value = dict(f.partitions).get(key)
        if value is not None:
            groups.setdefault(value, []).append(f)
    return {value: groups[value] for value in sorted(groups)}


def group_fields(files: Sequence[FileResult]) -> tuple[dict[str, FieldStats], int]:
    """(merged statistics per path, rows) of a group of files."""
    return merge_all(o.fields for f in files for o in f.observations), sum(f.rows for f in files)


def container_count(path: str, fields: Mapping[str, FieldStats], rows: int) -> int:
    """How many places path could have held a value: the denominator of its shares."""
    parent, how = paths.parent(path)
    if parent is None:
        return rows
    pst = fields.get(parent)
    if pst is None:
        return 0
    if how == "field":
        return pst.types.get("struct", 0)
    return pst.items


def logical_counts(st: FieldStats) -> dict[str, int]:
    """Non-null values by the type they read as: a CSV cell (text typed by inference) as the
    type of its content class, a string spelling a date or time as that type, any other value
    as its own type; cells reading as nothing (empty, a null token) are left out.

    >>> logical_counts(FieldStats(types={"string": 3}, classes={"timestamp_rfc3339": 2, "text": 1}))
    {'string': 1, 'timestamp[us, UTC]': 2}
    >>> logical_counts(FieldStats(types={"int64": 2}, classes={"integer": 2}, text=2))
    {'int64': 2}
    """
    out: Counter[str] = Counter()
    if st.text:
        for cls, n in st.classes.items():
            t = TEXT_CLASS_TYPE.get(cls)
            if t is not None:
                out[t] += n
        return dict(sorted(out.items()))
    out.update(st.types)
    for cls in _TEMPORAL & st.classes.keys():
        n = st.classes[cls]
        out["string"] -= n
        out[TEXT_CLASS_TYPE[cls] or "string"] += n
    return dict(sorted((k, n) for k, n in out.items() if n > 0))


def ordered_keys(files: Sequence[FileResult]) -> frozenset[str]:
    """The partition keys whose values all read as dates, times or integers (day=2026-03-07,
    hour=13): keys along which the data arrives in order.

    Along such a key the walk in scan order tells a change with its time: where it starts,
    ends and comes back. A partition finding that counts the very same places as a walk
    episode on such a key adds nothing and is left out (results/drift.py); on any other key
    (region, store) the finding tells it, naming the values.

    >>> from driftline.core.files import FileResult
    >>> fs = [FileResult(f"r={r}/d={d}/a.jsonl", "jsonl", None, (("r", r), ("d", d)), 1, 0)
    ...       for r in "ab" for d in ("2026-01-01", "2026-01-02")]
    >>> sorted(ordered_keys(fs))
    ['d']
    """
    values: dict[str, set[str]] = {}
    for f in files:
        for k, v in f.partitions:
            values.setdefault(k, set()).add(v)
    out = set()
    for key, vals in values.items():
        counts = classify(pa.array(sorted(vals), pa.string())).counts
        kinds = {TEXT_CLASS_TYPE[c] for c, n in counts.items() if n}
        if kinds and all(t is not None and t.startswith(("date", "timestamp", "int")) for t in kinds):
            out.add(key)
    return frozenset(out)


def compare_partitions(files: Sequence[FileResult], skip_keys: frozenset[str] = frozenset()) -> list[PartitionFinding]:
    """Every partition finding of the files (sorted by relative path), key by key in the order
    keys first appear, then by path and kind. skip_keys names keys left out (a key whose values
    explain which fields are present: each value is a shape of its own, not a difference).

    The verdicts depend only on the files' totals, never on batches, --jobs or the engine.
    """
    out: list[PartitionFinding] = []
    compared = {key: partition_groups(files, key) for key in partition_keys(files) if key not in skip_keys}
    # With two values, neither is the exception of "the others".
    compared = {key: groups for key, groups in compared.items() if len(groups) >= 3}
    arrival = arrivals(files) if compared else {}
    for key, groups in compared.items():
        merged = {value: group_fields(fs) for value, fs in groups.items()}
        logical = {value: _logical_of(fs) for value, fs in groups.items()}
        text = {value: _text_paths(fs) for value, fs in groups.items()}
        every_path = sorted({p for fields, _ in merged.values() for p in fields})
        for path in every_path:
            out.extend(_lacks(key, path, groups, merged, arrival))
            out.extend(_types(key, path, logical, text))
            out.extend(_nulls(key, path, merged))
    return out


def _logical_of(files: Sequence[FileResult]) -> dict[str, Counter[str]]:
    """Per path, the logical counts of a group, summed batch by batch (a CSV batch and a JSON
    batch read their text apart, so they are counted before they are added)."""
    out: dict[str, Counter[str]] = {}
    for f in files:
        for o in f.observations:
            for path, st in o.fields.items():
                if st.types:
                    out.setdefault(path, Counter()).update(logical_counts(st))
    return out


def _text_paths(files: Sequence[FileResult]) -> set[str]:
    """The paths a group holds as CSV cells (text typed by inference)."""
    return {path for f in files for o in f.observations for path, st in o.fields.items() if st.text}


def _lacks(
    key: str,
    path: str,
    groups: Mapping[str, Sequence[FileResult]],
    merged: Mapping[str, tuple[dict[str, FieldStats], int]],
    arrival: Mapping[str, str],
) -> list[PartitionFinding]:
    places = {v: container_count(path, fields, rows) for v, (fields, rows) in merged.items()}
    held = {v: fields[path].present if path in fields else 0 for v, (fields, _) in merged.items()}
    could = [v for v in merged if places[v] > 0]
    typical = [v for v in could if 2 * held[v] >= places[v]]  # the field is the norm there
    lacking = [v for v in could if held[v] == 0]
    if not lacking or 2 * len(typical) <= len(could):
        return []
    share = sum(held[v] for v in typical) / sum(places[v] for v in typical)
    concerned = tuple(
        v for v in lacking if (1 - share) ** places[v] < CHANCE and _could_hold_after(path, groups[v], arrival[path])
    )
    if not concerned:
        return []
    joined = _joined_types(merged[v][0][path] for v in typical)
    return [PartitionFinding("partition-lacks", path, key, concerned, len(could), joined, None)]


def _could_hold_after(path: str, files: Sequence[FileResult], first: str) -> bool:
    """Whether a file of the group after the field's first arrival in scan order (first, a
    relative path) could hold it: before it, the field is not there yet anywhere, and the
    walk's field-new or nested-new tells where it arrives."""
    return any(container_count(path, o.fields, o.rows) > 0 for f in files if f.rel > first for o in f.observations)


def arrivals(files: Sequence[FileResult]) -> dict[str, str]:
    """Per path, the first file (relative path, in scan order) holding it."""
    out: dict[str, str] = {}
    for f in files:
        for o in f.observations:
            for path, st in o.fields.items():
                if st.present and path not in out:
                    out[path] = f.rel
    return out


def _types(
    key: str, path: str, logical: Mapping[str, Mapping[str, Counter[str]]], text: Mapping[str, set[str]]
) -> list[PartitionFinding]:
    counts = {v: per[path] for v, per in logical.items() if per.get(path)}
    main = {v: min(c, key=lambda t: (-c[t], t)) for v, c in counts.items()}
    norm, n = Counter(main.values()).most_common(1)[0] if main else ("", 0)
    if 2 * n <= len(main):
        return []
    odd: dict[str, list[str]] = {}
    for v, c in counts.items():
        # A CSV cell is text (RFC 4180): where the others hold strings it is one of them,
        # whatever its text reads as (results/reading.py reads it so in the walk too).
        if c.get(norm, 0) == 0 and not (norm == "string" and path in text[v]):
            odd.setdefault(main[v], []).append(v)
    return [
        PartitionFinding("partition-type", path, key, tuple(vs), len(main), norm, t) for t, vs in sorted(odd.items())
    ]


def _nulls(key: str, path: str, merged: Mapping[str, tuple[dict[str, FieldStats], int]]) -> list[PartitionFinding]:
    present = {v: fields[path] for v, (fields, _) in merged.items() if path in fields and fields[path].present}
    with_nulls = tuple(v for v, st in present.items() if st.nulls)
    if not with_nulls or 2 * len(with_nulls) >= len(present):
        return []
    return [PartitionFinding("partition-nulls", path, key, with_nulls, len(present), None, "null")]


def _joined_types(stats: Iterable[FieldStats]) -> str:
    keys = sorted({k for st in stats for k in st.types})
    return " | ".join(keys) if keys else "null"
