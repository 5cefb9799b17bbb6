"""The registry of data formats: for each one, its suffixes, how it is sniffed, which reader
reads it, and whether it is read as spans.  Adding a format is one record here (and its reader
module); nothing else in driftline branches on a format's name.

The table is plain data.  Readers dispatch on it once per file (never per batch or row):
readers.read_files (text stream or random access), split (spans), scan (Parquet-like files
observed together), encoding (JSON must be Unicode) and recommendation/raw (values for casting).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from functools import partial
from typing import Any, BinaryIO

import pyarrow as pa

from driftline.core.dataformat import Format
from driftline.core.fileref import FileRef
from driftline.core.options import ReadOptions
from driftline.sources import csvsplit, jsonsplit
from driftline.sources.csvfile import LinedCells, read_csv, read_csv_cells
from driftline.sources.encoding import decide
from driftline.sources.formats import data_extension, decode_errors, detect_compression, head_bytes, open_stream
from driftline.sources.jsonfile import read_json, read_json_values, read_jsonl
from driftline.sources.parquetfile import has_parquet_magic, read_parquet, read_parquet_values
from driftline.sources.peek import Peek, peek_delimited, peek_document, peek_footer, peek_lines

# A stream reader: (decompressed UTF-8 binary stream, relative path, options, blank lines seen) → items
# (Observations, FileIssues, a Dialect; a JSON file read in one batch: a recordgroups.Walked)
StreamReader = Callable[[Any, str, ReadOptions, "list[int] | None"], Iterator[Any]]
# A random-access reader: (path or object-store file, relative path, options) → items
PathReader = Callable[[Any, str, ReadOptions], Iterator[Any]]
# The values of the rows a reader reads, for recommendation/raw: lists of parsed JSON records, Arrow
# batches, or CSV text cells with their rows' lines; from a stream when the format has `read`, from its
# path when it has `read_path`
ValuesReader = Callable[[Any, str, ReadOptions], Iterator["list[Any] | pa.RecordBatch | LinedCells"]]


@dataclass(frozen=True, slots=True)
class Splitter:
    """How a big file of a format is read as byte spans in the process pool (split.py)."""

    can_split: Callable[[FileRef, ReadOptions], bool]
    plan: Callable[[FileRef, ReadOptions, int], list[Any]]
    read_span: Callable[[Any, ReadOptions], Any]
    # the file's FileResult, a span to read again to the end, or None: one reader reads the file
    assemble: Callable[[FileRef, Sequence[Any], ReadOptions], Any]


@dataclass(frozen=True, slots=True)
class FormatSpec:
    """One data format, as every part of driftline that reads files needs to know it."""

    name: Format
    suffixes: tuple[str, ...]  # lower case, with the dot; the first one is the one messages name
    values: ValuesReader  # the values of the rows the reader reads, in its order (recommendation/raw)
    # the field names of a file from its head or footer, never a full read (dataset discovery)
    peek: Callable[[FileRef], Peek]
    family: str  # formats whose files can hold one table's rows side by side (dataset discovery)
    read: StreamReader | None = None  # read as a decompressed text stream (UTF-8 after TextStream)
    read_path: PathReader | None = None  # or from its path, with random access (footers, column chunks)
    magic: tuple[bytes, ...] = ()  # first bytes that tell the format before any decompression
    # the format's first text (after compression and encoding): (text without BOM and leading
    # white space, the first 4 KiB as UTF-8) → whether the file is of this format
    sniff: Callable[[bytes, bytes], bool] | None = None
    # a file with an extension driftline does not read is still this format when this holds
    confirm: Callable[[str], bool] | None = None
    text_cells: bool = False  # values are text cells, typed by their content (CSV), not typed by the file
    json_text: bool = False  # JSON text: Unicode only, never a single-byte fallback (RFC 8259 section 8.1)
    count_lines: bool = False  # line feeds counted apart and reconciled with the rows (linecount.jsonl_issue)
    header_row: bool = False  # a header then rows: no row from a file of many lines is a problem (readers.nothing_read)
    # batches of many small files observed at once (observe.bulk; observe.fast.recordgroups for JSON), and
    # the files read in groups by the scan (scanning/run._groups)
    observed_together: bool = False
    split: Splitter | None = None  # big files read as spans (split.py)


def _jsonl(stream: BinaryIO, rel: str, opts: ReadOptions, blanks: list[int] | None) -> Iterator[Any]:
    return read_jsonl(stream, rel, opts, blank_read=blanks, group=True)


def _json(stream: BinaryIO, rel: str, opts: ReadOptions, blanks: list[int] | None) -> Iterator[Any]:
    return read_json(stream, rel, opts, group=True)


def _delimited(tsv: bool) -> StreamReader:
    def read(stream: BinaryIO, rel: str, opts: ReadOptions, blanks: list[int] | None) -> Iterator[Any]:
        return read_csv(stream, rel, opts, tsv=tsv)

    return read


def _first_line(head: bytes) -> bytes:
    return head.split(b"\n", 1)[0]


def _tab_separated(text: bytes, head: bytes) -> bool:
    return b"\x00" not in head and b"\t" in _first_line(text)


def _comma_separated(text: bytes, head: bytes) -> bool:
    first = _first_line(text)
    return b"\x00" not in head and b"\t" not in first and (b"," in first or b";" in first or b"|" in first)


_JSON_SPLIT = Splitter(jsonsplit.can_split, jsonsplit.plan, jsonsplit.read_span, jsonsplit.assemble)


def _csv_split(tsv: bool) -> Splitter:
    return Splitter(csvsplit.can_split, partial(csvsplit.plan, tsv=tsv), csvsplit.read_span, csvsplit.assemble)


_TABLE = (
    FormatSpec(
        "jsonl",
        (".jsonl", ".ndjson", ".jsonlines"),
        values=partial(read_json_values, document=False),
        peek=peek_lines,
        family="JSON",
        read=_jsonl,
        sniff=lambda text, head: text.startswith(b"{"),
        json_text=True,
        count_lines=True,
        split=_JSON_SPLIT,
        observed_together=True,
    ),
    FormatSpec(
        "json",
        (".json",),
        values=partial(read_json_values, document=True),
        peek=peek_document,
        family="JSON",
        read=_json,
        sniff=lambda text, head: text.startswith(b"["),
        json_text=True,
        observed_together=True,
    ),
    FormatSpec(
        "csv",
        (".csv",),
        values=partial(read_csv_cells, tsv=False),
        peek=partial(peek_delimited, tsv=False),
        family="CSV/TSV",
        text_cells=True,
        read=_delimited(tsv=False),
        sniff=_comma_separated,
        header_row=True,
        split=_csv_split(tsv=False),
    ),
    FormatSpec(
        "tsv",
        (".tsv", ".tab"),
        values=partial(read_csv_cells, tsv=True),
        peek=partial(peek_delimited, tsv=True),
        family="CSV/TSV",
        text_cells=True,
        read=_delimited(tsv=True),
        sniff=_tab_separated,
        header_row=True,
        split=_csv_split(tsv=True),
    ),
    FormatSpec(
        "parquet",
        (".parquet", ".pq", ".parq"),
        values=read_parquet_values,
        peek=peek_footer,
        family="Parquet",
        read_path=read_parquet,
        # source: Apache Parquet file format: "PAR1" (or "PARE", encrypted footer) at the start and the end
        magic=(b"PAR1", b"PARE"),
        confirm=has_parquet_magic,
        observed_together=True,
    ),
)

SPECS: dict[Format, FormatSpec] = {s.name: s for s in _TABLE}
FORMAT_BY_SUFFIX: dict[str, Format] = {sfx: s.name for s in _TABLE for sfx in s.suffixes}
OBSERVED_TOGETHER: frozenset[str] = frozenset(s.name for s in _TABLE if s.observed_together)


def spec(fmt: Format) -> FormatSpec:
    """The record of a format.

    >>> spec("tsv").suffixes, spec("parquet").observed_together
    (('.tsv', '.tab'), True)
    """
    return SPECS[fmt]


def suffix_list() -> str:
    """The main suffix of every format, for messages.

    >>> suffix_list()
    '.jsonl .json .csv .tsv .parquet'
    """
    return " ".join(s.suffixes[0] for s in _TABLE)


def detect_format(path: str, *, sniff_unknown: bool = False) -> Format | None:
    """Format from the extension (formats.data_extension); a name without one is sniffed from its
    first bytes, and so is a name with an extension driftline does not read when sniff_unknown is
    set.  Otherwise such a file is only checked by its format's `confirm` (Parquet's magic number at
    both ends: 'x.parquet.encrypted'), which no text file passes by chance: the text in it (.sql,
    .txt, .md) is not taken for CSV.  None: not a data file driftline reads (discovery skips it,
    with skip_reason)."""
    ext = data_extension(path)
    if ext in FORMAT_BY_SUFFIX:
        return FORMAT_BY_SUFFIX[ext]
    if ext is None or sniff_unknown:
        return sniff_format(path)
    return next((s.name for s in _TABLE if s.confirm is not None and s.confirm(path)), None)


def skip_reason(path: str, sniff_unknown: bool = False) -> str:
    """Why detect_format found no format: 'other-extension' (an extension driftline does not read,
    such as .sql or .txt, never opened) or 'unknown-format' (sniffed, and not JSON, CSV or Parquet)."""
    return "other-extension" if data_extension(path) is not None and not sniff_unknown else "unknown-format"


def sniff_format(path: str) -> Format | None:
    """Guess the format of a file whose name says nothing, from its first 4 KiB."""
    raw = head_bytes(path, 4)
    for s in _TABLE:
        if raw in s.magic:
            return s.name
    try:
        with open_stream(path, detect_compression(path), limit=None) as stream:
            head = stream.read(4096)
    except decode_errors():
        return None
    enc = decide(head, whole=len(head) < 4096, fallback=False)
    if not enc.is_utf8:  # UTF-16/32 (sources/encoding.py): sniff the text, not its NUL bytes
        head = head[enc.bom :].decode(enc.name, "ignore").encode()
    text = head.lstrip(b"\xef\xbb\xbf").lstrip()
    return next((s.name for s in _TABLE if s.sniff is not None and s.sniff(text, head)), None)
