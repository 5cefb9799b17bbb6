"""driftline: profile raw landing directories in record batches and report their drift.

The public API is exactly the names in ``driftline.__all__``; every other module and name
is internal and may change without notice. A session in brief:

>>> import driftline, tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> _ = (d / "day=1").mkdir(), (d / "day=1" / "a.jsonl").write_text('{"x": 1}\\n')
>>> _ = (d / "day=2").mkdir(), (d / "day=2" / "a.jsonl").write_text('{"x": "one"}\\n')
>>> profile = driftline.scan(d)
>>> profile  # doctest: +ELLIPSIS
<Profile '...': 2 files, 2 rows, 1 field, 1 drift event, 0 errors>
>>> [(e.kind, e.path, e.before, e.after, e.file) for e in profile.events]
[('type-conflict', 'x', 'int64', 'string', 'day=2/a.jsonl')]
>>> {day: fields["x"].stats.types for day, fields in profile.by_partition("day").items()}
{'1': {'int64': 1}, '2': {'string': 1}}
>>> profile.to_polars().fields.select("path", "nullable").rows()
[('x', False)]

A landing root holding several tables splits into datasets (and loose files) first:

>>> [(s.name, s.partition_keys, len(s.files)) for s in driftline.datasets(d).datasets]
[('.', ('day',), 2)]

Every error driftline raises for bad input derives from DriftlineError:

>>> try:
...     driftline.scan(d / "missing")
... except driftline.DriftlineError as exc:
...     print(type(exc).__name__)
InputPathError
"""

from __future__ import annotations

import importlib as _importlib
from typing import TYPE_CHECKING as _TYPE_CHECKING

from driftline.core.version import __version__
from driftline.errors import (
    DamagedFileError,
    DriftlineError,
    EngineError,
    InputPathError,
    OptionError,
    OutputError,
    PolicyError,
    ProfileError,
    ReportVersionError,
    SchemaConflictError,
    UnreadableFileError,
    WorkerError,
)

if _TYPE_CHECKING:
    from driftline._api import (
        Landing,
        Profile,
        Recommendation,
        apply,
        check,
        datasets,
        diff,
        load_report,
        load_report_set,
        recommend,
        scan,
        scan_datasets,
    )
    from driftline.applying.run import ApplyResult
    from driftline.core.options import ReadOptions, ScanOptions
    from driftline.gate.diff import Diff
    from driftline.gate.policy import Policy
    from driftline.gate.verdict import Verdict
    from driftline.results.drift import Event
    from driftline.results.profile import FieldSummary

# The rest of the surface is imported on first use (PEP 562): `driftline --version` and a
# verb's --help need none of the readers, the recommender, the gate or the renderers. The names
# are written three times on purpose: the TYPE_CHECKING imports for type checkers, this table
# for the runtime, and __all__ as the literal list tools read; tests/api/test_api.py holds them equal.
_LAZY: dict[str, str] = {
    **dict.fromkeys(
        (
            "Landing",
            "Profile",
            "Recommendation",
            "apply",
            "check",
            "datasets",
            "diff",
            "load_report",
            "load_report_set",
            "recommend",
            "scan",
            "scan_datasets",
        ),
        "driftline._api",
    ),
    "ApplyResult": "driftline.applying.run",
    "ReadOptions": "driftline.core.options",
    "ScanOptions": "driftline.core.options",
    "Diff": "driftline.gate.diff",
    "Policy": "driftline.gate.policy",
    "Verdict": "driftline.gate.verdict",
    "Event": "driftline.results.drift",
    "FieldSummary": "driftline.results.profile",
}


def __getattr__(name: str) -> object:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'driftline' has no attribute {name!r}")
    value = getattr(_importlib.import_module(module), name)
    globals()[name] = value  # once imported, an ordinary attribute
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *_LAZY})


__all__ = [
    "ApplyResult",
    "DamagedFileError",
    "Diff",
    "DriftlineError",
    "EngineError",
    "Event",
    "FieldSummary",
    "InputPathError",
    "Landing",
    "OptionError",
    "OutputError",
    "Policy",
    "PolicyError",
    "Profile",
    "ProfileError",
    "ReadOptions",
    "Recommendation",
    "ReportVersionError",
    "ScanOptions",
    "SchemaConflictError",
    "UnreadableFileError",
    "Verdict",
    "WorkerError",
    "__version__",
    "apply",
    "check",
    "datasets",
    "diff",
    "load_report",
    "load_report_set",
    "recommend",
    "scan",
    "scan_datasets",
]
