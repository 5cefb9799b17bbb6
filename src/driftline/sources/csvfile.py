"""CSV / TSV (RFC 4180 quoting, header row, sniffed delimiter) → observations of text columns.

Cells are read as bytes and checked as UTF-8 here, so one bad cell is reported with its
row instead of failing the whole block; types are inferred later from content classes.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterator
from typing import BinaryIO

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv

from driftline.observe.columnar import observe_table
from driftline.observe.observation import Observation
from driftline.sources.base import FileIssue, ReadOptions

_SNIFF_BYTES = 64 * 1024
_BLOCK = 8 * 1024 * 1024
_MAX_CELL_ISSUES = 20  # per file; the count of further ones is reported once

Item = Observation | FileIssue


def sniff_delimiter(head: bytes, default: str = ",") -> str:
    """The delimiter of a CSV sample: one of , ; TAB |.

    >>> sniff_delimiter(b"a;b;c\\n1;2;3\\n")
    ';'
    """
    text = head.decode("utf-8", "replace")
    try:
        return csv.Sniffer().sniff(text, delimiters=",;\t|").delimiter
    except csv.Error:
        return default


def _header(head: bytes, delimiter: str) -> list[str] | None:
    text = head.decode("utf-8", "replace").lstrip("\ufeff")
    try:
        return next(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
    except (StopIteration, csv.Error):
        return None


def _unique(names: list[str]) -> list[str]:
    seen: dict[str, int] = {}
    out = []
    for name in names:
        n = seen.get(name, 0) + 1
        seen[name] = n
        out.append(name if n == 1 else f"{name}_{n}")
    return out


def read_csv(stream: BinaryIO, rel: str, opts: ReadOptions, *, tsv: bool = False) -> Iterator[Item]:
    """Stream a delimited text file in batches of at most opts.batch_rows rows."""
    buffered = io.BufferedReader(stream, buffer_size=_SNIFF_BYTES) if not isinstance(stream, io.BufferedReader) else stream  # type: ignore[arg-type]
    head = buffered.peek(_SNIFF_BYTES)[:_SNIFF_BYTES]
    if not head.strip():
        yield FileIssue(rel, "empty", "empty file: no header and no rows", "warning", line=1, byte_offset=0)
        return
    if head.startswith(b"\xef\xbb\xbf"):
        yield FileIssue(rel, "bom", "UTF-8 byte order mark at the start of the file; ignored", "warning", line=1, byte_offset=0)
    first_line = head.split(b"\n", 1)[0]
    if first_line.endswith(b"\r"):
        yield FileIssue(rel, "crlf", "CRLF line ends; read as LF", "warning", line=1, byte_offset=len(first_line) - 1)
    delimiter = opts.delimiter or ("\t" if tsv else sniff_delimiter(head))
    names = _header(head, delimiter)
    if not names:
        yield FileIssue(rel, "malformed-csv", "no header row could be read", line=1, byte_offset=0)
        return
    names = _unique(names)
    header_lines = 1 + sum(n.count("\n") for n in names)
    ragged: list[FileIssue] = []

    def on_invalid(row: pcsv.InvalidRow) -> str:
        ragged.append(
            FileIssue(
                rel,
                "ragged-row",
                f"expected {row.expected_columns} fields, found {row.actual_columns}; row skipped",
                line=row.number,
            )
        )
        return "skip"

    try:
        reader = pcsv.open_csv(
            buffered,
            read_options=pcsv.ReadOptions(use_threads=False, block_size=_BLOCK, column_names=names, skip_rows=1),
            parse_options=pcsv.ParseOptions(delimiter=delimiter, newlines_in_values=True, invalid_row_handler=on_invalid),
            convert_options=pcsv.ConvertOptions(column_types={n: pa.binary() for n in names}, strings_can_be_null=False, quoted_strings_can_be_null=False),
        )
    except pa.ArrowInvalid as exc:
        yield FileIssue(rel, "malformed-csv", f"cannot parse: {exc}", line=1)
        return
    state = _CsvState(rel, opts, header_lines)
    pending: list[pa.RecordBatch] = []
    pending_rows = 0
    while True:
        try:
            rb = reader.read_next_batch()
        except StopIteration:
            break
        except (pa.ArrowInvalid, OSError, EOFError) as exc:
            yield from ragged
            yield FileIssue(rel, "malformed-csv", f"parsing stopped: {exc}", line=state.line, row=state.rows)
            break
        yield from ragged
        ragged.clear()
        pending.append(rb)
        pending_rows += rb.num_rows
        while pending_rows >= opts.batch_rows:
            table = pa.Table.from_batches(pending).combine_chunks()
            yield from state.observe(table.slice(0, opts.batch_rows))
            rest = table.slice(opts.batch_rows)
            pending = rest.to_batches()
            pending_rows = rest.num_rows
    yield from ragged
    if pending_rows:
        yield from state.observe(pa.Table.from_batches(pending).combine_chunks())


class _CsvState:
    def __init__(self, rel: str, opts: ReadOptions, header_lines: int) -> None:
        self.rel, self.opts = rel, opts
        self.rows = 0
        self.batch = 0
        self.line = header_lines + 1  # line of the next row (exact unless blank or ragged lines intervene)
        self.cell_issues = 0
        self.issues: list[FileIssue] = []

    def observe(self, table: pa.Table) -> Iterator[Item]:
        columns = [self._decode(name, col.combine_chunks()) for name, col in zip(table.column_names, table.columns, strict=True)]
        yield from self.issues
        self.issues.clear()
        text = pa.Table.from_arrays(columns, names=table.column_names)
        lines = self._lines(table)
        yield observe_table(text, file=self.rel, batch=self.batch, row_start=self.rows, lines=lines, text_source=True)
        self.rows += table.num_rows
        self.batch += 1

    def _decode(self, name: str, arr: pa.Array) -> pa.Array:
        try:
            return arr.cast(pa.string())
        except pa.ArrowInvalid:
            pass
        # Rare path: find the bad cells one by one, report them, keep the rest of the column.
        fixed: list[str | None] = []
        for i, v in enumerate(arr.to_pylist()):
            if v is None:
                fixed.append(None)
                continue
            try:
                fixed.append(v.decode("utf-8"))
            except UnicodeDecodeError as exc:
                fixed.append(v.decode("utf-8", "replace"))
                self.cell_issues += 1
                if self.cell_issues <= _MAX_CELL_ISSUES:
                    self.issues.append(
                        FileIssue(
                            self.rel,
                            "invalid-utf8",
                            f"column {name!r}: invalid UTF-8 at byte {exc.start} of the cell; read with U+FFFD",
                            row=self.rows + i,
                        )
                    )
        return pa.array(fixed, pa.string())

    def _lines(self, table: pa.Table) -> list[int]:
        # Each row starts one line after the previous one, plus the newlines inside its cells.
        if table.num_rows == 0:
            return []
        step = pa.array([1] * table.num_rows, pa.int64())
        for col in table.columns:
            step = pc.add(step, pc.fill_null(pc.count_substring(col.combine_chunks(), "\n"), 0))
        ends = pc.cumulative_sum(step).to_pylist()
        starts = [self.line] + [self.line + e for e in ends[:-1]]
        self.line += ends[-1]
        return starts
