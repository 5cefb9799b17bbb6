"""Diff two profiles, or consecutive partitions of one: which fields changed, and how.

Both sides are views of fields (path → FieldSummary), so the same comparison serves two
reports, two scanned paths, and partition after partition (Profile.by_partition).

>>> from driftline.core.stats import FieldStats
>>> from driftline.results.profile import summarise
>>> a = summarise({"x": FieldStats(types={"int64": 2})}, 2)
>>> b = summarise({"x": FieldStats(types={"int64": 1, "float64": 1})}, 2)
>>> [(c.kind, c.path, c.before, c.after) for c in diff_fields(a, b).changes]
[('widened', 'x', 'int64', 'float64')]
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, replace

from rich.console import Console
from rich.text import Text

from driftline.core import paths
from driftline.core.jsontypes import JSONObject
from driftline.core.lattice import DType, join, join_all, type_of_key, type_text
from driftline.core.stats import NULL_SAMPLE, Example, FieldStats, SampleKey, class_sample, example_json, type_sample
from driftline.emit.safe import safe_text
from driftline.gate.baseline import NULL_CLASSES
from driftline.gate.diff_kinds import DEFAULT_NULL_POINTS as DEFAULT_NULL_POINTS
from driftline.gate.diff_kinds import DIFF_FORMAT as DIFF_FORMAT
from driftline.gate.diff_kinds import DIFF_KINDS as DIFF_KINDS
from driftline.gate.diff_kinds import DIFF_VERSION as DIFF_VERSION
from driftline.results.profile import FieldSummary, Profile

_ORDER = {k: i for i, k in enumerate(DIFF_KINDS)}


@dataclass(frozen=True, slots=True)
class Side:
    """A field on one side of a diff, as data: its type (the join of its non-null values'
    types, 'null' when it has none), whether it holds null or absent values, the share of them
    (of the rows, or of the parent's values for a nested path: 0 to 1), and its string content
    classes (of JSON strings and CSV cells both)."""

    type: str
    nullable: bool
    null_share: float
    classes: tuple[str, ...]

    def to_json(self) -> JSONObject:
        return {
            "type": self.type,
            "nullable": self.nullable,
            "null_share": self.null_share,
            "classes": list(self.classes),
        }


def side_of(s: FieldSummary) -> Side:
    return Side(_types_text(s.stats), s.nullable, _share(s), tuple(sorted(set(s.stats.classes) - NULL_CLASSES)))


@dataclass(frozen=True, slots=True)
class FieldChange:
    """One change of one field; example is the first place the second side shows it. before
    and after are the words a person reads; was and now are the field on each side, as data."""

    kind: str
    path: str
    before: str | None
    after: str | None
    example: Example | None = None
    was: Side | None = None
    now: Side | None = None

    @property
    def message(self) -> str:
        """The change in words, as the terminal prints it after the path."""
        return f"{self.before or '–'} → {self.after or '–'}"

    def to_json(self) -> JSONObject:
        ex = self.example
        return {
            "kind": self.kind,
            "path": self.path,
            "before": self.was.to_json() if self.was else None,
            "after": self.now.to_json() if self.now else None,
            "message": self.message,
            "file": ex.file if ex else None,
            "row": ex.row if ex else None,
            "line": ex.line if ex else None,
            "example": example_json(ex.value) if ex and ex.value else None,
        }


@dataclass(frozen=True)
class Diff:
    """The changes from one side (before) to the other (after).

    >>> d = Diff("day=1", "day=2", (FieldChange("added", "y", None, "bool"),))
    >>> d.counts(), d.to_json()["changes"][0]["kind"]
    ({'added': 1}, 'added')
    """

    before: str
    after: str
    changes: tuple[FieldChange, ...]

    def counts(self) -> dict[str, int]:
        """How many changes of each kind, in DIFF_KINDS order (kinds with none left out)."""
        n = Counter(c.kind for c in self.changes)
        return {k: n[k] for k in DIFF_KINDS if n[k]}

    def to_json(self) -> JSONObject:
        """The diff as plain JSON data: both sides, the counts and every change."""
        return {
            "before": self.before,
            "after": self.after,
            "counts": dict(self.counts()),
            "changes": [c.to_json() for c in self.changes],
        }


def _type(st: FieldStats) -> DType | None:
    return join_all(type_of_key(k) for k in st.types).with_nullable(False) if st.types else None


def _share(s: FieldSummary) -> float:
    return (s.stats.nulls + s.absent) / s.container if s.container else 0.0


def _first_of(st: FieldStats, keys: list[SampleKey]) -> Example | None:
    found = [st.first(k) for k in keys]
    hits = [e for e in found if e is not None]
    return min(hits) if hits else None


def _earliest(st: FieldStats) -> Example | None:
    return _first_of(st, list(st.samples))


def _type_change(path: str, sa: FieldStats, sb: FieldStats) -> FieldChange | None:
    ta, tb = _type(sa), _type(sb)
    if ta is None or tb is None or ta == tb:
        return None
    joined = join(ta, tb).with_nullable(False)
    if joined == ta:
        kind = "narrowed"
    elif joined.name != "union" or joined == tb and ta.name == "union":
        # int32 → uint32 meet in int64: the unified type is wider than the first side's.
        kind = "widened"
    else:
        kind = "type-changed"
    ex = _first_of(sb, [type_sample(k) for k in sb.types if k not in sa.types])
    return FieldChange(kind, path, type_text(ta), type_text(tb), ex)


def _null_change(path: str, a: FieldSummary, b: FieldSummary, points: float) -> FieldChange | None:
    sa, sb = _share(a), _share(b)
    shares = f"{100 * sa:.1f}% → {100 * sb:.1f}%"
    if not a.nullable and b.nullable:
        return FieldChange("newly-nullable", path, "not nullable", f"nullable ({shares})", b.stats.first(NULL_SAMPLE))
    # The small tolerance keeps 3 % − 2 % a one-point move despite binary fractions.
    if a.nullable and b.nullable and sa != sb and abs(100 * (sb - sa)) + 1e-9 >= points:
        return FieldChange("null-share", path, f"{100 * sa:.1f}%", f"{100 * sb:.1f}%", b.stats.first(NULL_SAMPLE))
    return None


def _class_change(path: str, sa: FieldStats, sb: FieldStats) -> FieldChange | None:
    ca, cb = set(sa.classes) - NULL_CLASSES, set(sb.classes) - NULL_CLASSES
    if not ca or not cb or ca == cb:
        return None
    ex = _first_of(sb, [class_sample(c) for c in sorted(cb - ca)])
    return FieldChange("content-class", path, ", ".join(sorted(ca)), ", ".join(sorted(cb)), ex)


def diff_fields(
    a: Mapping[str, FieldSummary],
    b: Mapping[str, FieldSummary],
    *,
    before: str = "before",
    after: str = "after",
    min_null_points: float = DEFAULT_NULL_POINTS,
) -> Diff:
    """Changes from fields a to fields b. A field under an added or removed one is not listed again."""
    out: list[FieldChange] = []
    for path in sorted(a.keys() | b.keys()):
        parent, _ = paths.parent(path)
        if path not in a:
            if parent is None or parent in a:
                out.append(
                    FieldChange(
                        "added", path, None, _types_text(b[path].stats), _earliest(b[path].stats), now=side_of(b[path])
                    )
                )
            continue
        if path not in b:
            if parent is None or parent in b:
                out.append(FieldChange("removed", path, _types_text(a[path].stats), None, was=side_of(a[path])))
            continue
        for change in (
            _type_change(path, a[path].stats, b[path].stats),
            _null_change(path, a[path], b[path], min_null_points),
            _class_change(path, a[path].stats, b[path].stats),
        ):
            if change is not None:
                out.append(replace(change, was=side_of(a[path]), now=side_of(b[path])))
    out.sort(key=lambda c: (_ORDER[c.kind], c.path))
    return Diff(before, after, tuple(out))


def _types_text(st: FieldStats) -> str:
    t = _type(st)
    return type_text(t) if t is not None else "null"


def diff_profiles(
    a: Profile,
    b: Profile,
    *,
    before: str | None = None,
    after: str | None = None,
    min_null_points: float = DEFAULT_NULL_POINTS,
) -> Diff:
    """Changes from profile a to profile b, over all their fields."""
    return diff_fields(
        a.fields, b.fields, before=before or a.root, after=after or b.root, min_null_points=min_null_points
    )


def diff_partitions(profile: Profile, key: str, *, min_null_points: float = DEFAULT_NULL_POINTS) -> tuple[Diff, ...]:
    """Each value of a partition key against the value before it (values in sorted order)."""
    groups = profile.by_partition(key)
    values = list(groups)
    return tuple(
        diff_fields(groups[x], groups[y], before=f"{key}={x}", after=f"{key}={y}", min_null_points=min_null_points)
        for x, y in zip(values, values[1:], strict=False)
    )


def render(diffs: tuple[Diff, ...], console: Console) -> None:
    """Each diff: a heading with its counts, then one line per change with where and a value."""
    for i, d in enumerate(diffs):
        if i:
            console.print()
        text = Text()
        text.append(f"{safe_text(d.before, None)} → {safe_text(d.after, None)}", style="bold")
        counts = d.counts()
        text.append(": " + (", ".join(f"{n} {k}" for k, n in counts.items()) if counts else "no changes"))
        for c in d.changes:
            text.append(f"\n  {c.kind:<15}", style="bold")
            text.append(safe_text(c.path))
            if c.before is not None or c.after is not None:
                text.append(f": {safe_text(c.before or '–')} → {safe_text(c.after or '–')}")
            if c.example is not None:
                where = c.example.file + (f" row {c.example.row}" if c.example.row >= 0 else "")
                text.append(f"  (at {safe_text(where, 160)}")
                if c.example.value:
                    text.append(f", e.g. {safe_text(c.example.value, 40)}")
                text.append(")")
        console.print(text, soft_wrap=True)
