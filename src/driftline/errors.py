"""The exception tree. Every error a user can cause derives from DriftlineError.

    DriftlineError                 base; the CLI prints "Type: message" and exits 2
    ├── InputPathError             a path or URL that does not exist or cannot be listed
    ├── UnreadableFileError        a file that cannot be opened or decoded at all
    ├── PolicyError                a policy or option file with an unknown key or bad value
    ├── OptionError                an option value of the wrong type or outside its range
    ├── ReportVersionError         a saved report / state / rules file of another format
    ├── DamagedFileError           a report, baseline, rules, policy or state file of the right
    │                              format but the wrong shape: names the file and a JSON pointer
    ├── OutputError                an output path that cannot be written
    ├── WorkerError                (driftline.workers) a worker process died twice on the
                                   same files, or a task ran past its timeout
    └── EngineError                (driftline.engines) the distributed engine is missing,
                                   cannot be reached, or lost the scan

Per-file problems found during a scan are *not* raised: they become FileIssue
entries in the profile (``profile.issues``) so that the scan goes on with the other
files. Each message says what was received and what to do about it. Catch
DriftlineError to handle all of them:

>>> import driftline
>>> issubclass(driftline.PolicyError, driftline.DriftlineError)
True
"""

from __future__ import annotations


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

    >>> from driftline.report import from_dict
    >>> try:
    ...     from_dict({"format": "driftline-report", "version": 0})
    ... except ReportVersionError as exc:
    ...     print(exc)
    report has report version 0 (at /version); this driftline reads version 1. Rescan the data to make a new report.
    """


class DamagedFileError(DriftlineError):
    """A file of driftline's own format does not match its published JSON Schema.

    The message names the file, the JSON pointer (RFC 6901) of the first problem and what
    was expected there.

    >>> from driftline.report import from_dict
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
