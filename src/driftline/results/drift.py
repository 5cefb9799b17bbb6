"""Drift: an ordered walk over batch observations (path order, then batch order).

The walk is sequential on purpose: it runs after every observation is in, so parallel
reading never changes which event is "first".
"""

from __future__ import annotations

import heapq
from collections import Counter
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from driftline.core import paths
from driftline.core.files import FileResult
from driftline.core.jsontypes import JSONObject, JSONValue
from driftline.core.lattice import UNKNOWN, DType, is_widening, join, type_of_key, type_text
from driftline.core.observation import TEXT_CLASS_TYPE, Observation
from driftline.core.stats import NULL_SAMPLE, Example, FieldStats, class_sample, example_json, example_text, type_sample
from driftline.results.levels import level_of
from driftline.results.partition_compare import (
    PARTITION_KINDS,
    PartitionFinding,
    compare_partitions,
    container_count,
    logical_counts,
    ordered_keys,
)
from driftline.results.reading import read_as
from driftline.results.shapes import Discriminator, find_discriminator

# The walk's memory bound: episodes followed (each with its start and reach) and listed at
# most.  One that starts after this many others is counted by kind and level, never followed
# or listed; the totals of every followed episode stay exact.  Not an option: a scan that finds
# this many changes has a folder to fix, and a user's limit on the list is the terminal's
# (--max-events), which leaves the report and Profile.events whole.
EPISODES_HELD = 100_000

# Event kinds, in the order they are listed for one batch.
EVENT_KINDS: dict[str, str] = {
    "field-new": "a top-level field appears after the first batch",
    "nested-new": "a nested field appears inside a struct that existed before",
    "field-gone": "a top-level field is absent from this batch to the end of the scan",
    "nested-gone": "a nested field is absent from here on while its struct goes on",
    "type-widened": "a new type that the old one widens to without loss of kind (int64 → float64)",
    "type-conflict": "a type of another kind arrives: the field now holds several types at once",
    "element-changed": "the element type of a list changes",
    "nulls-begin": "nulls appear in a field that had none",
    "textclass-changed": "strings of a new content class appear (for example another timestamp format)",
    **PARTITION_KINDS,  # partitions compared with each other (results/partition_compare.py)
}
_KIND_ORDER = {k: i for i, k in enumerate(EVENT_KINDS)}


@dataclass(frozen=True, slots=True)
class Event:
    """One drift event: an episode, with where it starts and how far it reaches.

    The start (file, partitions, batch, row, line, example, count) is where the change
    first shows; the reach (values, rows, batches, files, last_file, last_row, ended_*,
    recurrences) counts every batch of the scan that shows it (docs/drift.md says, per
    kind, what "shows" and "ended" mean).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": null}\\n')
    >>> e = driftline.scan(d, batch_rows=1).events[0]
    >>> e.kind, e.path, e.file, e.batch, e.row, e.line, e.values, e.still_going
    ('nulls-begin', 'x', 'a.jsonl', 1, 1, 2, 1, True)
    """

    kind: str
    path: str
    before: str | None
    after: str | None
    file: str
    partitions: tuple[tuple[str, str], ...]
    batch: int  # batch index within the file
    row: int | None  # 0-based row within the file where it shows first
    line: int | None
    example: str | None
    count: int  # how many values (rows, for a gone field) show it in that first batch
    values: int = 0  # values showing it over the whole scan (places without it, for a gone field)
    rows: int | None = None  # rows holding them; None inside a list or map, where a row holds many
    batches: int = 0  # batches showing it
    files: int = 0  # files showing it
    last_file: str | None = None  # the last file showing it
    last_row: int | None = None  # the first row showing it in the last batch that does
    ended_file: str | None = None  # None: still going at the end of the scan
    ended_batch: int | None = None  # where it last stopped showing (the first batch without it)
    ended_row: int | None = None
    recurrences: int = 0  # how many times it came back after it had ended
    partition_key: str | None = None  # partition kinds: the key whose values were compared
    partition_values: tuple[str, ...] = ()  # ... the values that differ from the others
    partition_compared: int = 0  # ... and how many values of the key were compared
    seq: int = field(default=0, compare=False)  # position of the batch in scan order

    @property
    def level(self) -> str:
        """breaking, widening or info: what the change does to a reader of the schema before it
        (results/levels.py, the one mapping).

        >>> Event("nulls-begin", "x", None, "null", "a.jsonl", (), 0, 1, 2, None, 1).level
        'breaking'
        """
        return level_of(self.kind, self.before, self.after)

    @property
    def still_going(self) -> bool:
        """Whether the change still shows in the last batch that could show it."""
        return self.ended_file is None

    def to_json(self) -> JSONObject:
        """The event as it appears in the JSON report's "events" list (the partition_* keys only
        for the partition kinds)."""
        out: JSONObject = {
            "kind": self.kind,
            "level": self.level,
            "path": self.path,
            "before": self.before,
            "after": self.after,
            "file": self.file,
            "partitions": dict(self.partitions),
            "batch": self.batch,
            "row": self.row,
            "line": self.line,
            "example": None if self.example is None else example_json(self.example),
            "count": self.count,
            "values": self.values,
            "rows": self.rows,
            "batches": self.batches,
            "files": self.files,
            "last_file": self.last_file,
            "last_row": self.last_row,
            "still_going": self.still_going,
            "ended": None
            if self.ended_file is None
            else {"file": self.ended_file, "batch": self.ended_batch, "row": self.ended_row},
            "recurrences": self.recurrences,
        }
        if self.partition_key is not None:
            out["partition_key"] = self.partition_key
            out["partition_values"] = list(self.partition_values)
            out["partition_compared"] = self.partition_compared
        return out

    @staticmethod
    def from_json(data: Mapping[str, JSONValue]) -> Event:
        """The event back from its report form (to_json's inverse; seq is not kept).

        >>> e = Event("field-new", "x", None, "int64", "a.jsonl", (), 0, 0, 1, "1", 1, 1, 1, 1, 1, "a.jsonl", 0)
        >>> Event.from_json(e.to_json()) == e
        True
        """
        d: Mapping[str, Any] = data  # checked against docs/report.schema.json when a report is loaded
        ended = d.get("ended") or {}
        return Event(
            d["kind"],
            d["path"],
            d.get("before"),
            d.get("after"),
            d["file"],
            tuple(d.get("partitions", {}).items()),
            d["batch"],
            d.get("row"),
            d.get("line"),
            None if d.get("example") is None else example_text(d["example"]),
            d.get("count", 0),
            d.get("values", 0),
            d.get("rows"),
            d.get("batches", 0),
            d.get("files", 0),
            d.get("last_file"),
            d.get("last_row"),
            ended.get("file"),
            ended.get("batch"),
            ended.get("row"),
            d.get("recurrences", 0),
            d.get("partition_key"),
            tuple(d.get("partition_values", ())),
            d.get("partition_compared", 0),
        )


@dataclass(slots=True)
class _PathState:
    joined: DType = UNKNOWN
    types: set[str] = field(default_factory=set)
    classes: set[str] = field(default_factory=set)
    had_values: bool = False
    had_null: bool = False
    cell_only: set[str] = field(default_factory=set)  # type keys only text without a type of its own put here


def _earliest(st: FieldStats) -> Example | None:
    firsts = [exs[0] for exs in st.samples.values() if exs]
    return min(firsts) if firsts else None


def _present(st: FieldStats | None) -> bool:
    return st is not None and st.present > 0


# The kinds that say a field arrives, leaves or lacks: a discriminator's shapes explain them.
PRESENCE_KINDS = frozenset({"field-new", "nested-new", "field-gone", "nested-gone", "partition-lacks"})
_FIND = "find"  # drift_summary's default: find the discriminator from the file results


def drift_events(files: Sequence[FileResult], limit: int | None = None) -> tuple[Event, ...]:
    """The drift events of the file results (sorted by relative path) in scan order: the
    first `limit` of them (EPISODES_HELD when None); drift_summary also gives the exact totals."""
    return drift_summary(files, limit)[0]


def drift_summary(
    files: Sequence[FileResult],
    limit: int | None = None,
    skip_keys: frozenset[str] = frozenset(),
    shapes: Discriminator | None | str = _FIND,
) -> tuple[tuple[Event, ...], dict[str, int], dict[str, int]]:
    """(the first `limit` events in scan order, the number of events of each kind, and of each
    level, all counted): the walk's episodes and the partition comparison's (skip_keys: the
    partition keys it leaves out).  `limit` is EPISODES_HELD when None (read at the call, not
    bound here).

    shapes: the discriminator of the scan (results/shapes.py; found from the files unless
    given, None for none). The fields whose presence it explains raise no presence episode
    (PRESENCE_KINDS): their coming and going is the shapes, said once in the report; its
    partition key, if it is one, is not compared (its values are the shapes). Their types,
    nulls and classes are walked as any field's, so a field the values share is compared
    across them.

    Drift takes the ordered file results, never a Profile: it is the one walk in scan order.
    About `limit` episodes are followed at any time (the walk finds episodes in scan order,
    so one that starts after `limit` others can never be listed: it is only counted); a
    scan with a tiny batch_rows over many paths and partitions finds them by the million.
    """
    limit = EPISODES_HELD if limit is None else limit
    counts: Counter[str] = Counter()
    levels: Counter[str] = Counter()
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]] = [
        (o, f.partitions) for f in files for o in f.observations
    ]

    def counted(events: Iterator[Event]) -> Iterator[Event]:
        for e in events:
            counts[e.kind] += 1
            levels[e.level] += 1
            yield e

    # The partition comparison's episodes (few: at most one per key, path and kind). A walk
    # episode that counts the very same places is the same change, told once: by the walk
    # along a key of dates, times or integers (its episode says when it started, ended and came
    # back), else by the partition episode (it names the values). Two keys naming the very same
    # places (region=south and day=2026-11-30, where the nulls lie in region=south/day=2026-11-30
    # only) are one change: the first key (the outer one) tells it.
    found = find_discriminator(files) if isinstance(shapes, str) else shapes
    quiet = frozenset(found.explained) if found is not None else frozenset()
    skip = skip_keys | frozenset(found.partition_keys if found is not None else ())
    ordered = ordered_keys(files)
    across: dict[tuple[str | None, str, str, int, int, str | None], Event] = {}
    for e in _partition_events(sequence, compare_partitions(files, skip)):
        if e.path not in quiet or e.kind not in PRESENCE_KINDS:  # a value's records absent from a partition
            across.setdefault(_same_change(e), e)

    def untold(events: Iterator[Event]) -> Iterator[Event]:
        for e in events:
            same = across.get(_same_change(e))
            if same is None:
                yield e
            elif same.partition_key in ordered:
                del across[_same_change(e)]
                yield e

    states: dict[str, _PathState] = {}
    # nsmallest is sorted(...)[:limit] (ties keep their order) with a heap of limit events.
    walked = heapq.nsmallest(limit, counted(untold(_walk(sequence, limit, states, quiet))), key=_order)
    gone = heapq.nsmallest(limit, counted(untold(_gone_events(sequence, states, quiet))), key=_order)
    listed = heapq.nsmallest(limit, counted(iter(across.values())), key=_order)
    kept = heapq.nsmallest(limit, [*walked, *gone, *listed], key=_order)
    return tuple(kept), {k: counts[k] for k in EVENT_KINDS if counts[k]}, dict(levels)


# Kinds that tell the same sort of change, the walk's and the partition comparison's.
_CHANGE_OF_KIND = {
    "field-gone": "lacks",
    "nested-gone": "lacks",
    "partition-lacks": "lacks",
    "type-widened": "type",
    "type-conflict": "type",
    "element-changed": "type",
    "partition-type": "type",
    "nulls-begin": "nulls",
    "partition-nulls": "nulls",
}


def _same_change(e: Event) -> tuple[str | None, str, str, int, int, str | None]:
    """What makes two episodes one change: its sort, path, and the places it counts (first and
    last file, files, values); none of these depend on the batch size."""
    return (_CHANGE_OF_KIND.get(e.kind), e.path, e.file, e.values, e.files, e.last_file)


def _order(e: Event) -> tuple[int, int, int, str]:
    return (e.seq, e.row if e.row is not None else -1, _KIND_ORDER[e.kind], e.path)


def _rows_per_value(path: str) -> bool:
    """Whether each row holds at most one value of path (no list or map step on the way)."""
    return all(kind == "field" for kind, _ in paths.split(path))


@dataclass(slots=True)
class _Episode:
    """One change followed through the scan: its start (an Event) and its reach so far."""

    start: Event
    key: str | None  # the type key, class or None (the field itself, its nulls) that shows it
    values: int = 0
    batches: int = 0
    files: int = 0
    last_file: str | None = None
    last_batch: int = -1
    last_row: int | None = None
    last_seq: int = -1
    ended: tuple[str, int, int] | None = None
    recurrences: int = 0

    def shows(self, obs: Observation, seq: int, values: int, row: int | None) -> None:
        if self.ended is not None:
            self.ended = None
            self.recurrences += 1
        self.values += values
        self.batches += 1
        if obs.file != self.last_file:
            self.files += 1
        self.last_file, self.last_batch, self.last_row, self.last_seq = obs.file, obs.batch, row, seq

    def stops(self, obs: Observation) -> None:
        if self.ended is None:
            self.ended = (obs.file, obs.batch, obs.row_start)

    def event(self) -> Event:
        s = self.start
        ended = self.ended or (None, None, None)
        return replace(
            s,
            values=self.values,
            rows=self.values if _rows_per_value(s.path) else None,
            batches=self.batches,
            files=self.files,
            last_file=self.last_file,
            last_row=self.last_row,
            ended_file=ended[0],
            ended_batch=ended[1],
            ended_row=ended[2],
            recurrences=self.recurrences,
        )


def _shown(ep: _Episode, st: FieldStats) -> tuple[bool, int, Example | None] | None:
    """Whether a batch where the path is present shows the episode: None when the batch
    cannot tell (a type change in a batch of nulls only), else (shows, values, first example)."""
    kind = ep.start.kind
    if kind in ("nulls-begin",):
        return (st.nulls > 0, st.nulls, st.first(NULL_SAMPLE))
    if kind == "textclass-changed":
        if not st.classes:
            return None
        n = st.classes.get(ep.key or "", 0)
        return (n > 0, n, st.first(class_sample(ep.key or "")))
    if kind in ("field-new", "nested-new"):
        return (True, st.present, _earliest(st))
    if not st.types:
        return None
    n = st.types.get(ep.key or "", 0)
    return (n > 0, n, st.first(type_sample(ep.key or "")))


def _walk(
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]],
    limit: int,
    states: dict[str, _PathState],
    quiet: frozenset[str] = frozenset(),
) -> Iterator[Event]:
    """Every episode but the gone ones: found batch by batch, followed to the end of the scan.
    The paths in quiet raise no new-field episode (a discriminator's shapes explain them).

    Episodes that start once `limit` others are followed are yielded as their start only:
    they are counted, never listed.
    """
    followed: dict[str, list[_Episode]] = {}
    episodes: list[_Episode] = []
    for seq, (obs, parts) in enumerate(sequence):
        found: list[tuple[Event, str | None]] = []
        new_paths = {p for p, st in obs.fields.items() if p not in states and _present(st)}
        for path, raw in obs.fields.items():
            if not _present(raw):
                continue
            st = read_as(raw, states.get(path))  # one logical type across formats (results/reading.py)
            for ep in followed.get(path, ()):
                shown = _shown(ep, st)
                if shown is None:
                    continue
                if shown[0]:
                    ep.shows(obs, seq, shown[1], shown[2].row if shown[2] else obs.row_start)
                else:
                    ep.stops(obs)
            state = states.get(path)
            if state is None:
                state = states[path] = _PathState()
                parent, _ = paths.parent(path)
                if seq > 0 and not (parent is not None and parent in new_paths) and path not in quiet:
                    kind = "field-new" if parent is None else "nested-new"
                    ex = _earliest(st)
                    found.append((_event(kind, path, None, _types_text(st), obs, parts, ex, st.present, seq), None))
            prior_types = set(state.types)
            found.extend(_type_events(path, st, state, obs, parts, seq))
            if st.nulls and not state.had_null and state.had_values:
                ex = st.first(NULL_SAMPLE)
                found.append((_event("nulls-begin", path, None, "null", obs, parts, ex, st.nulls, seq), None))
            found.extend(_class_events(path, st, state, prior_types, obs, parts, seq, cells=raw.text > 0))
            if raw.text:  # type keys only text put in stay open (results/reading.py)
                state.cell_only |= st.types.keys() - prior_types
            elif state.cell_only:
                state.cell_only -= raw.types.keys()
            state.had_null = state.had_null or st.nulls > 0
            state.had_values = state.had_values or st.nonnull > 0
        if len(episodes) >= limit:
            yield from (e for e, _ in found)
            continue
        for e, key in found:
            ep = _Episode(e, key)
            ep.shows(obs, seq, e.count, e.row)
            episodes.append(ep)
            followed.setdefault(e.path, []).append(ep)
    _end_new_fields(sequence, [ep for ep in episodes if ep.start.kind in ("field-new", "nested-new")])
    yield from (ep.event() for ep in episodes)


def _end_new_fields(sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]], news: list[_Episode]) -> None:
    """A new field has ended when a batch after the last one holding it could hold it (any
    batch for a top-level field, one with its parent struct for a nested one) and does not.

    A field that leaves and comes back is told by its field-gone episode, which ends where
    it returns; the new field's episode counts everywhere it shows.
    """
    for ep in news:
        parent, _ = paths.parent(ep.start.path)
        for obs, _ in sequence[ep.last_seq + 1 :]:
            if parent is None or _holds_struct(obs, parent):
                ep.stops(obs)
                break


def _holds_struct(obs: Observation, parent: str) -> bool:
    pst = obs.fields.get(parent)
    return pst is not None and bool(pst.types.get("struct"))


def _types_text(st: FieldStats) -> str:
    return " | ".join(sorted(st.types)) if st.types else "null"


def _event(
    kind: str,
    path: str,
    before: str | None,
    after: str | None,
    obs: Observation,
    parts: tuple[tuple[str, str], ...],
    ex: Example | None,
    count: int,
    seq: int,
) -> Event:
    return Event(
        kind=kind,
        path=path,
        before=before,
        after=after,
        file=obs.file,
        partitions=parts,
        batch=obs.batch,
        row=ex.row if ex else obs.row_start,
        line=ex.line if ex else None,
        example=ex.value if ex and ex.value else None,  # "" once values are hidden (conceal)
        count=count,
        seq=seq,
    )


def _type_events(
    path: str, st: FieldStats, state: _PathState, obs: Observation, parts: tuple[tuple[str, str], ...], seq: int
) -> list[tuple[Event, str | None]]:
    out: list[tuple[Event, str | None]] = []
    # New types in the order they first show within the batch.
    fresh = sorted(
        (k for k in st.types if k not in state.types), key=lambda k: st.first(type_sample(k)) or Example("", 0)
    )
    for key in fresh:
        old = state.joined
        new = join(old, type_of_key(key)).with_nullable(False)
        if state.types and new != old:  # a type the old one already holds (int in float) is no drift
            if path.endswith("[]"):
                kind = "element-changed"
            elif new.name == "union" and (old.name != "union" or len(new.members) > len(old.members)):
                kind = "type-conflict"  # a type of a new family: several kinds live at once
            elif is_widening(old, new) or new.name == "union" and new != old:
                kind = "type-widened"  # within a family, including one member of a union
            else:
                kind = ""
            if kind:
                ex = st.first(type_sample(key))
                after = type_text(new) if kind != "type-conflict" else key
                out.append((_event(kind, path, type_text(old), after, obs, parts, ex, st.types[key], seq), key))
        state.types.add(key)
        state.joined = new
    return out


def _class_events(
    path: str,
    st: FieldStats,
    state: _PathState,
    prior_types: set[str],
    obs: Observation,
    parts: tuple[tuple[str, str], ...],
    seq: int,
    cells: bool = False,
) -> list[tuple[Event, str | None]]:
    out: list[tuple[Event, str | None]] = []
    fresh = sorted(
        (c for c in st.classes if c not in state.classes), key=lambda c: st.first(class_sample(c)) or Example("", 0)
    )
    for cls in fresh:
        if cells and TEXT_CLASS_TYPE[cls] is None:
            continue  # a CSV cell read as a null is no string: the field learns no string class from it
        if state.classes and not _covered_by_type(st, cls, prior_types):
            ex = st.first(class_sample(cls))
            before = ", ".join(sorted(state.classes))
            e = _event("textclass-changed", path, before, cls, obs, parts, ex, st.classes[cls], seq)
            out.append((e, cls))
        state.classes.add(cls)
    return out


def _covered_by_type(st: FieldStats, cls: str, prior_types: set[str]) -> bool:
    # In untyped text a new class usually shows as a type change or as nulls already;
    # report it only when the inferred type stays the same (e.g. another timestamp format).
    if not st.text:
        return False
    inferred = TEXT_CLASS_TYPE.get(cls)
    return inferred is None or inferred not in prior_types


def _series(parts: tuple[tuple[str, str], ...]) -> tuple[tuple[str, str], ...]:
    """The series a batch belongs to: its partition values without the innermost key.

    region=north/day=… files form the series region=north, so a field that stops
    arriving in one region is found even while other regions still send it.
    """
    return parts[:-1]


def _gone_events(
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]],
    states: dict[str, _PathState],
    quiet: frozenset[str] = frozenset(),
) -> Iterator[Event]:
    """Fields that stop arriving, series by series: an episode per field and series (none for
    the paths in quiet, whose presence a discriminator explains).

    It starts at the first batch of the series without the field after one with it (a
    nested field: a batch whose parent struct arrives without it), shows in every such
    batch, ends where the field returns and reopens when it leaves again.
    """
    by_series: dict[tuple[tuple[str, str], ...], list[int]] = {}
    for seq, (_, parts) in enumerate(sequence):
        by_series.setdefault(_series(parts), []).append(seq)
    for series in sorted(by_series):
        seen: set[str] = set()
        open_: dict[str, _Episode] = {}
        for seq in by_series[series]:
            obs, parts = sequence[seq]
            present = {p for p, st in obs.fields.items() if _present(st) and p not in quiet}
            for path in seen:
                if path in present:
                    if path in open_:
                        open_[path].stops(obs)
                    continue
                parent, _ = paths.parent(path)
                if parent is None:
                    missing = obs.rows
                elif _holds_struct(obs, parent):
                    missing = obs.fields[parent].types["struct"]
                else:
                    continue
                ep = open_.get(path)
                if ep is None:
                    kind = "field-gone" if parent is None else "nested-gone"
                    start = Event(
                        kind, path, _joined_key(states[path]), None, obs.file, parts, obs.batch, obs.row_start,
                        _first_line(obs), None, missing, seq=seq,
                    )  # fmt: skip
                    ep = open_[path] = _Episode(start, None)
                ep.shows(obs, seq, missing, obs.row_start + obs.rows - 1)
            seen |= present
        for path in sorted(open_):
            yield open_[path].event()


def _first_line(obs: Observation) -> int | None:
    """The line of the batch's first row, when some sample of the batch sits on that row."""
    for st in obs.fields.values():
        for exs in st.samples.values():
            if exs and exs[0].row == obs.row_start:
                return exs[0].line
    return None


def _joined_key(state: _PathState) -> str:
    return type_text(state.joined) if state.joined is not UNKNOWN else "null"


def _partition_events(
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]], findings: list[PartitionFinding]
) -> Iterator[Event]:
    """Each partition finding as an episode over the batches of the values it names, in scan
    order: its start is the first batch of those values that shows it, its reach every batch
    of them that shows it (docs/drift.md says what could show and shows each kind)."""
    for f in findings:
        concerned = set(f.values)
        ep: _Episode | None = None
        for seq, (obs, parts) in enumerate(sequence):
            if dict(parts).get(f.key) not in concerned:
                continue
            shown = _partition_shown(f, obs)
            if shown is None:
                continue
            shows, count, ex, last_row = shown
            if not shows:
                if ep is not None:
                    ep.stops(obs)
                continue
            if ep is None:
                start = Event(
                    f.kind, f.path, f.before, f.after, obs.file, parts, obs.batch,
                    ex.row if ex else obs.row_start,
                    ex.line if ex else _first_line(obs),
                    ex.value if ex and ex.value else None,
                    count, partition_key=f.key, partition_values=f.values, partition_compared=f.compared, seq=seq,
                )  # fmt: skip
                ep = _Episode(start, None)
            ep.shows(obs, seq, count, last_row)
        if ep is not None:
            yield ep.event()


def _partition_shown(f: PartitionFinding, obs: Observation) -> tuple[bool, int, Example | None, int | None] | None:
    """Whether a batch of a value the finding names shows it: None when the batch could not
    show it, else (shows, values, the first example, the row its last_row would be)."""
    st = obs.fields.get(f.path)
    if f.kind == "partition-lacks":  # could hold it: rows, or the parent struct, arrive
        places = container_count(f.path, obs.fields, obs.rows)
        return None if places == 0 else (True, places, None, obs.row_start + obs.rows - 1)
    if st is None or not st.present:
        return None
    if f.kind == "partition-nulls":
        ex = st.first(NULL_SAMPLE)
        return (st.nulls > 0, st.nulls, ex, ex.row if ex else obs.row_start)
    n = sum(logical_counts(st).values())  # partition-type: none of its values is of the others' type
    if not n:
        return None
    ex = min((e for k in st.types if (e := st.first(type_sample(k))) is not None), default=None)
    return (True, n, ex, ex.row if ex else obs.row_start)
