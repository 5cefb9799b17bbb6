"""What the gate verbs accept as a side: a Profile, a saved scan report, or paths to scan.

A report is told by its content (a JSON file that starts as a driftline report), not by
its name, so a JSON data file is never mistaken for one.

>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.json").write_text('[{"x": 1}]')
>>> is_report(d / "a.json")
False
"""

from __future__ import annotations

import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from driftline.core.options import ScanOptions
from driftline.errors import InputPathError, OptionError
from driftline.gate.diff import DEFAULT_NULL_POINTS, Diff, diff_fields, diff_partitions
from driftline.results.conceal import conceal
from driftline.results.profile import Profile
from driftline.results.report import load_report
from driftline.scanning.run import Progress, scan_paths

# report.to_dict writes "format" first; allow any whitespace a pretty-printer adds.
_REPORT_HEAD = re.compile(rb'\A\s*\{\s*"format"\s*:\s*"driftline-report"')

Side = Profile | str | os.PathLike[str]


def begins_like(path: str | os.PathLike[str], head: re.Pattern[bytes]) -> bool:
    """True when path is a readable file whose first 256 bytes match head."""
    p = Path(path)
    if not p.is_file():
        return False
    try:
        with p.open("rb") as fh:
            first = fh.read(256)
    except OSError:
        return False
    return head.match(first) is not None


def is_report(path: str | os.PathLike[str]) -> bool:
    """True when path is a file that begins like a driftline scan report."""
    return begins_like(path, _REPORT_HEAD)


def profile_of(
    side: Side | Sequence[str | os.PathLike[str]],
    *,
    options: ScanOptions | None = None,
    progress: Progress | None = None,
    **keywords: Any,
) -> Profile:
    """A Profile for one side: itself, a loaded report, or a scan of the paths with options
    (and the flat keywords of ScanKeywords, or read=ReadOptions(...), applied over them)."""
    if isinstance(side, Profile):
        return side
    if isinstance(side, str | os.PathLike):
        items = [side]
    elif isinstance(side, Sequence) and all(isinstance(s, str | os.PathLike) for s in side):
        items = list(side)
    else:
        raise OptionError(f"a side is a Profile, a saved report or data paths, got {side!r}")
    if len(items) == 1 and is_report(items[0]):
        return load_report(os.fspath(items[0]))
    return scan_paths(items, options=options, progress=progress, **keywords)


def label(side: Side | Sequence[str | os.PathLike[str]]) -> str:
    """How a side is named in a diff: the path as given, or a Profile's root."""
    if isinstance(side, Profile):
        return side.root
    if isinstance(side, str | os.PathLike):
        return os.fspath(side)
    return ", ".join(os.fspath(s) for s in side)


def diff_sides(
    a: Side | Sequence[str | os.PathLike[str]],
    b: Side | Sequence[str | os.PathLike[str]] | None = None,
    *,
    by: str | None = None,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
) -> Diff | tuple[Diff, ...]:
    """a against b, or (by a partition key, no b) each value of that partition of a against
    the one before it; sides read with options, their example values concealed by its policy."""
    opts = options or ScanOptions()
    points = DEFAULT_NULL_POINTS if min_null_points is None else min_null_points
    if isinstance(points, bool) or not isinstance(points, int | float) or not 0 <= points <= 100:
        raise OptionError(f"min_null_points must be a number from 0 to 100, got {points!r}")

    def load(side: Side | Sequence[str | os.PathLike[str]]) -> Profile:
        return conceal(profile_of(side, options=opts), opts.values)

    if by is not None:
        if b is not None:
            raise InputPathError("--by compares partitions of one side; got 2 sides")
        profile = load(a)
        if by not in profile.partition_keys():
            known = ", ".join(profile.partition_keys()) or "none (no key=value folders)"
            raise InputPathError(f"no partition key {by!r} under {label(a)!r}; partition keys: {known}")
        return diff_partitions(profile, by, min_null_points=points)
    if b is None:
        raise InputPathError("diff takes two sides (reports or paths), or one with --by KEY; got 1")
    first, second = load(a), load(b)
    return diff_fields(first.fields, second.fields, before=label(a), after=label(b), min_null_points=points)
