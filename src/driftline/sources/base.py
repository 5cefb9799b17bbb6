"""What a reader returns: observations per batch, and the problems it met on the way."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from driftline.core.dataformat import Compression, Format
from driftline.core.dialectpin import parse_pin
from driftline.core.observation import Observation
from driftline.core.stats import pickled_by_fields
from driftline.errors import OptionError, PolicyError
from driftline.sources.dialect import Dialect

if TYPE_CHECKING:
    from driftline.sources.encoding import TextEncoding
from driftline.core.ranges import check

DEFAULT_BATCH_ROWS = 65_536
DEFAULT_MAX_RECORD_BYTES = 64 * 1024 * 1024
DEFAULT_MAX_DECOMPRESSED_BYTES = 64 * 1024**3
# Deflate cannot pass about 1,032:1, so real data stays far below this; bombs (zeros in
# bz2/zstd/xz, or a Parquet footer promising gigabytes from a few kilobytes) go above it.
DEFAULT_MAX_DECOMPRESSION_RATIO = 1000
RATIO_FLOOR_BYTES = 16 * 1024 * 1024  # the ratio is only judged past this many bytes out
# Each column costs its own pass per batch (about 1.5 ms, measured with 2 rows), so 100,000
# columns would take minutes per batch and memory grows with rows times columns.
DEFAULT_MAX_COLUMNS = 10_000
# A batch also ends once its records' bytes reach this: parsed JSON takes about ten times its
# text in memory, so batch_rows alone let a batch of long records grow to gigabytes.
DEFAULT_BATCH_BYTES = 64 * 1024 * 1024
# Distinct field paths one batch keeps (in the order they first show); the paths past it are
# counted as "other fields".  Records with a key per id would otherwise grow without bound.
DEFAULT_MAX_PATHS = 10_000


@dataclass(frozen=True, slots=True)
class ReadOptions:
    """Options every reader honours. Keyword-only, with safe defaults.

    batch_rows              at most this many rows per batch
    batch_bytes             a batch also ends once its records' input bytes reach this (bounds memory)
    max_paths               distinct field paths kept per batch and per scan; the rest are "other fields"
    max_record_bytes        a longer JSON line / document / CSV line is reported, not read
    max_decompressed_bytes  stop a compressed file past this many bytes (decompression bombs)
    max_decompression_ratio stop once bytes out / bytes in exceeds this, past RATIO_FLOOR_BYTES
                            out (streams as they decompress; Parquet row groups by their footer)
    delimiter               CSV delimiter; None finds it (sources/dialect.py)
    csv_dialects            pins of the CSV dialect, '[GLOB:]KEY=VALUE[,KEY=VALUE…]' each (parse_pin);
                            what a pin leaves open is still found from the data
    encoding                text encoding of CSV/TSV/JSON files (a name Python's codecs know);
                            None finds it per file from its first bytes (sources/encoding.py)
    exact                   take the exact per-record path everywhere (no columnar fast path);
                            the results are the same, only slower: for checking the fast path

    >>> ReadOptions(batch_rows=50_000).batch_rows
    50000
    >>> ReadOptions(batch_rows=0)
    Traceback (most recent call last):
    driftline.errors.OptionError: batch_rows must be an integer from 1 to 1,099,511,627,776, got 0
    """

    batch_rows: int = DEFAULT_BATCH_ROWS
    max_record_bytes: int = DEFAULT_MAX_RECORD_BYTES
    max_decompressed_bytes: int = DEFAULT_MAX_DECOMPRESSED_BYTES
    delimiter: str | None = None
    max_decompression_ratio: float = DEFAULT_MAX_DECOMPRESSION_RATIO
    max_columns: int = DEFAULT_MAX_COLUMNS
    exact: bool = False
    batch_bytes: int = DEFAULT_BATCH_BYTES
    max_paths: int = DEFAULT_MAX_PATHS

    csv_dialects: tuple[str, ...] = ()
    encoding: str | None = None

    def __post_init__(self) -> None:
        for name in (
            "batch_rows",
            "batch_bytes",
            "max_record_bytes",
            "max_decompressed_bytes",
            "max_decompression_ratio",
            "max_columns",
            "max_paths",
        ):
            check(name, getattr(self, name))
        if self.encoding is not None:
            from driftline.sources.encoding import codec_name

            try:
                codec_name(self.encoding)
            except ValueError as exc:  # a name Python's codecs do not know
                raise OptionError(str(exc)) from None
        for spec in self.csv_dialects:
            parse_pin(spec)  # a bad pin is an error before any file is read
        if self.delimiter is not None:
            # a name ('tab', 'pipe') or a typed escape ('\\t') as --csv-dialect takes it
            try:
                delimiter = parse_pin(f"delimiter={_typed(self.delimiter)}").delimiter
            except PolicyError:
                raise PolicyError(
                    f"--delimiter {self.delimiter!r}: give one punctuation character or a name "
                    "(comma, tab, semicolon, pipe, colon, caret, tilde, space)"
                ) from None
            object.__setattr__(self, "delimiter", delimiter)


def _typed(delimiter: str) -> str:
    return {"\\t": "tab", "\t": "tab", " ": "space", ",": "comma"}.get(delimiter, delimiter)


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
