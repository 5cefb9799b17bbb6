"""FileRef: one input file as discovery found it, local or in an object store."""

from __future__ import annotations

import os
from dataclasses import dataclass

from driftline.core.dataformat import Compression, Format

REMOTE_SCHEMES = ("s3://",)  # locations read through an object store (sources/remote.py)


@dataclass(frozen=True, slots=True)
class FileRef:
    """One input file: where it is, how the report names it, and how to read it.

    `path` is the file's location: an absolute local path, or, for a file in an object store,
    a URL (``s3://bucket/key?region=…``, sources/remote.locator) that only remote.py opens.
    is_remote tells them apart.
    """

    path: str  # absolute local path, or an object store URL (is_remote)
    rel: str  # posix path relative to the scan root: the name used in every report
    partitions: tuple[tuple[str, str], ...]  # from key=value folders, outermost first
    format: Format
    compression: Compression | None
    size: int
    mtime_ns: int

    @property
    def is_remote(self) -> bool:
        """Whether path is an object store URL rather than a local path.

        >>> FileRef("s3://lake/a.jsonl", "a.jsonl", (), "jsonl", None, 1, 0).is_remote
        True
        >>> FileRef("/data/a.jsonl", "a.jsonl", (), "jsonl", None, 1, 0).is_remote
        False
        """
        return self.path.startswith(REMOTE_SCHEMES)


def file_changed(ref: FileRef) -> str | None:
    """How the file differs from what discovery saw, or None: a file rewritten, appended to or
    removed during the scan gives rows that belong to no single version of it."""
    try:
        st = os.stat(ref.path)
    except FileNotFoundError:
        return "the file was removed while the scan read it"
    except OSError:
        return None
    if st.st_size != ref.size:
        return f"the file changed during the scan (size {ref.size:,} then {st.st_size:,} bytes); rescan it"
    if st.st_mtime_ns != ref.mtime_ns:
        return "the file was modified during the scan (same size, new modification time); rescan it"
    return None
