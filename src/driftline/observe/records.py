"""Exact per-record observation, for batches that cannot be typed columnar (JSON values).

Records are shredded into per path columns in one walk; strings are then classified
in bulk, so the per-value Python work is only the walk itself.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Sequence
from typing import Any, Protocol

import orjson
import pyarrow as pa

from driftline.core import paths
from driftline.core.observation import Observation
from driftline.core.stagetime import staged
from driftline.core.stats import (
    NULL_SAMPLE,
    SAMPLES_PER_KEY,
    Example,
    FieldStats,
    Measured,
    SampleKey,
    Samples,
    class_sample,
    type_sample,
)
from driftline.observe.shapes import tally_records
from driftline.observe.textclass import class_masks, classify

MAX_DEPTH = 2_000  # orjson stops at 1,024 levels; this guards values built elsewhere
SAFE_INT = 2**53 - 1  # RFC 7493 §2.2 / IEEE 754 binary64: larger magnitudes are not exact
INT64_MAX = 2**63 - 1
INT64_MIN = -(2**63)
EXAMPLE_CHARS = 80


class DepthExceeded(ValueError):
    pass


# The walk recurses once per nesting level; orjson already refuses documents deeper than
# 1,024 levels, so this limit only needs to sit above that.
sys.setrecursionlimit(max(sys.getrecursionlimit(), 3 * MAX_DEPTH))


def value_text(v: Any) -> str:
    """Short JSON text of a value for examples."""
    try:
        text = orjson.dumps(v).decode()
    except (TypeError, orjson.JSONEncodeError):
        text = repr(v)
    return text if len(text) <= EXAMPLE_CHARS else text[: EXAMPLE_CHARS - 1] + "…"


class _Acc:
    __slots__ = ("types", "nulls", "samples", "strings", "string_rows", "lo", "hi", "unsafe", "items")

    def __init__(self) -> None:
        self.types: dict[str, int] = {}
        self.nulls = 0
        self.samples: dict[SampleKey, list[tuple[int, Any]]] = {}
        self.strings: list[str] = []
        self.string_rows: list[int] = []
        self.lo: Any = None
        self.hi: Any = None
        self.unsafe = 0
        self.items = 0

    def sample(self, key: SampleKey, row: int, value: Any) -> None:
        got = self.samples.get(key)
        if got is None:
            self.samples[key] = [(row, value)]
        elif len(got) < SAMPLES_PER_KEY:
            got.append((row, value))

    def count(self, key: str, row: int, value: Any) -> None:
        n = self.types.get(key)
        self.types[key] = 1 if n is None else n + 1
        if n is None or n < SAMPLES_PER_KEY:
            self.sample(type_sample(key), row, value)

    def number(self, v: int | float) -> None:
        if v != v:  # NaN orders nowhere
            return
        if self.lo is None or v < self.lo:
            self.lo = v
        if self.hi is None or v > self.hi:
            self.hi = v


def int_key(v: int) -> str:
    """int64, uint64, or beyond both a decimal of the literal's digits: an integer literal of any
    length is an integer (RFC 8259 section 6 sets no limit), never a float64 that rounds it.

    >>> int_key(2**63 - 1), int_key(2**63), int_key(-(2**63) - 1), int_key(10**29)
    ('int64', 'uint64', 'decimal(19,0)', 'decimal(30,0)')
    """
    if INT64_MIN <= v <= INT64_MAX:
        return "int64"
    return "uint64" if 0 <= v < 2**64 else f"decimal({len(str(abs(v)))},0)"


def is_int_key(key: str) -> bool:
    """Whether a type key is one int_key gives (what an integer literal is observed as).

    >>> is_int_key("int64"), is_int_key("decimal(30,0)"), is_int_key("decimal(5,2)")
    (True, True, False)
    """
    return key in ("int64", "uint64") or key.startswith("decimal(") and key.endswith(",0)")


# Child paths repeat in every record; quoting a name is a regular-expression match, so the
# walk remembers short ones, up to a bound (a file may hold any number of keys, of any length).
_CHILD: dict[tuple[str | None, str], str] = {}
_CHILD_MAX, _CHILD_CHARS = 8192, 200


def _child(parent: str | None, name: str) -> str:
    key = (parent, name)
    got = _CHILD.get(key)
    if got is None:
        got = paths.child(parent, name)
        if len(got) <= _CHILD_CHARS and len(_CHILD) < _CHILD_MAX:
            _CHILD[key] = got
    return got


class _Other:
    """Values of paths past the cap: how many, and of how many distinct paths (one batch)."""

    __slots__ = ("limit", "values", "paths")

    def __init__(self, limit: int) -> None:
        self.limit = limit
        self.values = 0
        self.paths: set[str] = set()

    def full(self, accs: dict[str, _Acc], path: str) -> bool:
        if len(accs) < self.limit:
            return False
        self.values += 1
        self.paths.add(path)
        return True


_NO_CAP = 2**62


def _walk(v: Any, path: str, row: int, accs: dict[str, _Acc], depth: int, other: _Other) -> None:
    acc = accs.get(path)
    if acc is None:
        if other.full(accs, path):
            return  # a path past the cap: counted, its value (and what it holds) not walked
        acc = accs[path] = _Acc()
    if v is None:
        acc.nulls += 1
        if acc.nulls <= SAMPLES_PER_KEY:
            acc.sample(NULL_SAMPLE, row, None)
        return
    t = type(v)
    if t is str:
        acc.types["string"] = acc.types.get("string", 0) + 1
        acc.strings.append(v)
        acc.string_rows.append(row)
    elif t is bool:
        acc.count("bool", row, v)
    elif t is int:
        acc.count(int_key(v), row, v)
        acc.number(v)
        if v > SAFE_INT or v < -SAFE_INT:
            acc.unsafe += 1
    elif t is float:
        acc.count("float64", row, v)
        acc.number(v)
    elif t is dict:
        if depth >= MAX_DEPTH:
            raise DepthExceeded(f"nesting deeper than {MAX_DEPTH} levels")
        acc.count("struct", row, v)
        for name, sub in v.items():
            _walk(sub, _child(path, name), row, accs, depth + 1, other)
    elif t is list:
        if depth >= MAX_DEPTH:
            raise DepthExceeded(f"nesting deeper than {MAX_DEPTH} levels")
        acc.count("list", row, v)
        acc.items += len(v)
        item_path = paths.element(path)
        if not v and item_path not in accs and len(accs) < other.limit:
            accs[item_path] = _Acc()  # the element path exists even when nothing tells its type
        for sub in v:
            _walk(sub, item_path, row, accs, depth + 1, other)
    else:  # pragma: no cover - orjson yields only JSON types
        acc.count("string", row, str(v))


@staged("walk")
def observe_records(
    records: Sequence[Any],
    *,
    file: str,
    batch: int,
    row_start: int,
    lines: Sequence[int] | None = None,
    rows: Sequence[int] | None = None,
    samples_only: bool = False,
    max_paths: int | None = None,
    shapes: bool = False,
) -> Observation:
    """Observe parsed JSON values, one per row. Objects give their fields; anything else is '$'.

    lines holds each record's line; rows, when given, each record's row within the batch
    (for a walk over some of a batch's records), else records are rows 0, 1, 2, ...
    samples_only: the caller has the string statistics already (the JSON fast path walks a
    few rows for their examples), so strings are classified only as far as the examples
    of each class need: their class counts are kept, the digit, leap-second and lowercase
    counts left at 0.
    max_paths: the batch keeps at most this many paths, in the order they first show; the
    values of the others are counted in Observation.other_values (other_paths of them).
    shapes: the records are a whole batch: tally their shapes (observe/shapes.py).

    >>> obs = observe_records([{"a": 1}, {"a": "x"}, {}], file="f.jsonl", batch=0, row_start=0)
    >>> obs.fields["a"].types, obs.rows
    ({'int64': 1, 'string': 1}, 3)
    """
    accs, other = walk_records(records, max_paths)
    where = _Where(file, row_start, lines, rows)
    fields = {p: _finish(acc, where, samples_only) for p, acc in sorted(accs.items())}
    return Observation(
        file=file,
        batch=batch,
        row_start=row_start,
        rows=len(records),
        fields=fields,
        other_paths=len(other.paths),
        other_values=other.values,
        shapes=tally_records(records, fields) if shapes else None,
    )


def walk_records(records: Sequence[Any], max_paths: int | None = None) -> tuple[dict[str, _Acc], _Other]:
    """The walk of observe_records: each path's accumulated values (its strings not yet classified),
    and the values of the paths past max_paths."""
    accs: dict[str, _Acc] = {}
    other = _Other(_NO_CAP if max_paths is None else max_paths)
    for i, rec in enumerate(records):
        if type(rec) is dict:
            for name, sub in rec.items():
                _walk(sub, _child(None, name), i, accs, 1, other)
        else:
            _walk(rec, paths.ROOT, i, accs, 0, other)
    return accs, other


class _Where:
    __slots__ = ("file", "row_start", "lines", "rows")

    def __init__(self, file: str, row_start: int, lines: Sequence[int] | None, rows: Sequence[int] | None) -> None:
        self.file, self.row_start, self.lines, self.rows = file, row_start, lines, rows

    def example(self, i: int, value: Any) -> Example:
        row = self.row_start + (self.rows[i] if self.rows is not None else i)
        return Example(self.file, row, self.lines[i] if self.lines is not None else None, value_text(value))


class StringFacts(Protocol):
    """What classify and class_masks tell _finish about a path's strings: per class (those that
    occur, in CLASSES order) its count and its first positions (up to SAMPLES_PER_KEY), and the
    digit, leap-second and lowercase counts (observe/fast/recordgroups.py gives them for a
    group of batches at once)."""

    counts: dict[str, int]
    first: dict[str, list[int]]
    int_digits: int
    frac_digits: int
    leap_seconds: int
    lowercase_rfc3339: int


def finish_fields(
    accs: dict[str, _Acc], where: _Where, strings: Callable[[list[str]], StringFacts]
) -> dict[str, FieldStats]:
    """Each path's statistics, as observe_records finishes them, with the strings' facts from `strings`."""
    return {p: _finish(acc, where, strings=strings) for p, acc in sorted(accs.items())}


def _finish(
    acc: _Acc, where: _Where, samples_only: bool = False, strings: Callable[[list[str]], StringFacts] | None = None
) -> FieldStats:
    samples: Samples = {k: tuple(where.example(i, v) for i, v in got) for k, got in acc.samples.items()}
    measured: Measured = {
        "classes": {},
        "minimum": acc.lo,
        "maximum": acc.hi,
        "unsafe_ints": acc.unsafe,
        "items": acc.items,
    }
    if acc.strings and strings is not None and not samples_only:
        facts = strings(acc.strings)
        rows = acc.string_rows
        samples[type_sample("string")] = tuple(
            where.example(rows[j], acc.strings[j]) for j in range(min(SAMPLES_PER_KEY, len(rows)))
        )
        for cls, picks in facts.first.items():  # the first of a class, or its first 3 when it has more
            samples[class_sample(cls)] = tuple(where.example(rows[j], acc.strings[j]) for j in picks)
        measured.update(
            {
                "classes": dict(facts.counts),
                "max_length": max(map(len, acc.strings)),
                "int_digits": facts.int_digits,
                "frac_digits": facts.frac_digits,
                "leap_seconds": facts.leap_seconds,
                "lowercase_rfc3339": facts.lowercase_rfc3339,
            }
        )
    elif acc.strings and samples_only:
        # The same masks classify() counts (one pass of class_masks), without its other statistics.
        rows = acc.string_rows
        samples[type_sample("string")] = tuple(
            where.example(rows[j], acc.strings[j]) for j in range(min(SAMPLES_PER_KEY, len(rows)))
        )
        classes: dict[str, int] = {}
        for cls, mask in class_masks(pa.array(acc.strings, pa.string())).items():
            if mask.true_count:
                classes[cls] = mask.true_count
                picks = pa_indices(mask, SAMPLES_PER_KEY)
                samples[class_sample(cls)] = tuple(where.example(rows[j], acc.strings[j]) for j in picks)
        measured["classes"] = classes
    elif acc.strings:
        arr = pa.array(acc.strings, pa.string())
        scan = classify(arr)
        rows = acc.string_rows
        samples[type_sample("string")] = tuple(
            where.example(rows[j], acc.strings[j]) for j in range(min(SAMPLES_PER_KEY, len(rows)))
        )
        masks = class_masks(arr) if any(n > 1 for n in scan.counts.values()) else {}
        for cls, first in scan.first_index.items():
            picks = [first]
            if scan.counts[cls] > 1 and cls in masks:
                picks = pa_indices(masks[cls], SAMPLES_PER_KEY)
            samples[class_sample(cls)] = tuple(where.example(rows[j], acc.strings[j]) for j in picks)
        measured.update(
            {
                "classes": dict(scan.counts),
                "max_length": max(len(s) for s in acc.strings),
                "int_digits": scan.int_digits,
                "frac_digits": scan.frac_digits,
                "leap_seconds": scan.leap_seconds,
                "lowercase_rfc3339": scan.lowercase_rfc3339,
            }
        )
    return FieldStats(
        types=dict(sorted(acc.types.items())), nulls=acc.nulls, samples=dict(sorted(samples.items())), **measured
    )


def pa_indices(mask: pa.Array, k: int) -> list[int]:
    """The first k positions where a boolean mask is true."""
    import pyarrow.compute as pc

    idx = pc.indices_nonzero(mask)
    return idx.slice(0, k).to_pylist()
