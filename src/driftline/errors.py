"""The exception tree. Every error a user can cause derives from DriftlineError.

    DriftlineError                 base; the CLI prints "Type: message" and exits 2
    ├── InputPathError             a path or URL that does not exist or cannot be listed
    ├── UnreadableFileError        a file that cannot be opened or decoded at all
    ├── PolicyError                a policy or option file with an unknown key or bad value
    │   └── SchemaConflictError    strict mode: some fields need a lossy or conflicting cast rule
    ├── OptionError                an option value of the wrong type or outside its range
    ├── ReportVersionError         a saved report / state / rules file of another format
    ├── DamagedFileError           a report, baseline, rules, policy or state file of the right
    │                              format but the wrong shape: names the file and a JSON pointer
    ├── OutputError                an output path that cannot be written
    ├── ProfileError               two profiles that hold one file with different content
    │                              (merge), or a Profile built with one file twice
    ├── WorkerError                a worker process died twice on the same files, or a
    │                              task ran past its timeout
    └── EngineError                the distributed engine is missing, cannot be reached,
                                   or lost the scan

Per-file problems found during a scan are *not* raised: they become FileIssue
entries in the profile (``profile.issues``) so that the scan goes on with the other
files. Each message says what was received and what to do about it. Catch
DriftlineError to handle all of them:

>>> import driftline
>>> issubclass(driftline.PolicyError, driftline.DriftlineError)
True
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # for annotations only: errors.py imports nothing of driftline at run time
    from driftline.recommendation.plan import FieldPlan, Recommendation


class DriftlineError(Exception):
    """Base class of every error driftline raises for bad input or bad options.

    >>> str(DriftlineError("bad option: use --help"))
    'bad option: use --help'
    """


class InputPathError(DriftlineError):
    """A path, glob or URL given to scan does not exist or holds nothing readable.

    >>> import driftline
    >>> try:
    ...     driftline.scan("no/such/folder")
    ... except InputPathError as exc:
    ...     print(exc)
    'no/such/folder' does not exist; give a file, a folder or a glob
    """


class UnreadableFileError(DriftlineError):
    """A single file cannot be read; carries the file and position when known.

    >>> isinstance(UnreadableFileError("a.parquet: not a Parquet file"), DriftlineError)
    True
    """


class PolicyError(DriftlineError):
    """A policy or recommendation option has an unknown key or a bad value.

    >>> isinstance(PolicyError("gate.toml: unknown key 'max_nul'"), DriftlineError)
    True
    """


class OptionError(DriftlineError, ValueError):
    """An option value of the wrong type or outside its range (batch_rows=0, a 20-digit batch size).

    It is also a ValueError, which option checks raised before it existed.

    >>> import driftline
    >>> try:
    ...     driftline.scan(".", batch_rows=0)
    ... except OptionError as exc:
    ...     print(exc)
    batch_rows must be an integer from 1 to 1,099,511,627,776, got 0
    """


class ReportVersionError(DriftlineError):
    """A saved report, rules or state file has another format or version.

    >>> from driftline.results.report import from_dict
    >>> try:
    ...     from_dict({"format": "driftline-report", "version": 0})
    ... except ReportVersionError as exc:
    ...     print(exc)  # doctest: +ELLIPSIS
    report has report version 0 (at /version); this driftline reads versions 1 and 2. Rescan the data...
    """


class DamagedFileError(DriftlineError):
    """A file of driftline's own format does not match its published JSON Schema.

    The message names the file, the JSON pointer (RFC 6901) of the first problem and what
    was expected there.

    >>> from driftline.results.report import from_dict
    >>> try:
    ...     from_dict({"format": "driftline-report", "version": 1, "files": "none"}, source="'r.json'")
    ... except DamagedFileError as exc:
    ...     print(exc)
    report 'r.json' is damaged at /tool: expected a required key, found none
    """


class OutputError(DriftlineError):
    """An output file cannot be written (folder missing, permission, disk full).

    >>> isinstance(OutputError("out/r.json: folder 'out' does not exist"), DriftlineError)
    True
    """


class ProfileError(DriftlineError, ValueError):
    """Profiles that cannot combine: two that hold one file with different content, or one
    built with the same relative path twice. Also a ValueError, which it was before.

    >>> import driftline
    >>> from driftline.core.files import FileResult
    >>> a = driftline.Profile("r", (FileResult("a.jsonl", "jsonl", None, (), 10, 0, rows=1),))
    >>> b = driftline.Profile("r", (FileResult("a.jsonl", "jsonl", None, (), 10, 0, rows=2),))
    >>> try:
    ...     a.merge(b)
    ... except ProfileError as exc:
    ...     print(exc)
    both profiles hold 'a.jsonl' with different content; rescan it
    """


class WorkerError(DriftlineError):
    """A worker process died twice reading the same files, or a task ran past --task-timeout.

    >>> isinstance(WorkerError("the worker process reading a.jsonl died twice"), DriftlineError)
    True
    """


class EngineError(DriftlineError):
    """The distributed engine is missing, cannot be reached, or lost the scan.

    >>> import driftline
    >>> try:
    ...     driftline.scan(".", engine="dask", scheduler="nowhere")
    ... except EngineError as exc:
    ...     print(type(exc).__name__)
    EngineError
    """


class SchemaConflictError(PolicyError):
    """Strict mode: some fields need a rule that nulls, changes or reinterprets values.

    The strict policy cannot be met by the data (so a PolicyError). recommendation holds
    the permissive plans, conflicts the plans strict mode refused.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"n": 1}\\n{"n": "x"}\\n')
    >>> try:
    ...     driftline.recommend(driftline.scan(d), mode="strict")
    ... except SchemaConflictError as exc:
    ...     print(exc.conflicts[0].path, exc.conflicts[0].rule)
    n format_as_string
    """

    def __init__(self, recommendation: Recommendation) -> None:
        self.recommendation: Recommendation = recommendation
        self.conflicts: tuple[FieldPlan, ...] = recommendation.conflicts()
        names = ", ".join(f"{p.path} ({p.rule})" for p in self.conflicts[:8])
        more = f" and {len(self.conflicts) - 8} more" if len(self.conflicts) > 8 else ""
        n = len(self.conflicts)
        super().__init__(
            # errors.py imports nothing of driftline at run time: core/words.count spelled out here
            f"strict mode: {n:,} field{'s need' if n != 1 else ' needs'} a lossy or conflicting cast rule: "
            f"{names}{more}"
        )
