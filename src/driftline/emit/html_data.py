"""What the HTML report draws, as plain data: scan-order buckets, per-field shares, partition cells.

No markup here. Everything is bounded whatever the size of the scan: at most MAX_BUCKETS
points on a timeline and MAX_COLUMNS columns in a partition matrix, so a directory of
10,000 files is aggregated, never drawn file by file. Counts are summed straight from the
batch observations (types, nulls, list items), which is much cheaper than merging
FieldStats and gives the same shares.
"""

from __future__ import annotations

import posixpath
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from driftline.core import paths
from driftline.core.observation import Observation
from driftline.results.profile import Profile

MAX_BUCKETS = 96  # points on a timeline: about 10 px each on a 960 px chart
MAX_COLUMNS = 150  # columns of a partition matrix (it scrolls sideways in its own box)
NULL, ABSENT = "null", "absent"  # the two series that are not types


@dataclass(frozen=True, slots=True)
class Bucket:
    """A run of consecutive batches in scan order, drawn as one step of a timeline."""

    index: int
    start: int  # first batch position in scan order (Event.seq numbering)
    stop: int  # one past the last
    first_file: str
    last_file: str
    partitions: tuple[tuple[str, str], ...]  # those of its first file
    group: str  # the series of files it belongs to, e.g. 'readings/region=east'
    label: str  # the tick label: innermost partition value, or the file name
    rows: int
    row_before: tuple[int, ...] = ()  # rows of the bucket before each of its batches

    def position(self, seq: int, row_in_batch: int, batch_rows: int) -> float:
        """Where in the bucket (0..1) a row of batch seq lies, counted in rows."""
        if not self.rows:
            return 0.5
        before = self.row_before[seq - self.start]
        return min(max((before + min(row_in_batch, batch_rows)) / self.rows, 0.0), 1.0)


def file_group(rel: str, partitions: Sequence[tuple[str, str]]) -> str:
    """The series a file belongs to: its folder without the innermost key=value folder.

    >>> file_group("readings/region=east/day=2026-11-27/part-0.jsonl.gz", [("region", "east"), ("day", "2026-11-27")])
    'readings/region=east'
    >>> file_group("a.jsonl", [])
    '.'
    """
    folder = posixpath.dirname(rel)
    if partitions:
        k, v = partitions[-1]
        if posixpath.basename(folder) == f"{k}={v}":
            folder = posixpath.dirname(folder)
    return folder or "."


def _tick(rel: str, partitions: Sequence[tuple[str, str]]) -> str:
    return partitions[-1][1] if partitions else posixpath.basename(rel)


def scan_units(profile: Profile) -> list[tuple[str, tuple[tuple[str, str], ...], Observation]]:
    """Every batch in scan order with its file and partitions: index i is Event.seq i."""
    return [(f.rel, f.partitions, o) for f in profile.files for o in f.observations]


def _even_chunks(n: int, k: int) -> list[tuple[int, int]]:
    return [(i * n // k, (i + 1) * n // k) for i in range(k) if (i + 1) * n // k > i * n // k]


def buckets(profile: Profile, max_buckets: int = MAX_BUCKETS) -> list[Bucket]:
    """Scan-order buckets: one per batch when they fit, else one per file, else runs of files.

    >>> buckets(Profile("r", ()))
    []
    """
    units = scan_units(profile)
    if len(units) <= max_buckets:
        spans = [(i, i + 1) for i in range(len(units))]
    else:
        # Batch positions where each file starts, so a bucket never splits a file.
        starts, pos = [], 0
        for f in profile.files:
            if f.observations:
                starts.append(pos)
                pos += len(f.observations)
        starts.append(pos)
        nfiles = len(starts) - 1
        spans = [(starts[a], starts[b]) for a, b in _even_chunks(nfiles, min(nfiles, max_buckets))]
    out = []
    for i, (a, b) in enumerate(spans):
        rel, parts, _ = units[a]
        before, acc = [], 0
        for _, _, o in units[a:b]:
            before.append(acc)
            acc += o.rows
        group, tick = file_group(rel, parts), _tick(rel, parts)
        out.append(Bucket(i, a, b, rel, units[b - 1][0], parts, group, tick, acc, tuple(before)))
    return out


def bucket_of(bks: Sequence[Bucket], seq: int) -> Bucket:
    """The bucket holding batch seq (bisection over the bucket starts)."""
    lo, hi = 0, len(bks) - 1
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if bks[mid].start <= seq:
            lo = mid
        else:
            hi = mid - 1
    return bks[lo]


@dataclass(slots=True)
class _Acc:
    types: dict[str, int] = field(default_factory=dict)
    nulls: int = 0
    items: int = 0

    @property
    def present(self) -> int:
        return sum(self.types.values()) + self.nulls


@dataclass(frozen=True, slots=True)
class Counts:
    """One field in one group of batches: values per type, nulls, absent, and the denominator."""

    types: dict[str, int]
    nulls: int
    absent: int
    container: int

    def series(self) -> dict[str, int]:
        out = dict(self.types)
        if self.nulls:
            out[NULL] = self.nulls
        if self.absent:
            out[ABSENT] = self.absent
        return out

    def share(self, n: int) -> float:
        return n / self.container if self.container else 0.0


def group_counts(groups: Iterable[Iterable[Observation]], wanted: Iterable[str]) -> list[dict[str, Counts]]:
    """For each group of observations: Counts per wanted path (paths never seen get zero values).

    The denominator follows profile.container_count: rows for a top-level field, the
    parent's struct values for a struct child, the parent's items for list/map parts.
    """
    wanted = list(dict.fromkeys(wanted))
    parents = {p: paths.parent(p) for p in wanted}
    needed = set(wanted) | {par for par, _ in parents.values() if par is not None}
    out = []
    for group in groups:
        acc = {p: _Acc() for p in needed}
        rows = 0
        for obs in group:
            rows += obs.rows
            for p in needed:
                st = obs.fields.get(p)
                if st is None:
                    continue
                a = acc[p]
                for k, n in st.types.items():
                    a.types[k] = a.types.get(k, 0) + n
                a.nulls += st.nulls
                a.items += st.items
        counts = {}
        for p in wanted:
            par, how = parents[p]
            if par is None:
                container = rows
            elif how == "field":
                container = acc[par].types.get("struct", 0)
            else:
                container = acc[par].items
            a = acc[p]
            counts[p] = Counts(dict(sorted(a.types.items())), a.nulls, max(container - a.present, 0), container)
        out.append(counts)
    return out


def bucket_counts(profile: Profile, bks: Sequence[Bucket], wanted: Iterable[str]) -> list[dict[str, Counts]]:
    units = scan_units(profile)
    return group_counts(([o for _, _, o in units[b.start : b.stop]] for b in bks), wanted)


@dataclass(frozen=True, slots=True)
class Column:
    """A column of a partition matrix: one partition value, or a run of them when there are many."""

    key: str
    values: tuple[str, ...]

    @property
    def label(self) -> str:
        return self.values[0] if len(self.values) == 1 else f"{self.values[0]} … {self.values[-1]}"


def partition_columns(values: Sequence[str], max_columns: int = MAX_COLUMNS, key: str = "") -> list[Column]:
    """Columns for a partition key's sorted values, runs of neighbours once there are too many.

    >>> [c.label for c in partition_columns(["a", "b", "c", "d", "e"], 2)]
    ['a … b', 'c … e']
    """
    return [Column(key, tuple(values[a:b])) for a, b in _even_chunks(len(values), min(len(values), max_columns))]


def partition_counts(
    profile: Profile, key: str, columns: Sequence[Column], wanted: Iterable[str]
) -> list[dict[str, Counts]]:
    """Counts per wanted path in the files of each column of partition key."""
    col_of = {v: i for i, c in enumerate(columns) for v in c.values}
    groups: list[list[Observation]] = [[] for _ in columns]
    for f in profile.files:
        v = dict(f.partitions).get(key)
        if v is not None and v in col_of:
            groups[col_of[v]].extend(f.observations)
    return group_counts(groups, wanted)


def series_order(totals: dict[str, int]) -> list[str]:
    """Stacking order: types by count (largest at the bottom), then null, then absent.

    >>> series_order({"absent": 5, "string": 2, "float64": 9, "null": 1})
    ['float64', 'string', 'null', 'absent']
    """
    types = sorted((k for k in totals if k not in (NULL, ABSENT)), key=lambda k: (-totals[k], k))
    return types + [k for k in (NULL, ABSENT) if totals.get(k)]
