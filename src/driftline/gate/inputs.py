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

from driftline.profile import Profile
from driftline.report import load_report
from driftline.scan import Progress, scan_paths
from driftline.sources.base import ReadOptions

# report.to_dict writes "format" first; allow any whitespace a pretty-printer adds.
_REPORT_HEAD = re.compile(rb'\A\s*\{\s*"format"\s*:\s*"driftline-report"')

Side = Profile | str | os.PathLike[str]


def is_report(path: str | os.PathLike[str]) -> bool:
    """True when path is a file that begins like a driftline scan report."""
    p = Path(path)
    if not p.is_file():
        return False
    try:
        with p.open("rb") as fh:
            head = fh.read(256)
    except OSError:
        return False
    return _REPORT_HEAD.match(head) is not None


def profile_of(
    side: Side | Sequence[str | os.PathLike[str]],
    *,
    read: ReadOptions | None = None,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    include_hidden: bool = False,
    jobs: int = 1,
    max_errors: int | None = None,
    progress: Progress | None = None,
) -> Profile:
    """A Profile for one side: itself, a loaded report, or a scan of the paths."""
    if isinstance(side, Profile):
        return side
    items = [side] if isinstance(side, str | os.PathLike) else list(side)
    if len(items) == 1 and is_report(items[0]):
        return load_report(os.fspath(items[0]))
    return scan_paths(
        items,
        read=read,
        include=include,
        exclude=exclude,
        include_hidden=include_hidden,
        jobs=jobs,
        max_errors=max_errors,
        progress=progress,
    )
