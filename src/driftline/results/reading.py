"""One logical type across formats: a batch's values as the drift walk compares them.

A CSV cell has no type of its own (RFC 4180 defines fields as text), and JSON has no date or
time type (RFC 8259 section 3: object, array, number, string, true, false, null), so a
timestamp in JSON is a string and in CSV a cell of text. The readers keep what each format
gives (the field summaries and the recommended schema need those physical types); the walk
compares a field by what its values are, read against what the field held before:

- a CSV cell whose text reads as a type the field already holds is a value of that type
  (``"5"`` after JSON ``5``, ``"2026-03-01T00:00:00Z"`` after Parquet ``timestamp[us, UTC]``);
- else, where the field held strings, it is a string, and its content class is compared with
  those strings' classes (``"5"`` after JSON ``"5"``: nothing; ``"north"`` after JSON
  ``"12"``: a new class, digits turning into labels); an empty cell or a null token (``n/a``)
  where the same text arrived as strings is that string again, not a null;
- else it reads as its text's type (TEXT_CLASS_TYPE): the field's first rows, or a real change
  (``"north"`` after JSON numbers: a string; ``"12.5"`` after integers: a wider number);
- a JSON string whose class is a date or timestamp reads as that type where the field held it
  and no strings: JSON can write a timestamp no other way;
- before any value with a type of its own, the type CSV cells gave stays open: a string that
  repeats their class reads as that type (JSON ``"5"`` after CSV ``"5"``: nothing);
- a native date or timestamp (Parquet, Arrow) where the field held strings of the class that
  spells it (``timestamp[…, zone]``: ``timestamp_rfc3339`` or ``timestamp_offset``;
  ``timestamp[…]`` without a zone: ``timestamp_local``; ``date32``/``date64``: ``date``), and
  not that type, reads as such a string: the same instants in the one form JSON has for them.

docs/drift.md ("One logical type across formats") gives the table and each reason.

>>> from driftline.core.stats import FieldStats
>>> cells = FieldStats(types={"timestamp[us, UTC]": 2}, classes={"timestamp_rfc3339": 2}, text=2)
>>> seen = Seen(types={"string"}, classes={"timestamp_rfc3339"})
>>> read_as(cells, seen).types, read_as(cells, Seen(types={"int64"})).types
({'string': 2}, {'timestamp[us, UTC]': 2})
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import Protocol

from driftline.core.lattice import UNKNOWN, DType, join, type_of_key
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.core.stats import NULL_SAMPLE, SAMPLES_PER_KEY, Example, FieldStats, Samples, class_sample, type_sample

# The classes that spell a date or a time: JSON has no type for them (RFC 8259 section 3).
TEMPORAL_CLASSES = ("date", "timestamp_rfc3339", "timestamp_offset", "timestamp_local")


class State(Protocol):
    """What the walk knows of a field so far (results/drift._PathState)."""

    joined: DType
    types: set[str]
    classes: set[str]
    cell_only: set[str]


@dataclass(slots=True)
class Seen:
    """A State of its own, for examples and tests."""

    joined: DType = UNKNOWN
    types: set[str] = field(default_factory=set)
    classes: set[str] = field(default_factory=set)
    cell_only: set[str] = field(default_factory=set)

    def __post_init__(self) -> None:
        for key in sorted(self.types):
            self.joined = join(self.joined, type_of_key(key))


def spelling_classes(key: str) -> tuple[str, ...]:
    """The content classes whose text stands for a value of this native type (none for others).

    >>> spelling_classes("timestamp[ms, UTC]"), spelling_classes("timestamp[us]"), spelling_classes("int64")
    (('timestamp_rfc3339', 'timestamp_offset'), ('timestamp_local',), ())
    """
    t = type_of_key(key)
    if t.name == "timestamp":
        return ("timestamp_rfc3339", "timestamp_offset") if t.tz else ("timestamp_local",)
    if t.name in ("date32", "date64"):
        return ("date",)
    return ()


def _holds(state: State, key: str) -> bool:
    """Whether the field's joined type already holds a value of this type (int64 in float64)."""
    return state.joined is not UNKNOWN and _joins_into(state.joined, key)


@lru_cache(maxsize=4096)
def _joins_into(joined: DType, key: str) -> bool:
    # A field's joined type changes seldom and its keys are few: the walk asks the same
    # question for every batch of every CSV column.
    return join(joined, type_of_key(key)) == joined


def read_as(st: FieldStats, state: State | None) -> FieldStats:
    """The batch's statistics of one field as the walk compares them: st itself when every
    value reads as what its format gave it (the common case), else a copy with the values
    moved between type keys (and nulls) as the module docstring says."""
    if state is None or not state.types:
        moves: list[_Move] = []
    elif st.text:
        moves = _cell_moves(st, state) if "string" in state.types else []
    else:
        moves = _typed_moves(st, state) if st.classes or "string" in state.types else []
    return _moved(st, moves) if moves else st


# A move: (class or None, from key or None for nulls, to key, count, class it reads as).
_Move = tuple[str | None, str | None, str, int, str | None]


def _cell_moves(st: FieldStats, state: State) -> list[_Move]:
    """Where the field held strings: the cells read as strings."""
    out: list[_Move] = []
    for cls, n in st.classes.items():
        own = TEXT_CLASS_TYPE[cls]
        if own is None:
            if cls in state.classes:  # "" or "n/a" that arrived as strings before
                out.append((cls, None, "string", n, cls))
        elif own != "string" and not _holds(state, own):
            out.append((cls, own, "string", n, cls))
    return out


def _typed_moves(st: FieldStats, state: State) -> list[_Move]:
    out: list[_Move] = []
    strings = "string" in state.types
    if st.classes and not strings:
        for cls, n in st.classes.items():
            own = TEXT_CLASS_TYPE[cls]
            typed = own is not None and own != "string" and _holds(state, own)
            if typed and own is not None and (cls in TEMPORAL_CLASSES or own in state.cell_only):
                out.append((cls, "string", own, n, None))
    if strings:
        for key, n in st.types.items():
            if key in state.types or _holds(state, key):
                continue
            spelt = [c for c in spelling_classes(key) if c in state.classes]
            if spelt:
                out.append((None, key, "string", n, spelt[0]))
    return out


def _moved(st: FieldStats, moves: Iterable[_Move]) -> FieldStats:
    types, classes, nulls = dict(st.types), dict(st.classes), st.nulls
    samples: Samples = dict(st.samples)
    for cls, src, dst, n, as_class in moves:
        if src is None:
            nulls -= n
        else:
            left = types.get(src, 0) - n
            if left > 0:
                types[src] = left
            else:
                types.pop(src, None)
                samples.pop(type_sample(src), None)
        types[dst] = types.get(dst, 0) + n
        shown = st.samples.get(class_sample(cls) if cls is not None else type_sample(src or ""), ())
        samples[type_sample(dst)] = _earliest(samples.get(type_sample(dst), ()), shown)
        if as_class is not None and cls is None:  # a native value read as the text that spells it
            classes[as_class] = classes.get(as_class, 0) + n
            samples[class_sample(as_class)] = _earliest(samples.get(class_sample(as_class), ()), shown)
    if nulls == 0:
        samples.pop(NULL_SAMPLE, None)
    text = 0 if all(dst == "string" for _, _, dst, _, _ in moves) and not types.keys() - {"string"} else st.text
    return replace(st, types=types, classes=classes, nulls=nulls, samples=samples, text=text)


def _earliest(a: tuple[Example, ...], b: tuple[Example, ...]) -> tuple[Example, ...]:
    return tuple(sorted(set(a) | set(b)))[:SAMPLES_PER_KEY]
