"""driftline: profile raw landing directories in record batches and report their drift.

>>> import driftline
>>> sorted(driftline.__all__)[:3]
['DriftlineError', 'Event', 'FieldSummary']
"""

from __future__ import annotations

__version__ = "0.1.0"

import os
from collections.abc import Sequence

from driftline.drift import Event
from driftline.errors import (
    DriftlineError,
    InputPathError,
    OutputError,
    PolicyError,
    ReportVersionError,
    UnreadableFileError,
)
from driftline.profile import FieldSummary, Profile
from driftline.report import load_report
# Imported here, before `def scan`, so the function (not the submodule) is driftline.scan.
from driftline.scan import scan_paths
from driftline.sources.base import ReadOptions


def scan(
    paths: str | os.PathLike[str] | Sequence[str | os.PathLike[str]],
    *,
    batch_rows: int = 65_536,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    include_hidden: bool = False,
    jobs: int = 1,
    max_errors: int | None = None,
    max_record_bytes: int | None = None,
) -> Profile:
    """Scan files, folders or globs into a Profile.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> p = driftline.scan(d)
    >>> p.fields["x"].stats.types, [e.kind for e in p.events]
    ({'float64': 1, 'int64': 1}, ['type-widened'])
    """
    if isinstance(paths, str | os.PathLike):
        paths = [paths]
    read = ReadOptions(batch_rows=batch_rows) if max_record_bytes is None else ReadOptions(batch_rows=batch_rows, max_record_bytes=max_record_bytes)
    return scan_paths(list(paths), read=read, include=include, exclude=exclude, include_hidden=include_hidden, jobs=jobs, max_errors=max_errors)


__all__ = [
    "DriftlineError",
    "Event",
    "FieldSummary",
    "InputPathError",
    "OutputError",
    "PolicyError",
    "Profile",
    "ReadOptions",
    "ReportVersionError",
    "UnreadableFileError",
    "__version__",
    "load_report",
    "scan",
]
