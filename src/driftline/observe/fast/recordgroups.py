"""Observe the parsed records of many small JSON files at once, with the same Observations as
observe_records on each.

observe_records classifies each path's strings with a few dozen pyarrow.compute calls, whatever
their number: on a folder of small nested files (a hundred paths, a few records each) those
calls are nearly all the work.  Here each file's records are walked as observe_records walks
them (walk), and the strings of a whole group of files are classified in one call over their
distinct values (strprofile.verdicts); each path of each file then counts its own strings
from that table.  Provenance stays each file's own: rows, lines and examples come from the
file's walk.  tests/differential/test_json_groups_differential.py holds every report equal to
the one made file by file (DRIFTLINE_JSON_GROUPS=0).
"""

from __future__ import annotations

import os
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import pyarrow as pa

from driftline.core.observation import Observation
from driftline.core.stagetime import staged
from driftline.core.stats import SAMPLES_PER_KEY
from driftline.observe.fast.strprofile import verdicts
from driftline.observe.records import _Acc, _Other, _Where, finish_fields, observe_records, walk_records
from driftline.observe.shapes import tally_records
from driftline.observe.textclass import CLASSES

GROUPS_ENV = "DRIFTLINE_JSON_GROUPS"  # "0": observe each small JSON file alone (the reference for the tests)


def groups_enabled() -> bool:
    """Whether the batches of small JSON files are observed in groups (DRIFTLINE_JSON_GROUPS unset or not "0")."""
    return os.environ.get(GROUPS_ENV, "1") != "0"


@dataclass(slots=True)
class Walked:
    """A batch of records walked, its strings not yet classified: observe_records's arguments and walk."""

    records: Sequence[Any]
    file: str
    batch: int
    row_start: int
    lines: Sequence[int] | None
    max_paths: int | None
    shapes: bool
    size: int  # input bytes of the records (a group ends at ReadOptions.batch_bytes)
    accs: dict[str, _Acc]
    other: _Other

    @property
    def rows(self) -> int:
        return len(self.records)

    def alone(self) -> Observation:
        """The reference: observe_records on this batch by itself."""
        return observe_records(
            self.records,
            file=self.file,
            batch=self.batch,
            row_start=self.row_start,
            lines=self.lines,
            max_paths=self.max_paths,
            shapes=self.shapes,
        )


@staged("walk")
def walk(
    records: Sequence[Any],
    *,
    file: str,
    batch: int,
    row_start: int,
    lines: Sequence[int] | None,
    max_paths: int | None,
    shapes: bool,
    size: int,
) -> Walked:
    """observe_records's walk over a batch, now (it raises where observe_records would); the rest later."""
    accs, other = walk_records(records, max_paths)
    return Walked(records, file, batch, row_start, lines, max_paths, shapes, size, accs, other)


@dataclass(slots=True)
class _Facts:
    """records.StringFacts of one path's strings, counted from the group's table."""

    counts: dict[str, int]
    first: dict[str, list[int]]
    int_digits: int
    frac_digits: int
    leap_seconds: int
    lowercase_rfc3339: int


Verdict = tuple[int, bool, bool, int, int]  # class index, leap second, lowercase RFC 3339, int digits, frac digits


@staged("classify")
def verdict_table(values: list[str]) -> dict[str, Verdict]:
    """Each distinct value's verdict (strprofile.verdicts: what textclass.classify counts for it)."""
    if not values:
        return {}
    v = verdicts(pa.array(values, pa.string()))
    columns = (v.kind, v.leap, v.lower, v.int_digits, v.frac_digits)
    return dict(zip(values, zip(*(c.to_pylist() for c in columns), strict=True), strict=True))


@staged("classify")
def facts(table: dict[str, Verdict], strings: list[str]) -> _Facts:
    """What classify and class_masks say of strings (in order), from the verdicts of their values."""
    per_class = [0] * len(CLASSES)
    int_digits = frac_digits = leap = lower = 0
    for value, n in Counter(strings).items():
        k, is_leap, is_lower, di, df = table[value]
        per_class[k] += n
        leap += n if is_leap else 0
        lower += n if is_lower else 0
        int_digits, frac_digits = max(int_digits, di), max(frac_digits, df)
    counts = {CLASSES[k]: n for k, n in enumerate(per_class) if n}
    # the first positions of each class: the first one, or the first SAMPLES_PER_KEY when it holds more
    want = {k: min(SAMPLES_PER_KEY, n) for k, n in enumerate(per_class) if n}
    first: dict[int, list[int]] = {k: [] for k in want}
    missing = len(want)
    for j, value in enumerate(strings):
        k = table[value][0]
        got = first[k]
        if len(got) < want[k]:
            got.append(j)
            if len(got) == want[k]:
                missing -= 1
                if not missing:
                    break
    return _Facts(counts, {CLASSES[k]: first[k] for k in sorted(first)}, int_digits, frac_digits, leap, lower)


@staged("columnar")
def observe_walked(items: Sequence[Walked]) -> list[Observation]:
    """One Observation per walked batch, equal to observe_records on each alone.

    >>> a = walk([{"k": "7"}], file="a.json", batch=0, row_start=0, lines=None, max_paths=None, shapes=True, size=9)
    >>> b = walk([{"k": "x"}, {"k": "8"}], file="b.json", batch=0, row_start=0, lines=[1, 2], max_paths=None,
    ...          shapes=True, size=20)
    >>> [(o.file, o.fields["k"].classes) for o in observe_walked([a, b])] == [(w.file, w.alone().fields["k"].classes)
    ...                                                                       for w in (a, b)]
    True
    """
    distinct: set[str] = set()
    for w in items:
        for acc in w.accs.values():
            distinct.update(acc.strings)
    table = verdict_table(list(distinct))  # each value judged alone: their order changes nothing

    def strings(values: list[str]) -> _Facts:
        return facts(table, values)

    out = []
    for w in items:
        fields = finish_fields(w.accs, _Where(w.file, w.row_start, w.lines, None), strings)
        out.append(
            Observation(
                file=w.file,
                batch=w.batch,
                row_start=w.row_start,
                rows=len(w.records),
                fields=fields,
                other_paths=len(w.other.paths),
                other_values=w.other.values,
                shapes=tally_records(w.records, fields) if w.shapes else None,
            )
        )
    return out
