"""What textclass.classify says about a string column, plus the first rows of each class, cheaper.

A column with few distinct values (codes, flags, tags, quoted numbers, CSV cells) is
classified on its distinct values only and counted back per row, so the regular
expressions run over a dictionary instead of every cell.  The results equal
textclass.classify's (the differential tests hold them to it): counts in CLASSES order,
digits, leap seconds and lowercase RFC 3339 counts over the rows.
"""

from __future__ import annotations

import multiprocessing
import os
import re
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.stagetime import staged
from driftline.observe.fast.numbers import number_masks
from driftline.observe.fast.valuebytes import value_bytes
from driftline.observe.textclass import (
    CLASSES,
    TIMESTAMP_LOCAL_RE,
    TIMESTAMP_OFFSET_RE,
    TIMESTAMP_RFC3339_RE,
    class_masks,
    digit_counts,
    max_digits,
)

EXACT_ENV = "DRIFTLINE_EXACT"  # set (to anything) for the reference paths everywhere, not the fast ones


def exact_requested() -> bool:
    """Whether the environment asks for the reference (exact, slower) paths."""
    return bool(os.environ.get(EXACT_ENV))


THREADS_ENV = "DRIFTLINE_STRING_THREADS"  # threads classifying a batch's string columns; 1: one at a time
THREADS_MIN_VALUES = 20_000  # fewer values in all: a thread's hand-over costs more than it saves
_pool: ThreadPoolExecutor | None = None
_pool_key = (0, 0)  # (process, threads) the pool was made for: a forked child makes its own


def string_threads() -> int:
    """Threads for a batch's string columns: THREADS_ENV when set, else two in a scan's own process
    (pyarrow.compute releases the GIL) and one in a pool's worker, whose siblings hold the other cores."""
    got = os.environ.get(THREADS_ENV)
    if got:
        return max(1, int(got)) if got.isdigit() else 1
    if multiprocessing.parent_process() is not None:
        return 1
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return max(1, min(2, cores))


def string_profiles(
    columns: Sequence[tuple[pa.Array, pa.DictionaryArray | None]], keep_first: int = 3
) -> list[StringProfile]:
    """string_profile of each (array, encoded) pair: the same profiles, on a few threads when the
    columns are several and large enough to pay for them."""
    threads = min(string_threads(), len(columns))
    if threads < 2 or sum(len(a) for a, _ in columns) < THREADS_MIN_VALUES:
        return [string_profile(a, keep_first, e) for a, e in columns]
    global _pool, _pool_key
    if _pool is None or _pool_key != (os.getpid(), threads):
        _pool, _pool_key = ThreadPoolExecutor(threads, thread_name_prefix="driftline-strings"), (os.getpid(), threads)
    # Longest columns first, so the last one to start is a short one.
    order = sorted(range(len(columns)), key=lambda i: -columns[i][0].nbytes)
    futures = {i: _pool.submit(string_profile, columns[i][0], keep_first, columns[i][1]) for i in order}
    return [futures[i].result() for i in range(len(columns))]


DICTIONARY_MIN = 1024  # shorter columns are classified value by value
DICTIONARY_SHARE = 2  # use the dictionary when distinct values are at most half the values
SAMPLE = 8192  # ... and try it only when fewer than 80% of the first SAMPLE values are distinct
SAMPLE_DISTINCT = 0.8
_SECONDS_AT = 17  # textclass: where the seconds sit in every timestamp shape


@dataclass(frozen=True, slots=True)
class StringProfile:
    """Per class (only those that occur, in CLASSES order): count and first positions (up to 3)."""

    counts: dict[str, int]
    first: dict[str, list[int]]
    max_length: int
    int_digits: int
    frac_digits: int
    leap_seconds: int
    lowercase_rfc3339: int


@staged("classify")
def string_profile(arr: pa.Array, keep_first: int = 3, encoded: pa.DictionaryArray | None = None) -> StringProfile:
    """Classify a string array (nulls skipped), as textclass.classify would.

    encoded, when given, is the same rows as a dictionary whose every value is distinct, not
    null and used by a row (a Parquet column read with its dictionary pages: encoded_rows
    says whether one is): its dictionary is classified instead of hashing the column again.

    >>> p = string_profile(pa.array(["7", "x", None, "8", "2026-02-30"]))
    >>> p.counts, p.first
    ({'integer': 2, 'text': 2}, {'integer': [0, 3], 'text': [1, 4]})
    """
    values, index = arr, None
    raw = value_bytes(arr)  # for byte-level checks: one copy of the values' bytes, not a pass per value
    # Timestamps of one shape: their pattern over every value, unless they repeat (a clock of a few
    # readings a day), when the dictionary's values are enough (below); a dictionary page always is.
    stamp_like = _stamp_like(arr)
    head_repeats = _head_repeats(arr) if stamp_like and encoded is None else None
    stamps_tried = stamp_like and encoded is None and not head_repeats
    masks = _timestamp_masks(arr) if stamps_tried else None
    # Digits alone (ids, counts) are cheaper to check whole than to hash, however often they repeat.
    numbers = number_masks(arr, raw) if not stamp_like and raw.isdigit() else None
    if numbers is not None:
        masks = numbers.masks
    if masks is None and encoded is None and head_repeats is None:
        head_repeats = _head_repeats(arr)
    if masks is None and (encoded is not None or head_repeats or len(arr) <= DICTIONARY_MIN):
        enc = encoded if encoded is not None else pc.dictionary_encode(arr)
        if 0 < len(enc.dictionary) <= FEW:
            return _profile_few(enc, keep_first)
        if len(enc.dictionary) * DICTIONARY_SHARE <= len(arr):
            values, index = enc.dictionary, enc.indices
            raw = value_bytes(values)
    if masks is None and not (stamps_tried and index is None):
        masks = _timestamp_masks(values)
    if masks is None:
        numbers = number_masks(values, raw)
        masks = numbers.masks if numbers is not None else class_masks(values)
    counts: dict[str, int] = {}
    first: dict[str, list[int]] = {}
    for cls in CLASSES:
        m = masks[cls]
        if not m.true_count:
            continue
        row_mask = m if index is None else pc.fill_null(pc.take(m, index), False)
        counts[cls] = row_mask.true_count
        first[cls] = _first_rows(row_mask, keep_first, counts[cls])
    int_digits = frac_digits = 0
    number = pc.or_(pc.or_(masks["integer"], masks["decimal"]), masks["zero_padded"])
    if numbers is not None:
        int_digits, frac_digits = numbers.int_digits, numbers.frac_digits
    elif number.true_count:
        int_digits, frac_digits = max_digits(values.filter(number))
    stamp = pc.or_(pc.or_(masks["timestamp_rfc3339"], masks["timestamp_offset"]), masks["timestamp_local"])
    leap = lower = 0
    if stamp.true_count:
        # As textclass.classify counts them: a timestamp with second 60 (every timestamp shape
        # has ':' just before the seconds, so ':60' in the bytes finds the candidates), and an
        # RFC 3339 one with a lowercase t or z.
        if b":60" in raw:
            sixty = pc.fill_null(pc.equal(pc.utf8_slice_codeunits(values, _SECONDS_AT, _SECONDS_AT + 2), "60"), False)
            leap = _row_count(pc.and_(stamp, sixty), index)
        if masks["timestamp_rfc3339"].true_count:
            lc = pc.and_(masks["timestamp_rfc3339"], pc.fill_null(pc.match_substring_regex(values, "[tz]"), False))
            lower = _row_count(lc, index)
    # ASCII bytes are characters: the byte lengths are then the lengths, and cost nothing.
    lengths = pc.binary_length(values) if raw.isascii() else pc.utf8_length(values)
    longest = pc.max(lengths).as_py() if len(values) else 0
    return StringProfile(counts, first, int(longest or 0), int_digits, frac_digits, leap, lower)


def encoded_rows(arr: pa.Array) -> pa.DictionaryArray | None:
    """arr itself when it is a dictionary of strings string_profile can classify through: every
    dictionary value distinct, not null and used by a row (as pyarrow.compute.dictionary_encode
    makes them), and few enough for string_profile to use it; else None."""
    if not pa.types.is_dictionary(arr.type) or arr.type.value_type != pa.string():
        return None
    values = arr.dictionary
    if len(values) > FEW and len(values) * DICTIONARY_SHARE > len(arr):
        return None  # string_profile would classify the rows one by one anyway: no checks for nothing
    if values.null_count or len(pc.unique(values)) != len(values):
        return None
    used = pc.unique(arr.indices).drop_null()
    return arr if len(used) == len(values) else None


_HEAD_ROWS = 4096  # the first rows of a class are nearly always among these


def _first_rows(mask: pa.Array, keep: int, count: int) -> list[int]:
    """The first `keep` positions where mask is true (it is true `count` times)."""
    head = pc.indices_nonzero(mask.slice(0, _HEAD_ROWS))
    if len(head) < min(keep, count):
        head = pc.indices_nonzero(mask)
    return head.slice(0, keep).to_pylist()


FEW = 512  # distinct values looked up one by one in a process-wide table of earlier verdicts
_SEEN_MAX = 200_000
_SEEN: dict[str, tuple[int, bool, bool, int, int]] = {}  # value -> (class, leap, lower, int d., frac d.)


def _profile_few(enc: pa.DictionaryArray, keep_first: int) -> StringProfile:
    """A column of few distinct values: each value's verdict is looked up (class_masks decides
    the ones not seen before), then the rows are counted per class."""
    distinct = enc.dictionary.to_pylist()
    verdicts = _known(distinct)
    # Every value of a dictionary occurs in the rows it was made from: the maxima need no counts.
    int_digits = max((v[3] for v in verdicts), default=0)
    frac_digits = max((v[4] for v in verdicts), default=0)
    row_class = pc.take(pa.array([v[0] for v in verdicts], pa.int8()), enc.indices)
    if row_class.null_count:
        row_class = pc.fill_null(row_class, -1)
    counts: dict[str, int] = {}
    first: dict[str, list[int]] = {}
    for k in sorted({v[0] for v in verdicts}):
        hits = pc.equal(row_class, k)
        counts[CLASSES[k]] = hits.true_count
        first[CLASSES[k]] = _first_rows(hits, keep_first, counts[CLASSES[k]])
    leap = _flagged_rows(enc.indices, [v[1] for v in verdicts])
    lower = _flagged_rows(enc.indices, [v[2] for v in verdicts])
    longest = max((len(v) for v in distinct), default=0)
    return StringProfile(counts, first, longest, int_digits, frac_digits, leap, lower)


def _flagged_rows(indices: pa.Array, flags: list[bool]) -> int:
    """How many rows hold a value whose flag is set."""
    if not any(flags):
        return 0
    return int(pc.sum(pc.take(pa.array([int(f) for f in flags], pa.int64()), indices)).as_py() or 0)


def _known(values: list[str]) -> list[tuple[int, bool, bool, int, int]]:
    """Each value's verdict: from the table, or learnt now.  Each value is looked up once, so a
    thread clearing the table in between (string_profiles) costs nothing but a verdict learnt again."""
    got = [_SEEN.get(v) for v in values]
    unseen = [v for v, g in zip(values, got, strict=True) if g is None]
    if not unseen:
        return got  # type: ignore[return-value]
    learnt = _learn(unseen)
    return [learnt[v] if g is None else g for v, g in zip(values, got, strict=True)]


def _learn(values: list[str]) -> dict[str, tuple[int, bool, bool, int, int]]:
    """class_masks's verdict on each value, with what classify counts for it; recorded in the table."""
    if len(_SEEN) + len(values) > _SEEN_MAX:
        _SEEN.clear()
    learnt: dict[str, tuple[int, bool, bool, int, int]] = {}
    masks = class_masks(pa.array(values, pa.string()))
    kind = [0] * len(values)
    for k, cls in enumerate(CLASSES):
        for i in pc.indices_nonzero(masks[cls]).to_pylist():
            kind[i] = k
    for v, k in zip(values, kind, strict=True):
        cls = CLASSES[k]
        stamp = cls in _STAMP_SHAPES
        d_int = d_frac = 0
        if cls in _DIGIT_CLASSES:  # ASCII digits, '-' and '.': as textclass.digit_counts
            body = v[1:] if v.startswith("-") else v
            head, dot, tail = body.partition(".")
            d_int, d_frac = len(head), (len(tail) if dot else 0)
        learnt[v] = (
            k,
            stamp and v[_SECONDS_AT : _SECONDS_AT + 2] == "60",
            cls == "timestamp_rfc3339" and ("t" in v or "z" in v),
            d_int,
            d_frac,
        )
    _SEEN.update(learnt)
    return learnt


def _timestamp_masks(values: pa.Array) -> dict[str, pa.Array] | None:
    """Class masks of a column of timestamps all of one shape, from its distinct days.

    textclass.class_of puts a value of a timestamp shape in that class when its date is a
    real day and in text otherwise (the clock ranges are in the pattern, second 60 and
    long fractions are accepted).  So one pattern pass over the values and class_masks
    over the distinct 'YYYY-MM-DD' prefixes give the masks; None when the shortcut does
    not apply (short columns, mixed content).
    """
    if len(values) <= DICTIONARY_MIN or values.null_count == len(values):
        return None
    first = values[_first_valid(values)].as_py()
    name = next((n for n in _STAMP_SHAPES if _STAMP_PY[n].fullmatch(first)), None)
    if name is None:
        return None
    shaped = pc.match_substring_regex(values, _STAMP_RE2[name])
    if shaped.true_count != len(values) - values.null_count:
        return None
    days = pc.dictionary_encode(pc.utf8_slice_codeunits(values, 0, 10))
    real = class_masks(days.dictionary)["date"]
    ok = pc.fill_null(pc.take(real, days.indices), False)
    none = pa.repeat(False, len(values))
    masks = {cls: none for cls in CLASSES}
    masks[name] = ok
    masks["text"] = pc.and_(pc.is_valid(values), pc.invert(ok))
    return masks


def _head_repeats(arr: pa.Array) -> bool:
    """Whether the column's values repeat enough to classify its dictionary instead: hashing
    costs about as much as classifying when nearly every value is distinct (ids, amounts), and
    little otherwise; the head of the column decides."""
    return len(arr) > DICTIONARY_MIN and len(pc.unique(arr.slice(0, SAMPLE))) < SAMPLE_DISTINCT * min(SAMPLE, len(arr))


def _stamp_like(values: pa.Array) -> bool:
    """Whether the first value that is not null has a timestamp shape (the others may not)."""
    if not len(values) or values.null_count == len(values):
        return False
    first = values[_first_valid(values)].as_py()
    return any(_STAMP_PY[n].fullmatch(first) for n in _STAMP_SHAPES)


def _first_valid(arr: pa.Array) -> int:
    return 0 if arr.null_count == 0 else pc.index(pc.is_valid(arr), True).as_py()


_STAMP_SHAPES = ("timestamp_rfc3339", "timestamp_offset", "timestamp_local")
_STAMP_BODY = {
    "timestamp_rfc3339": TIMESTAMP_RFC3339_RE,
    "timestamp_offset": TIMESTAMP_OFFSET_RE,
    "timestamp_local": TIMESTAMP_LOCAL_RE,
}
_STAMP_PY = {n: re.compile(body) for n, body in _STAMP_BODY.items()}  # fullmatch, as textclass
_STAMP_RE2 = {n: f"^(?:{body})$" for n, body in _STAMP_BODY.items()}


def _row_count(mask: pa.Array, index: pa.Array | None) -> int:
    if index is None or not mask.true_count:
        return mask.true_count
    return pc.fill_null(pc.take(mask, index), False).true_count


@dataclass(frozen=True, slots=True)
class Verdicts:
    """Per value of a string array: its class (index in CLASSES) and what classify counts for it."""

    kind: pa.Array  # int8
    leap: pa.Array  # bool: a timestamp with second 60
    lower: pa.Array  # bool: an RFC 3339 timestamp with a lowercase t or z
    int_digits: pa.Array  # int64, 0 unless zero_padded, integer or decimal
    frac_digits: pa.Array  # int64, 0 unless decimal or zero_padded


def verdicts(values: pa.Array) -> Verdicts:
    """Each value's verdict, as _profile_few and string_profile count them (values: no nulls).

    >>> v = verdicts(pa.array(["7", "x", "-1.25", "1990-12-31T23:59:60Z"]))
    >>> [CLASSES[k] for k in v.kind.to_pylist()], v.leap.to_pylist(), v.frac_digits.to_pylist()
    (['integer', 'text', 'decimal', 'timestamp_rfc3339'], [False, False, False, True], [0, 0, 2, 0])
    """
    if len(values) <= FEW:  # few values: the process-wide table answers most of them
        got = _known(values.to_pylist())
        return Verdicts(*(pa.array([g[i] for g in got], t) for i, t in enumerate(_VERDICT_TYPES)))
    masks = class_masks(values)
    kind = pc.case_when(
        pc.make_struct(*(masks[c] for c in CLASSES), field_names=list(CLASSES)),
        *(pa.scalar(k, pa.int8()) for k in range(len(CLASSES))),
    )
    stamp = pc.or_(pc.or_(masks["timestamp_rfc3339"], masks["timestamp_offset"]), masks["timestamp_local"])
    sixty = pc.fill_null(pc.equal(pc.utf8_slice_codeunits(values, _SECONDS_AT, _SECONDS_AT + 2), "60"), False)
    lower = pc.and_(masks["timestamp_rfc3339"], pc.fill_null(pc.match_substring_regex(values, "[tz]"), False))
    number = pc.or_(pc.or_(masks["integer"], masks["decimal"]), masks["zero_padded"])
    before, after = digit_counts(values)
    zero = pa.scalar(0, pa.int64())
    return Verdicts(
        kind, pc.and_(stamp, sixty), lower, pc.if_else(number, before, zero), pc.if_else(number, after, zero)
    )


_DIGIT_CLASSES = ("zero_padded", "integer", "decimal")  # the classes whose digits classify counts
_VERDICT_TYPES = (pa.int8(), pa.bool_(), pa.bool_(), pa.int64(), pa.int64())  # the fields of a _SEEN entry
