"""Drift: an ordered walk over batch observations (path order, then batch order).

The walk is sequential on purpose: it runs after every observation is in, so parallel
reading never changes which event is "first".
"""

from __future__ import annotations

import heapq
from collections import Counter
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from driftline.core import paths
from driftline.core.files import FileResult
from driftline.core.jsontypes import JSONObject, JSONValue
from driftline.core.lattice import UNKNOWN, DType, is_widening, join, type_of_key, type_text
from driftline.core.observation import TEXT_CLASS_TYPE, Observation
from driftline.core.options import DEFAULT_MAX_EVENTS
from driftline.core.stats import NULL_SAMPLE, Example, FieldStats, class_sample, type_sample
from driftline.results.levels import level_of

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
}
_KIND_ORDER = {k: i for i, k in enumerate(EVENT_KINDS)}


@dataclass(frozen=True, slots=True)
class Event:
    """One drift event with its provenance.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": null}\\n')
    >>> e = driftline.scan(d, batch_rows=1).events[0]
    >>> e.kind, e.path, e.file, e.batch, e.row, e.line
    ('nulls-begin', 'x', 'a.jsonl', 1, 1, 2)
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
    count: int  # how many values in that batch show it
    seq: int = field(default=0, compare=False)  # position of the batch in scan order

    @property
    def level(self) -> str:
        """breaking, widening or info: what the change does to a reader of the schema before it
        (results/levels.py, the one mapping).

        >>> Event("nulls-begin", "x", None, "null", "a.jsonl", (), 0, 1, 2, None, 1).level
        'breaking'
        """
        return level_of(self.kind, self.before, self.after)

    def to_json(self) -> JSONObject:
        """The event as it appears in the JSON report's "events" list."""
        return {
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
            "example": self.example,
            "count": self.count,
        }

    @staticmethod
    def from_json(data: Mapping[str, JSONValue]) -> Event:
        """The event back from its report form (to_json's inverse; seq is not kept).

        >>> e = Event("field-new", "x", None, "int64", "a.jsonl", (), 0, 0, 1, "1", 1)
        >>> Event.from_json(e.to_json()) == e
        True
        """
        d: Mapping[str, Any] = data  # checked against docs/report.schema.json when a report is loaded
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
            d.get("example"),
            d.get("count", 0),
        )


@dataclass(slots=True)
class _PathState:
    joined: DType = UNKNOWN
    types: set[str] = field(default_factory=set)
    classes: set[str] = field(default_factory=set)
    had_values: bool = False
    had_null: bool = False


def _earliest(st: FieldStats) -> Example | None:
    firsts = [exs[0] for exs in st.samples.values() if exs]
    return min(firsts) if firsts else None


def _present(st: FieldStats | None) -> bool:
    return st is not None and st.present > 0


def drift_events(files: Sequence[FileResult], limit: int = DEFAULT_MAX_EVENTS) -> tuple[Event, ...]:
    """The drift events of the file results (sorted by relative path) in scan order: the
    first `limit` of them; drift_summary also gives the exact totals."""
    return drift_summary(files, limit)[0]


def drift_summary(
    files: Sequence[FileResult], limit: int = DEFAULT_MAX_EVENTS
) -> tuple[tuple[Event, ...], dict[str, int], dict[str, int]]:
    """(the first `limit` events in scan order, the number of events of each kind, and of each
    level, all counted).

    Drift takes the ordered file results, never a Profile: it is the one walk in scan order.
    Only `limit` events are held at any time: a scan with a tiny batch_rows over many paths
    and partitions finds events by the million.
    """
    counts: Counter[str] = Counter()
    levels: Counter[str] = Counter()

    def counted() -> Iterator[Event]:
        for e in _all_events(files):
            counts[e.kind] += 1
            levels[e.level] += 1
            yield e

    # nsmallest is sorted(...)[:limit] (ties keep their order) with a heap of limit events.
    kept = heapq.nsmallest(limit, counted(), key=_order)
    return tuple(kept), {k: counts[k] for k in EVENT_KINDS if counts[k]}, dict(levels)


def _order(e: Event) -> tuple[int, int, int, str]:
    return (e.seq, e.row if e.row is not None else -1, _KIND_ORDER[e.kind], e.path)


def _all_events(files: Sequence[FileResult]) -> Iterator[Event]:
    """Every drift event, batch by batch (the events of one batch in no set order), then the gone ones."""
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]] = [
        (o, f.partitions) for f in files for o in f.observations
    ]
    states: dict[str, _PathState] = {}
    for seq, (obs, parts) in enumerate(sequence):
        events: list[Event] = []
        new_paths = {p for p, st in obs.fields.items() if p not in states and _present(st)}
        for path, st in obs.fields.items():
            if not _present(st):
                continue
            state = states.get(path)
            if state is None:
                state = states[path] = _PathState()
                parent, _ = paths.parent(path)
                if seq > 0 and not (parent is not None and parent in new_paths):
                    kind = "field-new" if parent is None else "nested-new"
                    ex = _earliest(st)
                    events.append(_event(kind, path, None, _types_text(st), obs, parts, ex, st.present, seq))
            prior_types = set(state.types)
            events.extend(_type_events(path, st, state, obs, parts, seq))
            if st.nulls and not state.had_null and state.had_values:
                ex = st.first(NULL_SAMPLE)
                events.append(_event("nulls-begin", path, None, "null", obs, parts, ex, st.nulls, seq))
            events.extend(_class_events(path, st, state, prior_types, obs, parts, seq))
            state.had_null = state.had_null or st.nulls > 0
            state.had_values = state.had_values or st.nonnull > 0
        yield from events
    yield from _gone_events(sequence, states)


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
) -> list[Event]:
    out = []
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
                out.append(
                    _event(
                        kind,
                        path,
                        type_text(old),
                        type_text(new) if kind != "type-conflict" else key,
                        obs,
                        parts,
                        ex,
                        st.types[key],
                        seq,
                    )
                )
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
) -> list[Event]:
    out = []
    fresh = sorted(
        (c for c in st.classes if c not in state.classes), key=lambda c: st.first(class_sample(c)) or Example("", 0)
    )
    for cls in fresh:
        if state.classes and not _covered_by_type(st, cls, prior_types):
            ex = st.first(class_sample(cls))
            before = ", ".join(sorted(state.classes))
            out.append(_event("textclass-changed", path, before, cls, obs, parts, ex, st.classes[cls], seq))
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
    sequence: list[tuple[Observation, tuple[tuple[str, str], ...]]], states: dict[str, _PathState]
) -> list[Event]:
    by_series: dict[tuple[tuple[str, str], ...], list[int]] = {}
    for seq, (_, parts) in enumerate(sequence):
        by_series.setdefault(_series(parts), []).append(seq)
    out = []
    for series in sorted(by_series):
        seqs = by_series[series]
        last_seen: dict[str, int] = {}
        for i, seq in enumerate(seqs):
            for path, st in sequence[seq][0].fields.items():
                if _present(st):
                    last_seen[path] = i
        for path, last in sorted(last_seen.items()):
            if last == len(seqs) - 1:
                continue
            parent, _ = paths.parent(path)
            for i in range(last + 1, len(seqs)):
                obs, parts = sequence[seqs[i]]
                pst = obs.fields.get(parent) if parent is not None else None
                if parent is None or pst is not None and pst.types.get("struct"):
                    kind = "field-gone" if parent is None else "nested-gone"
                    later = sum(sequence[s][0].rows for s in seqs[i:])
                    out.append(
                        Event(
                            kind,
                            path,
                            _joined_key(states[path]),
                            None,
                            obs.file,
                            parts,
                            obs.batch,
                            obs.row_start,
                            _first_line(obs),
                            None,
                            later,
                            seqs[i],
                        )
                    )
                    break
    return out


def _first_line(obs: Observation) -> int | None:
    """The line of the batch's first row, when some sample of the batch sits on that row."""
    for st in obs.fields.values():
        for exs in st.samples.values():
            if exs and exs[0].row == obs.row_start:
                return exs[0].line
    return None


def _joined_key(state: _PathState) -> str:
    return type_text(state.joined) if state.joined is not UNKNOWN else "null"
