"""Lines counted apart from the reader, and every row placed on its line: nothing lost without a word.

`LineTally` sits under a text reader and counts the lines of the bytes that pass (LF line ends,
as every line number in driftline counts them), the blank lines and where they are, and the
carriage returns that end a line without a line feed.  It never parses; it only counts bytes.

`RowLines` then places a CSV reader's rows, in order, on those lines: each row takes one line
plus the line breaks inside its quoted cells, a row set aside (ragged) takes its own, and a
blank line, which Arrow skips without a word, takes one of its own.  That gives each row and
each set-aside row its true line (Arrow numbers records, not lines), and at the end the lines
placed must be the lines counted.  A difference no problem explains is reported itself.
JSON Lines reconcile the same way (`jsonl_issue`): rows, lines set aside and blank lines.
The counting costs one search of the bytes per block beyond the line feed count the reader
makes anyway (none for JSON Lines, whose reader tells the blank lines it skipped).
"""

from __future__ import annotations

import io
import re
from collections import deque
from collections.abc import Sequence
from typing import Any, BinaryIO

import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.files import FileIssue
from driftline.observe.fast.valuebytes import value_view

# A blank line for Arrow's CSV reader, found by the line feed before it: an empty line (or one
# holding only carriage returns, each an empty line of its own).
_BLANK = re.compile(rb"\n(?=\r*\n)")
_START = re.compile(rb"\r*\n")  # the end of a blank line that began before the data
# Where a blank line may start; a regular expression with a literal first byte is the fastest
# search the standard library has for it (a line feed is too common for bytes.find to skip far).
_MAYBE_BLANK = re.compile(b"\n[\n\r]")
# Carriage returns that end a line for Arrow without a line feed, between two pieces of one LF
# line: Arrow cuts it into two rows there.  (A CR next to a line end or another CR only adds
# an empty line, which Arrow skips: "a,b\r\r\n" and "\r1,2\n" are one row each.)
_LONE_CR = re.compile(rb"\r[^\n]")  # the quick test: a CR without its line feed
_SPLITTING_CR = re.compile(rb"(?<=[^\r\n])\r+(?=[^\r\n])")
# In a quoted value the quotes stand before its first byte and after its last one
_CELL_CR = re.compile(rb"(?:^|(?<=[^\r\n]))\r+(?:$|(?=[^\r\n]))")
_CR = re.compile(rb"\r[^\r\n]")
_LONE_CR = re.compile(rb"\r[^\n]")
_CELL_CR = re.compile(rb"\r(?:[^\r\n]|$)")  # in a quoted value, the closing quote follows its last byte
_CR = re.compile(b"\r")


def has_lone_cr(data: bytes | bytearray) -> bool:
    """Whether data holds a carriage return without its line feed (then lines need LineTally's count)."""
    return b"\r" in data and _LONE_CR.search(data) is not None


class LineTally(io.RawIOBase):
    """Lines counted as the bytes of a text file go by, without parsing them.

    Either a binary stream passed through unchanged (JSON Lines), or fed by a reader that
    counts line feeds already (`see`, from csvfile.LineGuard).  mode 'csv' also finds the
    blank lines (see _BLANK) and the CRs that cut lines; 'lines' counts line feeds only.
    """

    def __init__(self, inner: BinaryIO | None, mode: str) -> None:
        self._inner = inner
        self._csv = mode == "csv"  # 'lines': line feeds only (the JSON Lines reader tells its blank lines)
        self.lf = 0  # line feeds seen
        self.blanks: deque[int] = deque()  # line numbers of blank lines, in order
        self.blank_count = 0
        self.splitting_cr = 0  # carriage returns that end a line for Arrow, inside an LF line
        self.first_cr_line: int | None = None
        self._plen: int | None = 0  # bytes of the current line so far while they are all blank, else None
        self._last = b""  # the last byte seen
        self._cr_carry = b""  # the last byte before the CRs that end the data so far, and those CRs

    def readable(self) -> bool:
        return True

    def read(self, n: int = -1) -> bytes:
        assert self._inner is not None
        data = self._inner.read(n)
        self.see(data, self.lf, self.lf + data.count(b"\n"))
        return data

    def readinto(self, buf: Any) -> int:
        data = self.read(len(buf))
        buf[: len(data)] = data
        return len(data)

    def see(self, data: bytes, lf_before: int, lf_after: int) -> None:
        """The next bytes of the file, with the line feeds before them and after them."""
        if not data:
            return
        if not self._csv:
            self.lf, self._last = lf_after, data[-1:]
            return
        # the current line, blank so far, may end blank at the start of data
        if self._plen is not None and _START.match(data) is not None:
            self._blank_line(lf_before + 1)
        if _MAYBE_BLANK.search(data):
            self._find_blanks(data, lf_before)
        if self._last == b"\r" or b"\r" in data:
            self._count_cr(self._cr_carry + data, lf_before - self._cr_carry.count(b"\n"))
        kept = data.rstrip(b"\r")  # the CRs at the end, and the byte before them, judge the next CR
        self._cr_carry = data[len(kept) - 1 :] if kept else self._cr_carry + data
        self.lf = lf_after
        self._last = data[-1:]
        cut = data.rfind(b"\n")
        if cut < 0:  # no line feed: the current line goes on
            if self._plen is not None:
                self._plen = self._plen + len(data) if not data.strip(b"\r") else None
        else:
            tail = data[cut + 1 :]
            self._plen = len(tail) if not tail.strip(b"\r") else None

    def _blank_line(self, line: int) -> None:
        self.blank_count += 1
        self.blanks.append(line)

    def _find_blanks(self, x: bytes, lf_base: int) -> None:
        pos, lf = 0, lf_base
        for m in _BLANK.finditer(x):
            lf += x.count(b"\n", pos, m.end())
            pos = m.end()
            self._blank_line(lf + 1)  # the blank line starts after m's line feed

    def _count_cr(self, x: bytes, lf_base: int) -> None:
        if _LONE_CR.search(x) is None:
            return  # CRLF line ends only (the common case on Windows): one quick search
        m = _SPLITTING_CR.search(x)
        if m is None:
            return
        if self.first_cr_line is None:
            self.first_cr_line = lf_base + x.count(b"\n", 0, m.start()) + 1
        self.splitting_cr += len(_SPLITTING_CR.findall(x, m.start()))

    def lines(self) -> int:
        """Lines so far: line feeds, and a last line without one."""
        return self.lf + (1 if self._last not in (b"", b"\n") else 0)

    def ends_line(self) -> bool:
        """Whether the data so far ends with a line feed."""
        return self._last == b"\n"

    def end(self) -> None:
        """At the end of the data: a last line without a line feed may be blank too ('\\r' alone)."""
        if self._plen and self._csv:
            self._blank_line(self.lf + 1)
        self._plen = None


def _lf_per_row(cells: pa.RecordBatch) -> list[int] | None:
    """Line feeds inside each row's cells; None when no cell holds one (one search per column)."""
    step = None
    for col in cells.columns:
        if re.search(b"\n", value_view(col)) is None:
            continue
        count = pc.fill_null(pc.count_substring(col, "\n"), 0)
        step = count if step is None else pc.add(step, count)
    return None if step is None else step.to_pylist()


def _cell_crs(cells: pa.RecordBatch) -> int:
    total = 0
    for col in cells.columns:
        if _CR.search(value_view(col)) is None:
            continue
        for v in col.to_pylist():
            if v and b"\r" in v:
                total += len(_CELL_CR.findall(v))
    return total


class _Aside:
    __slots__ = ("before", "lf", "issue")

    def __init__(self, before: int, lf: int, issue: FileIssue) -> None:
        self.before, self.lf, self.issue = before, lf, issue


class RowLines:
    """The line of each CSV row and set-aside row, placed in order on a LineTally's lines.

    first_line is the line the first row may start on (the one after the header).  Rows are
    placed as they are observed (`starts`); a set-aside row is named by Arrow's record number,
    which counts rows and set-aside rows but no blank line, and is placed once the rows before
    it are (`ready` gives its issue then, with its line).
    """

    def __init__(self, rel: str, tally: LineTally, first_line: int, names: Sequence[str] = ()) -> None:
        self.rel, self.tally = rel, tally
        self.line = first_line
        self.first_line = first_line
        self.placed = 0  # rows placed
        self.aside = 0  # set-aside rows announced
        self.aside_lines = 0
        # carriage returns inside quoted values, the header's names included
        self.cell_crs = sum(len(_CELL_CR.findall(n.encode("utf-8", "surrogateescape"))) for n in names if "\r" in n)
        self._pending: deque[_Aside] = deque()
        self._ready: list[FileIssue] = []

    def set_aside(self, number: int | None, text: str, message: str, kind: str = "ragged-row") -> None:
        """A row Arrow could not place (called from Arrow's parsing thread, in record order)."""
        before = self.placed if number is None else number - 1 - self.aside
        self.aside += 1
        raw = text.encode("utf-8", "surrogateescape")
        self.cell_crs += len(_CELL_CR.findall(raw))
        self._pending.append(_Aside(before, raw.count(b"\n"), FileIssue(self.rel, kind, message)))

    def ready(self) -> list[FileIssue]:
        """The issues of set-aside rows placed so far, each with its line."""
        self._place_aside()
        out, self._ready = self._ready, []
        return out

    def _skip_blanks(self) -> None:
        blanks = self.tally.blanks
        while blanks and blanks[0] <= self.line:
            if blanks[0] == self.line:
                self.line += 1
            blanks.popleft()

    def _place_aside(self) -> None:
        while self._pending and self._pending[0].before <= self.placed:
            a = self._pending.popleft()
            self._skip_blanks()
            i = a.issue
            self._ready.append(FileIssue(i.file, i.kind, i.message, i.severity, line=self.line))
            self.line += 1 + a.lf
            self.aside_lines += 1 + a.lf

    def starts(self, cells: pa.RecordBatch) -> Sequence[int]:
        """The line each row of cells starts on (the next rows of the file, in order)."""
        n = cells.num_rows
        if self.tally.splitting_cr:
            self.cell_crs += _cell_crs(cells)
        extra = _lf_per_row(cells)
        self._place_aside()
        self._skip_blanks()
        span = n + (sum(extra) if extra else 0)
        blanks, pending = self.tally.blanks, self._pending
        if (not blanks or blanks[0] >= self.line + span) and (not pending or pending[0].before >= self.placed + n):
            start = self.line
            self.line += span
            self.placed += n
            if extra is None:
                return range(start, start + n)
            out, at = [], start
            for e in extra:
                out.append(at)
                at += 1 + e
            return out
        out = []
        for i in range(n):
            self._place_aside()
            self._skip_blanks()
            out.append(self.line)
            self.line += 1 + (extra[i] if extra else 0)
            self.placed += 1
        self._place_aside()
        return out

    def unplaced(self) -> list[FileIssue]:
        """After the reading stopped early: the set-aside rows that could not be placed, without a line."""
        out = self.ready() + [a.issue for a in self._pending]
        self._pending.clear()
        return out

    def finish(self, rows: int) -> list[FileIssue]:
        """The last set-aside rows, then a problem when the lines do not add up."""
        out = self.ready()
        lost_aside = len(self._pending)
        out.extend(a.issue for a in self._pending)  # announced after the last row Arrow gave: unplaceable
        self._pending.clear()
        self.tally.end()
        self._skip_blanks()  # blank lines at the end
        counted = self.tally.lines()
        placed = self.line - 1
        if placed == counted + 1 and self.tally.ends_line():
            placed = counted  # the last value's quote never closed: it took the last line feed in
        blank = self.tally.blank_count
        split = self.tally.splitting_cr - self.cell_crs
        if split > 0:
            where = f"the first on line {self.tally.first_cr_line:,}" if self.tally.first_cr_line else ""
            out.append(
                FileIssue(
                    self.rel,
                    "cr-line-ends",
                    f"{split:,} carriage returns without a line feed end lines outside quoted values ({where}); "
                    "Arrow ends a row at each, so those lines were cut into rows or read into the header: "
                    "rows may be wrong or missing",
                    line=self.tally.first_cr_line,
                )
            )
        elif placed != counted or lost_aside:
            out.append(
                FileIssue(
                    self.rel,
                    "unaccounted-lines",
                    f"{counted:,} lines counted apart from the reader, {placed:,} accounted for (header to line "
                    f"{self.first_line - 1:,}, {rows:,} rows, {self.aside_lines:,} lines of set-aside rows, {blank:,} "
                    f"blank lines): {counted - placed:,} lines unaccounted for; rows may be missing",
                )
            )
        return out


def jsonl_issue(rel: str, tally: LineTally, rows: int, blanks: int, issues: Sequence[FileIssue]) -> FileIssue | None:
    """A problem when a JSON Lines file's lines are not all rows, blank lines the reader skipped, or
    reported lines (the line feeds are counted apart; the reader tells the blank lines it skipped)."""
    aside = sum(1 for i in issues if i.line is not None and i.kind in ("malformed-json", "too-large"))
    counted = tally.lines()
    accounted = rows + aside + blanks
    if counted == accounted:
        return None
    return FileIssue(
        rel,
        "unaccounted-lines",
        f"{counted:,} lines counted apart from the reader, {accounted:,} accounted for ({rows:,} rows, "
        f"{aside:,} lines reported, {blanks:,} blank lines): {counted - accounted:,} lines "
        "unaccounted for; rows may be missing",
    )
