"""Per field path statistics, and the one way two of them combine: merge.

FieldStats are values. Each statistic is declared once, as a field of FieldStats with its
rule (``stat(RULE)``): how two values merge, how the value is written to JSON and read
back. merge, merge_all, to_json and from_json are derived from those declarations
(``StatsTable``), so adding a statistic is one line in FieldStats (and its name in
``Measured``, the typed keyword arguments the observers pass). Every rule is commutative and
associative (counts add, extremes take min/max, samples keep the K earliest positions), so
per-batch, per-file and per-worker results combine in any order and give the same profile.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from functools import reduce
from operator import add, attrgetter, call
from typing import Any, Generic, Literal, NamedTuple, TypedDict, TypeVar

from driftline.core import jsonnum
from driftline.core.stagetime import staged

SAMPLES_PER_KEY = 3  # earliest examples kept per type / class / null key

_T = TypeVar("_T")


def pickled_by_fields(cls: type[_T]) -> type[_T]:
    """Pickle a dataclass as its constructor arguments: a scan with --jobs sends every batch's
    statistics between processes, and this takes about a third less time both ways."""
    get = attrgetter(*(f.name for f in fields(cls)))  # type: ignore[arg-type]
    cls.__reduce__ = lambda self: (cls, get(self))  # type: ignore[method-assign]
    return cls


@pickled_by_fields
@dataclass(frozen=True, slots=True, order=True)
class Example:
    """A value seen at one place: file (relative path), 0-based row within the file, line."""

    file: str
    row: int
    line: int | None = field(default=None, compare=False)
    value: str = field(default="", compare=False)  # short JSON text of the value

    def to_json(self) -> dict[str, Any]:
        """The example as a report writes it: its value as a JSON value (example_json)."""
        return {"file": self.file, "row": self.row, "line": self.line, **example_json(self.value)}

    @staticmethod
    def from_json(d: Mapping[str, Any]) -> Example:
        return Example(d["file"], d["row"], d.get("line"), example_text(d))


def example_json(text: str) -> dict[str, Any]:
    """An example's JSON text as the report writes it: {"value": the value itself} when the text
    is the whole JSON text of one value, else {"text": text} for a value that has none: cut at
    80 characters (ends with '…'), hidden (''), hashed ('hmac:…') or not JSON (a Python repr).
    Only a text that reads back to itself is a value, so example_text is its exact inverse.

    >>> example_json('"19.9"'), example_json('[1,2]'), example_json('"abc…'), example_json('')
    ({'value': '19.9'}, {'value': [1, 2]}, {'text': '"abc…'}, {'text': ''})
    """
    try:
        value = jsonnum.loads(text)
    except ValueError:  # orjson.JSONDecodeError is a ValueError
        return {"text": text}
    return {"value": value} if jsonnum.dumps(value).decode() == text else {"text": text}


def example_text(d: Mapping[str, Any]) -> str:
    """The JSON text of an example written by example_json.

    >>> example_text({"value": "19.9"}), example_text({"value": None}), example_text({"text": "hmac:0a"})
    ('"19.9"', 'null', 'hmac:0a')
    """
    if "value" in d:
        return jsonnum.dumps(d["value"]).decode()
    return str(d.get("text", ""))


SampleKind = Literal["class", "null", "type"]


class SampleKey(NamedTuple):
    """What a sample's examples are examples of: values of a type key, strings of a content
    class, or nulls. Keys order as their text does ('class:…' < 'null' < 'type:…'), so a
    samples map sorted by key is written in the order it always was.

    >>> str(type_sample("int64")), str(class_sample("date")), str(NULL_SAMPLE)
    ('type:int64', 'class:date', 'null')
    >>> SampleKey.parse("type:decimal(30,0)") == type_sample("decimal(30,0)")
    True
    """

    kind: SampleKind
    name: str = ""

    def __str__(self) -> str:
        return "null" if self.kind == "null" else self.kind + ":" + self.name

    @staticmethod
    def parse(text: str) -> SampleKey:
        """The key a report writes as text ('type:<key>', 'class:<name>' or 'null')."""
        if text == "null":
            return NULL_SAMPLE
        kind, sep, name = text.partition(":")
        if sep and name and kind == "type":
            return type_sample(name)
        if sep and name and kind == "class":
            return class_sample(name)
        raise ValueError(f"not a sample key: {text!r} (expected 'type:<key>', 'class:<name>' or 'null')")


# One key object per name, and its text, kept: equal keys are then the same object (a
# dictionary lookup is an identity check, a pickle of many statistics writes each key once)
# and the report's text of a key is a lookup.
_TYPE_SAMPLES: dict[str, SampleKey] = {}
_CLASS_SAMPLES: dict[str, SampleKey] = {}
_KEY_TEXT: dict[SampleKey, str] = {}
_KEY_OF_TEXT: dict[str, SampleKey] = {}
_KEPT_KEYS = 4096  # names past it (a file may hold any number of decimal widths) are not kept


def _kept(kept: dict[str, SampleKey], key: SampleKey) -> SampleKey:
    if len(kept) < _KEPT_KEYS:
        kept[key.name] = key
        text = str(key)
        _KEY_TEXT[key], _KEY_OF_TEXT[text] = text, key
    return key


def type_sample(key: str) -> SampleKey:
    """The sample key of values of a shallow type key ('int64', 'string', 'list', ...)."""
    got = _TYPE_SAMPLES.get(key)
    return got if got is not None else _kept(_TYPE_SAMPLES, SampleKey("type", key))


def class_sample(name: str) -> SampleKey:
    """The sample key of strings of a content class ('integer', 'date', 'text', ...)."""
    got = _CLASS_SAMPLES.get(name)
    return got if got is not None else _kept(_CLASS_SAMPLES, SampleKey("class", name))


NULL_SAMPLE = _kept({}, SampleKey("null"))


Samples = dict[SampleKey, tuple[Example, ...]]


# --- Rules: how one statistic merges and travels ------------------------------------------


@dataclass(frozen=True, slots=True)
class Rule:
    """How one statistic combines and travels.

    merge      its values, in merge order → the merged value (commutative and associative)
    pair       the same for two values (a, b): what merge((a, b)) gives, without the tuple
    empty      a new value of a FieldStats that saw nothing; to_json leaves out a value
               equal to it unless the field is always written
    to_json / from_json   the value's JSON form, and back (None: the value itself)
    """

    merge: Callable[[Sequence[Any]], Any]
    pair: Callable[[Any, Any], Any]
    empty: Callable[[], Any]
    to_json: Callable[[Any], Any] | None = None
    from_json: Callable[[Any], Any] | None = None


def _sum_counts(maps: Sequence[Mapping[str, int]]) -> dict[str, int]:
    out: dict[str, int] = {}
    for m in maps:
        for k, n in m.items():
            out[k] = out.get(k, 0) + n
    return dict(sorted(out.items()))


def _add_counts(a: Mapping[str, int], b: Mapping[str, int]) -> dict[str, int]:
    out = dict(a)
    for k, n in b.items():
        out[k] = out.get(k, 0) + n
    return dict(sorted(out.items()))


def _lowest(values: Sequence[Any]) -> Any:
    return reduce(_lo, values)


def _highest(values: Sequence[Any]) -> Any:
    return reduce(_hi, values)


def _lo(a: Any, b: Any) -> Any:
    if a is None:
        return b
    if b is None:
        return a
    return a if _key(a) <= _key(b) else b


def _hi(a: Any, b: Any) -> Any:
    if a is None:
        return b
    if b is None:
        return a
    return a if _key(a) >= _key(b) else b


def _key(v: Any) -> tuple[int, Any]:
    # Numbers compare as numbers, anything else (temporal ISO text) as text: a total order.
    return (0, v) if isinstance(v, int | float) and not isinstance(v, bool) else (1, str(v))


def _none() -> None:
    return None


# JSON has no infinity (RFC 8259 section 6), and orjson writes one as null: a float extreme
# past float64's range is written as a word instead, which no temporal or decimal text equals.
_NON_FINITE = {"inf": math.inf, "-inf": -math.inf, "nan": math.nan}


def _extreme_to_json(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return "nan" if math.isnan(value) else "inf" if value > 0 else "-inf"
    return value


def _extreme_from_json(value: Any) -> Any:
    return _NON_FINITE.get(value, value) if isinstance(value, str) else value


def _earliest_samples(maps: Sequence[Samples]) -> Samples:
    parts: dict[SampleKey, list[tuple[Example, ...]]] = {}
    for m in maps:
        for k, exs in m.items():
            got = parts.get(k)
            if got is None:
                parts[k] = [exs]
            else:
                got.append(exs)
    return {k: _earliest(got) for k, got in sorted(parts.items())}


def _earliest(parts: list[tuple[Example, ...]]) -> tuple[Example, ...]:
    # One side alone is kept as it is; else the K earliest of the union, an example of the
    # same place (file, row) keeping its first occurrence.
    if len(parts) == 1:
        return parts[0]
    return tuple(sorted(dict.fromkeys(e for exs in parts for e in exs)))[:SAMPLES_PER_KEY]


def _earliest_of_two(a: Samples, b: Samples) -> Samples:
    out = dict(a)
    for k, exs in b.items():
        got = out.get(k)
        out[k] = exs if got is None else tuple(sorted(dict.fromkeys((*got, *exs))))[:SAMPLES_PER_KEY]
    return dict(sorted(out.items()))


def _samples_to_json(samples: Samples) -> dict[str, list[dict[str, Any]]]:
    texts = _KEY_TEXT
    return {texts.get(k) or str(k): [e.to_json() for e in exs] for k, exs in samples.items()}


def _samples_from_json(d: Mapping[str, Any]) -> Samples:
    keys = _KEY_OF_TEXT
    return {keys.get(k) or SampleKey.parse(k): tuple(Example.from_json(e) for e in exs) for k, exs in d.items()}


# Rules: (merge, pair, empty[, to_json, from_json])
COUNTS = Rule(_sum_counts, _add_counts, dict, from_json=dict)  # key → count; counts add, keys in order
TOTAL = Rule(sum, add, int)  # a count; counts add
LARGEST = Rule(max, max, int)  # the largest seen
LOWEST = Rule(_lowest, _lo, _none, _extreme_to_json, _extreme_from_json)  # numbers as numbers, else text
HIGHEST = Rule(_highest, _hi, _none, _extreme_to_json, _extreme_from_json)
EARLIEST = Rule(_earliest_samples, _earliest_of_two, dict, _samples_to_json, _samples_from_json)  # K earliest per key


@dataclass(frozen=True, slots=True)
class Stat:
    """A statistic's rule, and whether to_json writes it even when empty."""

    rule: Rule
    always: bool = False


_STAT = "driftline.stat"


def stat(rule: Rule, *, always: bool = False) -> Any:
    """Declare a statistic: a dataclass field whose default is the rule's empty value."""
    meta = {_STAT: Stat(rule, always)}
    empty = rule.empty()
    if type(empty).__hash__ is None:  # mutable (a dict): a new one per instance
        return field(default_factory=rule.empty, metadata=meta)
    return field(default=empty, metadata=meta)


@pickled_by_fields
@dataclass(frozen=True, slots=True)
class FieldStats:
    """What a set of rows shows for one field path: one line per statistic, with its rule.

    types      non-null values per shallow type key ('int64', 'string', 'struct', 'list', ...)
    nulls      values present but null (JSON null, Arrow/Parquet null, empty CSV cell)
    classes    content classes of string values (for CSV: of every cell's text)
    samples    SampleKey (type / class / null) → earliest examples with position
    items      list paths: number of elements; map paths: number of entries
    text       values that came from untyped text (CSV/TSV), whose types were inferred
    Absent counts are not stored: they derive from the container (rows, or the parent
    struct's count), which keeps merge a plain sum. The order of the fields is the order
    of the keys in the JSON report.
    """

    types: dict[str, int] = stat(COUNTS, always=True)
    nulls: int = stat(TOTAL, always=True)
    classes: dict[str, int] = stat(COUNTS)
    samples: Samples = stat(EARLIEST, always=True)
    minimum: Any = stat(LOWEST)
    maximum: Any = stat(HIGHEST)
    max_length: int = stat(LARGEST)
    int_digits: int = stat(LARGEST)
    frac_digits: int = stat(LARGEST)
    leap_seconds: int = stat(TOTAL)
    lowercase_rfc3339: int = stat(TOTAL)
    unsafe_ints: int = stat(TOTAL)  # integers beyond ±(2**53-1): not exact as float64 (RFC 7493 §2.2)
    items: int = stat(TOTAL)
    text: int = stat(TOTAL)

    @property
    def present(self) -> int:
        return sum(self.types.values()) + self.nulls

    @property
    def nonnull(self) -> int:
        return sum(self.types.values())

    def first(self, key: SampleKey) -> Example | None:
        exs = self.samples.get(key)
        return exs[0] if exs else None

    def merge(self, other: FieldStats) -> FieldStats:
        return _TABLE.merge_two(self, other)

    def to_json(self) -> dict[str, Any]:
        return _TABLE.to_json(self)

    @staticmethod
    def from_json(d: Mapping[str, Any]) -> FieldStats:
        return _TABLE.from_json(d)


class Measured(TypedDict, total=False):
    """FieldStats' statistics besides types, nulls and samples, as keyword arguments: what an
    observer measures apart and passes on as ``FieldStats(types=…, nulls=…, samples=…, **m)``,
    so mypy checks each name and type. A test holds it equal to FieldStats' fields."""

    classes: dict[str, int]
    minimum: Any
    maximum: Any
    max_length: int
    int_digits: int
    frac_digits: int
    leap_seconds: int
    lowercase_rfc3339: int
    unsafe_ints: int
    items: int
    text: int


_S = TypeVar("_S")


class StatsTable(Generic[_S]):
    """The statistics of a dataclass declared with stat(): merge, to_json and from_json,
    each the same loop over the declared rules."""

    def __init__(self, cls: type[_S]) -> None:
        declared: list[tuple[str, Stat]] = []
        for f in fields(cls):  # type: ignore[arg-type]
            spec = f.metadata.get(_STAT)
            if not isinstance(spec, Stat):
                raise TypeError(f"{cls.__name__}.{f.name} has no merge rule: declare it with stat(RULE)")
            declared.append((f.name, spec))
        self.cls = cls
        self.declared = tuple(declared)
        self._get = _getter([name for name, _ in declared])
        self._merges = tuple(spec.rule.merge for _, spec in declared)
        self._pairs = tuple(spec.rule.pair for _, spec in declared)
        # Per field, in field order (the order of JSON keys): its name, whether always written,
        # the empty value it is left out as, and its to_json.
        self._names = tuple(name for name, _ in declared)
        self._always = tuple(spec.always for _, spec in declared)
        self._empties = tuple(spec.rule.empty() for _, spec in declared)
        self._to_json = tuple(spec.rule.to_json for _, spec in declared)
        self._read = tuple((name, spec.rule.from_json, spec.rule.empty) for name, spec in declared)

    def merge(self, stats: Sequence[_S]) -> _S:
        """What merging stats one after another gives: each rule over the column of its values."""
        return self.cls(*map(call, self._merges, zip(*map(self._get, stats), strict=True)))

    def merge_two(self, a: _S, b: _S) -> _S:
        """merge((a, b)), by each rule's merge of two values."""
        return self.cls(*map(call, self._pairs, self._get(a), self._get(b)))

    def to_json(self, st: _S) -> dict[str, Any]:
        return {
            name: value if to_json is None else to_json(value)
            for name, always, empty, to_json, value in zip(
                self._names, self._always, self._empties, self._to_json, self._get(st), strict=True
            )
            if always or value != empty
        }

    def from_json(self, d: Mapping[str, Any]) -> _S:
        return self.cls(
            *[
                (d[name] if from_json is None else from_json(d[name])) if name in d else empty()
                for name, from_json, empty in self._read
            ]
        )


def _getter(names: list[str]) -> Callable[[Any], tuple[Any, ...]]:
    if len(names) == 1:  # attrgetter of one name gives the value, not a tuple
        one = attrgetter(names[0])
        return lambda obj: (one(obj),)
    return attrgetter(*names)


_TABLE: StatsTable[FieldStats] = StatsTable(FieldStats)


def merge_fields(a: Mapping[str, FieldStats], b: Mapping[str, FieldStats]) -> dict[str, FieldStats]:
    """Merge two path → FieldStats maps (paths present in one side are kept as they are)."""
    out = dict(a)
    for path, st in b.items():
        out[path] = out[path].merge(st) if path in out else st
    return dict(sorted(out.items()))


@staged("merge")
def merge_all(maps: Iterable[Mapping[str, FieldStats]]) -> dict[str, FieldStats]:
    """Merge path → FieldStats maps in order: the same as folding merge_fields over them,
    in one pass per path instead of a new dictionary per map.

    >>> a, b = {"x": FieldStats(types={"int64": 2})}, {"x": FieldStats(nulls=1), "y": FieldStats(types={"bool": 1})}
    >>> merge_all([a, b]) == merge_fields(merge_fields({}, a), b)
    True
    """
    groups: dict[str, list[FieldStats]] = {}
    for m in maps:
        for path, st in m.items():
            got = groups.get(path)
            if got is None:
                groups[path] = [st]
            else:
                got.append(st)
    merge = _TABLE.merge
    return {path: got[0] if len(got) == 1 else merge(got) for path, got in sorted(groups.items())}
