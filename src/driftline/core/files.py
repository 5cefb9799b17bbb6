"""What a scan holds of each file: its result (observations per batch, the problems met on the
way, how it was written) and the paths discovery passed over. Values only: readers make them."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from driftline.core.dataformat import Compression, Format
from driftline.core.fileref import FileRef
from driftline.core.observation import Observation
from driftline.core.stats import pickled_by_fields
from driftline.core.textfile import Dialect, TextEncoding


@dataclass(frozen=True, slots=True)
class Skipped:
    """A path discovery passed over, and why (counted in the report)."""

    rel: str
    reason: str  # 'hidden' | 'marker' | 'excluded' | 'not-included' | 'special' | 'symlink-loop' | 'unknown-format'


@pickled_by_fields
@dataclass(frozen=True, slots=True)
class FileIssue:
    """A problem in one file, with where it is. Warnings do not lose data; errors may."""

    file: str
    kind: str  # 'malformed-json' | 'ragged-row' | 'invalid-utf8' | 'unreadable' | 'truncated' | ...
    message: str
    severity: str = "error"  # 'error' | 'warning'
    line: int | None = None
    byte_offset: int | None = None
    row: int | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "file": self.file,
            "kind": self.kind,
            "severity": self.severity,
            "message": self.message,
            "line": self.line,
            "byte_offset": self.byte_offset,
            "row": self.row,
        }

    @staticmethod
    def from_json(d: Mapping[str, Any]) -> FileIssue:
        return FileIssue(
            d["file"],
            d["kind"],
            d["message"],
            d.get("severity", "error"),
            d.get("line"),
            d.get("byte_offset"),
            d.get("row"),
        )

    def where(self) -> str:
        parts = [self.file]
        if self.line is not None:
            parts.append(f"line {self.line}")
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.byte_offset is not None:
            parts.append(f"byte {self.byte_offset}")
        return ", ".join(parts)


@pickled_by_fields
@dataclass(frozen=True, slots=True)
class FileResult:
    """Everything one file contributed to a scan."""

    rel: str
    format: Format
    compression: Compression | None
    partitions: tuple[tuple[str, str], ...]
    size: int
    mtime_ns: int
    rows: int = 0
    observations: tuple[Observation, ...] = ()
    issues: tuple[FileIssue, ...] = ()
    declared: dict[str, str] | None = None  # Parquet footer: path → type key
    complete: bool = True  # False when a fatal problem stopped the read early
    dialect: Dialect | None = None  # CSV / TSV: how the file is written (found or pinned)
    digest: str | None = field(default=None, compare=False)
    encoding: TextEncoding | None = None  # how a text file's bytes were decoded; None for Parquet
    batch_span: int = 1  # batches per observation: more than 1 once a file's batches were summarised (thinning)

    @property
    def errors(self) -> int:
        return sum(1 for i in self.issues if i.severity == "error")


def file_result(
    ref: FileRef,
    observations: Sequence[Observation],
    issues: Sequence[FileIssue],
    *,
    declared: dict[str, str] | None = None,
    complete: bool = True,
    dialect: Dialect | None = None,
    encoding: TextEncoding | None = None,
    span: int = 1,
) -> FileResult:
    """What one file contributed, with its identity taken from its FileRef and its rows counted
    from the observations: the one way readers and span assembly make a FileResult."""
    return FileResult(
        rel=ref.rel,
        format=ref.format,
        compression=ref.compression,
        partitions=ref.partitions,
        size=ref.size,
        mtime_ns=ref.mtime_ns,
        rows=sum(o.rows for o in observations),
        observations=tuple(observations),
        issues=tuple(issues),
        declared=declared,
        complete=complete,
        dialect=dialect,
        encoding=encoding,
        batch_span=span,
    )
