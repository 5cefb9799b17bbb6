"""The exception tree. Every error a user can cause derives from DriftlineError.

    DriftlineError                 base; the CLI prints "Type: message" and exits 2
    ├── InputPathError             a path or URL that does not exist or cannot be listed
    ├── UnreadableFileError        a file that cannot be opened or decoded at all
    ├── PolicyError                a policy or option file with an unknown key or bad value
    ├── ReportVersionError         a saved report / state / rules file of another format
    └── OutputError                an output path that cannot be written

Per-file problems found during a scan are *not* raised: they become FileError
entries in the profile so that the scan goes on with the other files.
"""

from __future__ import annotations


class DriftlineError(Exception):
    """Base class of every error driftline raises for bad input or bad options."""


class InputPathError(DriftlineError):
    """A path, glob or URL given to scan does not exist or holds nothing readable."""


class UnreadableFileError(DriftlineError):
    """A single file cannot be read; carries the file and position when known."""


class PolicyError(DriftlineError):
    """A policy or recommendation option has an unknown key or a bad value."""


class ReportVersionError(DriftlineError):
    """A saved report, rules or state file has another format or version."""


class OutputError(DriftlineError):
    """An output file cannot be written (folder missing, permission, disk full)."""
