"""Columnar observation of a batch of JSON Lines, exact or not at all.

Arrow parses and types the batch in C++; this module then proves, column by column,
that what Arrow built says the same as the exact per-record walk (observe.records)
would, and returns None when it cannot (the caller then takes the exact walk).

Arrow's JSON reader blurs four things the profile keeps apart, and each is settled here
(with observe.linetext, which reads what it can off the lines' text):

* absent vs null: Arrow writes both as null.  A null cell is certainly absent when its
  line holds neither the key's text ``"name"`` nor a backslash (an escaped key); the
  other null cells go to the exact walk, which counts the JSON nulls.
* integer vs float literals: a column mixing ``1`` and ``2.5`` (or holding integers
  beyond int64) comes back as double.  Non-integral doubles were float literals; every
  row with an integral double goes to the exact walk, which tells ``1`` from ``1.0``.
* timestamps: Arrow types RFC 3339-looking strings as timestamp; observe.jsonparse
  declares those fields strings (learnt from the first lines, or the last batch).
* what Arrow accepts and orjson refuses (NaN and Infinity, several values on one line,
  invalid UTF-8, very deep nesting): checked before or after the parse, and the batch
  goes to the exact walk.

Examples (the first three per type, class and null, with their rows) are taken from the
exact walk over a small set of rows that holds the first three occurrences of every one
of them, so they are the same examples the exact walk over the whole batch would keep.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.core import paths
from driftline.core.jsonnum import loads as json_loads
from driftline.core.observation import Observation
from driftline.core.shapetally import ShapeTally
from driftline.core.stagetime import staged
from driftline.core.stats import SAMPLES_PER_KEY, FieldStats, Measured
from driftline.observe import linetext
from driftline.observe.fast.strprofile import string_profiles
from driftline.observe.jsonparse import conflict_field, parse_lines
from driftline.observe.records import SAFE_INT, is_int_key, observe_records
from driftline.observe.shapes import Piece, has_candidates, table_tally, tally_records
from driftline.observe.textclass import CLASSES


class NotExact(Exception):
    """The batch holds something the columnar path cannot answer exactly."""


@dataclass
class _Partial:
    """What the columnar pass knows about one path; the exact walk over R fills the rest."""

    types: dict[str, int]
    nulls: int | None  # None: count them in the exact walk (absent and null look alike)
    extra: Measured = field(default_factory=Measured)
    numbers_from_walk: bool = False  # integral doubles: the walk tells int from float literals
    nonnull: int = 0
    always: bool = False  # kept even with no value (the element path of empty lists)
    # Rows settled from the line's text (see _settle): JSON nulls; integer and float
    # literals among integral doubles, with their values.  Counted where the walk did not go.
    text_nulls: pa.Array | None = None
    text_ints: tuple[pa.Array, pa.Array] | None = None
    text_floats: tuple[pa.Array, pa.Array] | None = None


class _Batch:
    def __init__(self, lines: pa.BinaryArray, n: int, schema: pa.Schema | None = None) -> None:
        self.lines = lines
        self.unique_names = linetext.unique_names(schema) if schema is not None else set()
        self.n = n
        self.rows_needed: list[pa.Array] = []  # batch rows the exact walk must see
        self.strings: list[tuple[pa.Array, pa.Array | None, _Partial]] = []  # classified together, at the end
        self.partials: dict[str, _Partial] = {}

    def need(self, rows: pa.Array | None, positions: pa.Array) -> None:
        if len(positions):
            self.rows_needed.append(positions if rows is None else rows.take(positions))

    def need_first(self, rows: pa.Array | None, mask: pa.Array | None, length: int) -> None:
        """The rows of the first SAMPLES_PER_KEY true positions of a mask over length places (None: all true)."""
        if mask is None:
            self.need(rows, pa.array(range(min(SAMPLES_PER_KEY, length)), pa.int64()))
            return
        head = mask.slice(0, _HEAD)  # the first few are usually near the start: no pass over the whole mask
        if head.true_count < SAMPLES_PER_KEY:
            head = mask
        self.need(rows, pc.indices_nonzero(head).slice(0, SAMPLES_PER_KEY))


_HEAD = 256


@staged("columnar")
def observe_json_lines(
    lines: Sequence[bytes],
    *,
    file: str,
    batch: int,
    row_start: int,
    first_line: int,
    hint: Hint | None = None,
    max_paths: int | None = None,
) -> tuple[Observation, Hint] | None:
    """Observe lines (without newlines), one JSON object each, as the exact walk would.

    Returns the observation and a Hint for the next batch, or None when the batch must
    take the exact walk.  Rows Arrow cannot type with the rest (a list that is sometimes
    a scalar, a number that became a string) are set aside: a few are walked exactly,
    many are typed by Arrow on their own; the parts merge.  A batch whose records hold many
    different keys (Arrow's work grows with rows times columns), or more paths than
    max_paths, takes the exact walk, which keeps the paths within the cap.

    >>> obs, _ = observe_json_lines([b'{"a": 1, "b": null}', b'{"a": 2.5}'], file="f.jsonl", batch=0,
    ...                             row_start=0, first_line=1)
    >>> obs.fields["a"].types, obs.fields["b"].nulls
    ({'float64': 1, 'int64': 1}, 1)
    """
    n = len(lines)
    if n == 0 or keys_vary(lines):
        return None
    data, arr = _buffers(lines)
    if arr is None:
        return None  # Arrow's binary offsets are 32-bit
    walk_only = linetext.odd_rows(lines, arr, data)
    if walk_only is None:
        return None
    aside: dict[tuple[str, str], set[int]] = {}  # rows set aside, by the pattern that found them
    for pattern in hint.patterns if hint is not None else ():
        rows = linetext.matching(data, pattern, n // 4)  # the odd rows of the last batch are likely odd here too
        if rows is not None:  # ... while they stay few
            aside[pattern] = rows - walk_only
    text = _Text(lines, arr, data, (file, batch, row_start, first_line))
    got = _observe_part(text, None, walk_only, aside, hint.schema if hint is not None else None)
    if got is None:
        return None
    fields = _merge_groups(got[0])
    if fields is None or max_paths is not None and len(fields) > max_paths:
        return None
    shapes = _shapes(lines, fields, got[2])
    if shapes is None:
        return None
    obs = Observation(file=file, batch=batch, row_start=row_start, rows=n, fields=fields, shapes=shapes)
    return obs, Hint(got[1], tuple(aside))


@staged("read")
def _buffers(lines: Sequence[bytes]) -> tuple[bytes, pa.BinaryArray | None]:
    """The batch's lines joined (each ending in a newline) and as an Arrow array (None past 2 GiB)."""
    # One join with an empty last piece, not join + b"\n": a second copy of the batch costs
    # a fresh allocation (page faults) each time.
    data = b"\n".join([*lines, b""])
    if len(data) >= 2**31:
        return data, None
    return data, pa.array(lines, pa.binary())


@staged("walk")
def _loads(lines: Sequence[bytes], rows: Sequence[int]) -> list[Any]:
    """The records of some lines, parsed one by one for the exact walk (orjson's errors pass)."""
    return [json_loads(lines[r]) for r in rows]


@staged("exactness")
def _shapes(lines: Sequence[bytes], fields: dict[str, FieldStats], pieces: list[Piece]) -> ShapeTally | None:
    """The batch's shape tally, as the exact walk makes it (None: a line orjson refuses, left to
    the walk): from Arrow's tables and the lines no table holds, parsed again; when the
    tables cannot tell, from every line parsed again. Only when some field could be a
    discriminator."""
    if not has_candidates(fields, len(lines)):
        return {}
    covered: set[int] = set()
    for table, at in pieces:
        covered.update(range(table.num_rows) if at is None else at)
    try:
        rest = {r: json_loads(lines[r]) for r in range(len(lines)) if r not in covered}
        got = table_tally(fields, len(lines), pieces, rest)
        if got is not None:
            return got
        records = [json_loads(line) for line in lines]
    except orjson.JSONDecodeError:
        return None
    return tally_records(records, fields)


_CENSUS_LINES = 64
_SPARSE_CELLS = 50_000_000  # rows × columns past which Arrow's parse of mostly-empty columns costs seconds
_SPARSE_COLUMNS = 256


@staged("exactness")
def keys_vary(lines: Sequence[bytes]) -> bool:
    """Whether the records seem to hold many more distinct paths than one record holds (records
    keyed by ids, say), so many that Arrow's parse, which builds every column over every row,
    would cost far more than the walk: 20,000 keys over 20,000 lines took Arrow 30 s and 5 GB.

    A sample of lines spread over the batch is read: when nearly every line of its second
    half still brings a path not seen before, keys do not repeat, and the batch's distinct
    paths are projected from that rate.  A bounded set of optional keys stops bringing new
    ones early and keeps the columnar path.

    >>> keys_vary([b'{"id": %d, "k%d": 1}' % (i, i) for i in range(100_000)])
    True
    >>> keys_vary([b'{"id": %d, "v": [1, {"w": 2}]}' % i for i in range(100_000)])
    False
    """
    n = len(lines)
    step = max(1, n // _CENSUS_LINES)
    seen: set[str] = set()
    total = count = late_new = 0
    for i in range(0, n, step):
        try:
            value = orjson.loads(lines[i])
        except orjson.JSONDecodeError:
            continue
        got: list[str] = []
        _paths_of(value, "", got, 0)
        before = len(seen)
        seen.update(got)
        total += len(got)
        count += 1
        if count > _CENSUS_LINES // 2:
            late_new += len(seen) - before
    if count <= _CENSUS_LINES // 2:
        return False
    rate = late_new / (count - _CENSUS_LINES // 2)
    projected = len(seen) + rate * (n - count)
    sparse = rate >= 0.9 and projected > 2 * total / count
    # Each column also costs the columnar pass about a millisecond, whatever its values.
    return sparse and (projected * n > _SPARSE_CELLS or projected > _SPARSE_COLUMNS)


def _paths_of(v: Any, path: str, out: list[str], depth: int) -> None:
    if depth > 64:  # deep nesting: a census needs no more
        return
    if type(v) is dict:
        for k, sub in v.items():
            child = path + "." + k
            out.append(child)
            _paths_of(sub, child, out, depth + 1)
    elif type(v) is list:
        for sub in v:
            _paths_of(sub, path + "[]", out, depth + 1)


_MAX_SET_ASIDE_ROUNDS = 4
ARROW_ASIDE_MIN = 512  # set-aside rows from this many on are typed by Arrow, not walked (about 50 µs a row)

Where = tuple[str, int, int, int]  # file, batch, row_start, first_line


@dataclass(frozen=True, slots=True)
class Hint:
    """What one batch teaches the next: Arrow's schema, and the patterns of rows set aside."""

    schema: pa.Schema | None
    patterns: tuple[tuple[str, str], ...] = ()  # (the key's text, the kind its odd rows hold)


@dataclass(frozen=True, slots=True)
class _Text:
    """One batch's lines: as bytes, as an Arrow array, and joined (each ending in a newline)."""

    lines: Sequence[bytes]
    arr: pa.BinaryArray
    data: bytes
    where: Where


def _observe_part(
    text: _Text,
    rows: list[int] | None,
    walk_only: set[int],
    aside: dict[tuple[str, str], set[int]],
    schema: pa.Schema | None,
    depth: int = 0,
) -> tuple[list[dict[str, FieldStats]], pa.Schema | None, list[Piece]] | None:
    """Observe some rows of a batch (all when rows is None): (groups of disjoint rows, Arrow's
    schema, and Arrow's tables with the rows each holds: None for all of them).

    Arrow parses the rows neither walk_only nor aside; when it names a field of two kinds,
    the rows of the rarer kind are set aside under the pattern that finds them, and the
    rest is parsed again.  The rows of the large groups set aside (fields that changed kind
    within the batch) are observed the same way on their own, to _MAX_DEPTH; the other
    rows set aside are walked exactly with walk_only.
    """
    table, keep = None, None
    sub_rows = None if rows is None else pa.array(rows, pa.int64())
    changed: set[str] = set()  # top-level fields Arrow found of two kinds here
    for _ in range(_MAX_SET_ASIDE_ROUNDS):
        out = walk_only.union(*aside.values())
        keep, data = _kept(text, rows, out)
        if keep is not None and not keep:
            break
        table, why = parse_lines(data, schema)
        if table is not None:
            if table.num_rows != (len(keep) if keep is not None else len(text.lines)):
                return None  # several values on one line
            break
        found = linetext.conflict_rows(text.arr, why, sub_rows) if why else None
        if found is None:
            return None
        odd = found[0] - walk_only
        if odd <= out:
            return None
        aside[found[1]] = aside.get(found[1], set()) | odd
        top = conflict_field(why)
        if top is not None:
            changed.add(top)
    if table is None and keep:
        return None
    groups: list[dict[str, FieldStats]] = []
    pieces: list[Piece] = []
    if table is not None:
        got = _observe_table(table, text, None if keep is None else pa.array(keep, pa.int64()))
        if got is None:
            return None
        groups.append(got)
        pieces.append((table, keep))
    walked = walk_only.union(*aside.values())
    large = set().union(*(g for g in aside.values() if len(g) >= ARROW_ASIDE_MIN))
    own = large.difference(*(g for g in aside.values() if len(g) < ARROW_ASIDE_MIN))
    if own and depth < _MAX_DEPTH and (rows is None or len(own) < len(rows)):
        # Fields that changed kind within the batch: the rows of their other kinds type together.
        # Their hint is this part's schema without the fields of two kinds: those the rows hold otherwise.
        hint = _without_fields(table.schema if table is not None else schema, changed)
        sub = _observe_part(text, sorted(own), set(), {}, hint, depth + 1)
        if sub is not None:
            groups += sub[0]
            pieces += sub[2]
            walked -= own
    if walked:
        at = sorted(walked)
        try:
            records = _loads(text.lines, at)
        except orjson.JSONDecodeError:
            return None
        groups.append(_walk(records, at, text.where))
    return groups, table.schema if table is not None else schema, pieces


def _without_fields(schema: pa.Schema | None, names: set[str]) -> pa.Schema | None:
    if schema is None:
        return None
    return pa.schema([f for f in schema if f.name not in names])


_MAX_DEPTH = 2  # rows set aside, and rows set aside among those, are typed by Arrow; deeper ones walked


@staged("exactness")
def _kept(text: _Text, rows: list[int] | None, out: set[int]) -> tuple[list[int] | None, bytes]:
    """The rows (of rows, or of the batch) not in out, and their lines joined; None: the whole batch."""
    if rows is None and not out:
        return None, text.data
    if rows is not None:
        kept = [r for r in rows if r not in out]
        return kept, b"\n".join([*(text.lines[r] for r in kept), b""]) if kept else b""
    # The kept lines are runs of the joined batch between the rows left out: slices, no re-join per line.
    gone = sorted(out)
    n = len(text.lines)
    arr = text.arr
    offsets = pa.Array.from_buffers(pa.int32(), len(arr) + 1, [None, arr.buffers()[1]], offset=arr.offset)
    starts = offsets.take(pa.array([i for r in gone for i in (r, r + 1)], pa.int64())).to_pylist()
    keep: list[int] = []
    pieces: list[memoryview] = []
    data = memoryview(text.data)
    prev, at = 0, 0  # first kept row of the run, and its byte offset in text.data
    for k, r in enumerate(gone):
        keep.extend(range(prev, r))
        pieces.append(data[at : starts[2 * k] + r])  # line i starts at offsets[i] + i (one newline each)
        prev, at = r + 1, starts[2 * k + 1] + r + 1
    keep.extend(range(prev, n))
    pieces.append(data[at:])
    return keep, b"".join(pieces)


def _walk(records: list[Any], rows: list[int], where: Where, samples_only: bool = False) -> dict[str, FieldStats]:
    file, batch, row_start, first_line = where
    lines_of = [first_line + r for r in rows]
    return observe_records(
        records, file=file, batch=batch, row_start=row_start, lines=lines_of, rows=rows, samples_only=samples_only
    ).fields


@staged("columnar")
def _observe_table(table: pa.Table, text: _Text, keep: pa.Array | None) -> dict[str, FieldStats] | None:
    """One parsed table (rows keep of the batch, or all): columnar counts, the walk for the rest."""
    b = _Batch(text.arr, len(text.arr), table.schema)
    try:
        for name, col in zip(table.column_names, table.columns, strict=True):
            # One chunk is the common case; concatenating a struct with null-typed children
            # fails in pyarrow 26.0.1 ("array slice would exceed array length").
            whole = col.chunk(0) if col.num_chunks == 1 else col.combine_chunks()
            _visit(whole, paths.child(None, name), keep, name, b, False)
        _strings(b)
    except (NotExact, pa.ArrowException):
        return None
    rows = _needed_rows(b)
    try:
        records = _loads(text.lines, rows)
    except orjson.JSONDecodeError:
        return None  # Arrow took a line orjson refuses
    # The columns gave the string statistics: the walk over these rows is for examples, counts
    # of nulls and of integer literals, and extremes.
    return _combine(b.partials, _walk(records, rows, text.where, samples_only=True), pa.array(rows, pa.int64()))


@staged("merge")
def _merge_groups(groups: list[dict[str, FieldStats]]) -> dict[str, FieldStats] | None:
    """Merge the parts of one batch (disjoint rows); examples keep their order within a row."""
    if len(groups) == 1:
        return groups[0]
    out: dict[str, FieldStats] = {}
    for g in groups:
        for path, st in g.items():
            if path not in out:
                out[path] = st
                continue
            mine = out[path]
            if _tie_of_kinds(mine.minimum, st.minimum) or _tie_of_kinds(mine.maximum, st.maximum):
                return None  # 1 and 1.0 at once: which came first is not known here
            merged = mine.merge(st)
            # sorted() is stable and Examples order by (file, row): within a row, walk order stays.
            samples = {
                k: tuple(sorted(mine.samples.get(k, ()) + st.samples.get(k, ())))[:SAMPLES_PER_KEY]
                for k in merged.samples
            }
            classes = {c: merged.classes[c] for c in CLASSES if c in merged.classes}
            out[path] = replace(merged, samples=samples, classes=classes)
    return dict(sorted(out.items()))


def _tie_of_kinds(a: Any, b: Any) -> bool:
    return a is not None and b is not None and type(a) is not type(b) and a == b


def _needed_rows(b: _Batch) -> list[int]:
    if not b.rows_needed:
        return []
    allrows = pa.chunked_array([r.cast(pa.int64()) for r in b.rows_needed], pa.int64())
    return pc.unique(allrows).sort().to_pylist()


def _visit(arr: pa.Array, path: str, rows: pa.Array | None, name: str | None, b: _Batch, listed: bool) -> None:
    """One path; arr holds exactly the places its container had a value (rows maps them to rows).

    name is the field's key (None for list elements); listed, whether a list is above it.
    """
    t = arr.type
    length = len(arr)
    nulls_arrow = length if pa.types.is_null(t) else arr.null_count
    part = _Partial(types={}, nulls=nulls_arrow, nonnull=length - nulls_arrow)
    if nulls_arrow:
        every = pa.types.is_null(t)
        null_at = pa.array(range(length), pa.int64()) if every else pc.indices_nonzero(pc.is_null(arr))
        if name is None:
            b.need(rows, null_at.slice(0, SAMPLES_PER_KEY))  # list elements cannot be absent
        else:
            cand_rows = null_at if rows is None else rows.take(null_at)
            keep = pc.invert(linetext.absent_for_sure(b.lines, cand_rows, name))
            if keep.true_count:
                cand_rows = cand_rows.filter(keep)
                settled = linetext.settle(b.lines, b.unique_names, cand_rows, name, listed, r"null")
                if settled is None:
                    b.rows_needed.append(cand_rows)
                else:
                    nulls_at, unsettled = settled
                    b.rows_needed += [unsettled, nulls_at.slice(0, SAMPLES_PER_KEY)]
                    part.text_nulls = nulls_at
                part.nulls = None
            else:
                part.nulls = 0
    b.partials[path] = part
    if pa.types.is_null(t) or part.nonnull == 0:
        return
    valid = pc.is_valid(arr) if nulls_arrow else None
    b.need_first(rows, valid, length)
    if pa.types.is_boolean(t):
        part.types = {"bool": part.nonnull}
    elif pa.types.is_int64(t):
        part.types = {"int64": part.nonnull}
        mm = pc.min_max(arr)
        lo, hi = mm["min"].as_py(), mm["max"].as_py()
        unsafe = 0
        if lo < -SAFE_INT or hi > SAFE_INT:  # only then count the integers a double cannot hold exactly
            unsafe = pc.or_(pc.greater(arr, SAFE_INT), pc.less(arr, -SAFE_INT)).true_count
        part.extra = {"minimum": lo, "maximum": hi, "unsafe_ints": unsafe}
    elif pa.types.is_float64(t):
        _doubles(arr, rows, part, b, name, listed)
    elif pa.types.is_string(t):
        part.types = {"string": part.nonnull}
        b.strings.append((arr, rows, part))
    elif pa.types.is_struct(t):
        part.types = {"struct": part.nonnull}
        sub_rows = rows
        if nulls_arrow:
            sub_rows = (pa.array(range(length), pa.int64()) if rows is None else rows).filter(valid)
        for i in range(t.num_fields):
            child = arr.field(i)
            _visit(
                child.filter(valid) if nulls_arrow else child,
                paths.child(path, t.field(i).name),
                sub_rows,
                t.field(i).name,
                b,
                listed,
            )
    elif pa.types.is_list(t):
        part.types = {"list": part.nonnull}
        flat = pc.list_flatten(arr)
        part.extra = {"items": len(flat)}
        if len(flat):
            parents = pc.list_parent_indices(arr)
            _visit(flat, paths.element(path), parents if rows is None else rows.take(parents), None, b, True)
        else:  # only empty lists: the element path exists with nothing known, as in the walk
            b.partials[paths.element(path)] = _Partial(types={}, nulls=0, always=True)
    else:
        raise NotExact(f"{path}: Arrow type {t}")


def _doubles(arr: pa.Array, rows: pa.Array | None, part: _Partial, b: _Batch, name: str | None, listed: bool) -> None:
    if not pc.all(pc.is_finite(arr)).as_py():  # over the values (there is one at least)
        raise NotExact("NaN or Infinity: not JSON, orjson refuses the line")
    integral = pc.equal(pc.floor(arr), arr)
    if arr.null_count:
        integral = pc.fill_null(integral, False)
        fractional = pc.and_(pc.is_valid(arr), pc.invert(integral))
    else:
        fractional = pc.invert(integral)
    part.types = {"float64": part.nonnull}
    if integral.true_count:
        # 1 or 1.0, 2**64 or 1.8e19: the line's text tells, or else the walk.
        part.numbers_from_walk = True
        at = pc.indices_nonzero(integral)
        at_rows = at if rows is None else rows.take(at)
        values = arr.take(at)
        small = pc.less(pc.abs(values), float(2**53))  # exact as a double, and int64
        settled = None
        if name is not None:
            settled = linetext.settle(b.lines, b.unique_names, at_rows, name, listed, r"-?[0-9]+\s*[,}]", small)
        if settled is None:
            b.rows_needed.append(at_rows)
        else:
            int_rows, unsettled = settled
            is_int = pc.is_in(at_rows, value_set=int_rows)
            float_mask = pc.and_(pc.invert(is_int), pc.invert(pc.is_in(at_rows, value_set=unsettled)))
            float_rows = at_rows.filter(float_mask)
            part.text_ints = (int_rows, values.filter(is_int))
            part.text_floats = (float_rows, values.filter(float_mask))
            b.rows_needed += [unsettled, int_rows.slice(0, SAMPLES_PER_KEY), float_rows.slice(0, SAMPLES_PER_KEY)]
    b.need_first(rows, fractional, len(arr))
    if fractional.true_count:
        mm = pc.min_max(arr.filter(fractional))
        part.extra = {"minimum": mm["min"].as_py(), "maximum": mm["max"].as_py()}


def _strings(b: _Batch) -> None:
    """Class counts and string statistics of the batch's string paths, as textclass.classify gives
    them over each (string_profiles: on a few threads when they pay)."""
    profiles = string_profiles([(arr, None) for arr, _, _ in b.strings], SAMPLES_PER_KEY)
    for (_, rows, part), prof in zip(b.strings, profiles, strict=True):
        for positions in prof.first.values():
            b.need(rows, pa.array(positions, pa.int64()))
        part.extra = {
            "classes": prof.counts,
            "max_length": prof.max_length,
            "int_digits": prof.int_digits,
            "frac_digits": prof.frac_digits,
            "leap_seconds": prof.leap_seconds,
            "lowercase_rfc3339": prof.lowercase_rfc3339,
        }


@staged("merge")
def _combine(
    partials: dict[str, _Partial], walked: dict[str, FieldStats], seen: pa.Array
) -> dict[str, FieldStats] | None:
    """Columnar counts, the walk over the rows it saw (seen), and what the lines settled elsewhere."""
    out: dict[str, FieldStats] = {}
    for path, part in partials.items():
        w = walked.get(path, FieldStats())
        nulls = w.nulls if part.nulls is None else part.nulls
        if part.text_nulls is not None:
            nulls += _outside(part.text_nulls, seen).true_count
        if part.nonnull == 0 and nulls == 0 and not part.always:
            continue  # never present in this batch (absent wherever Arrow wrote null)
        types, extra = part.types, part.extra.copy()
        if part.numbers_from_walk:
            ints = {k: v for k, v in w.types.items() if is_int_key(k)}
            groups = [(extra.get("minimum"), extra.get("maximum")), (w.minimum, w.maximum)]
            if part.text_ints is not None and part.text_floats is not None:
                int_values = part.text_ints[1].filter(_outside(part.text_ints[0], seen))
                float_values = part.text_floats[1].filter(_outside(part.text_floats[0], seen))
                if len(int_values):
                    ints["int64"] = ints.get("int64", 0) + len(int_values)
                    mm = pc.min_max(int_values)
                    groups.append((int(mm["min"].as_py()), int(mm["max"].as_py())))
                if len(float_values):
                    mm = pc.min_max(float_values)
                    groups.append((mm["min"].as_py(), mm["max"].as_py()))
            floats = part.nonnull - sum(ints.values())
            types = {**ints, **({"float64": floats} if floats else {})}
            lo = _extreme([g[0] for g in groups], min)
            hi = _extreme([g[1] for g in groups], max)
            if lo is _TIE or hi is _TIE:
                return None  # 1 and 1.0 both at the extreme: which came first is not known here
            extra.update({"minimum": lo, "maximum": hi, "unsafe_ints": w.unsafe_ints})
        if part.nonnull and sum(w.types.values()) == 0 and not w.samples:
            return None  # the walk missed rows it should have seen: do not guess
        out[path] = FieldStats(types=dict(sorted(types.items())), nulls=nulls, samples=w.samples, **extra)
    return dict(sorted(out.items()))


def _outside(rows: pa.Array, seen: pa.Array) -> pa.Array:
    """Which of rows the walk did not see (the walk counted the others itself)."""
    return pc.invert(pc.is_in(rows, value_set=seen)) if len(seen) else pa.repeat(True, len(rows))


_TIE = object()


def _extreme(candidates: list[Any], pick: Any) -> Any:
    """min or max of numbers; _TIE when an int and a float share the extreme value."""
    got = [c for c in candidates if c is not None]
    if not got:
        return None
    best = pick(got)
    kinds = {type(c) for c in got if c == best}
    return _TIE if len(kinds) > 1 else next(c for c in got if c == best and type(c) is type(best))
