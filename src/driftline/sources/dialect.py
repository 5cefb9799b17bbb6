"""CSV dialect finding: line ends, delimiter, quoting, header and preamble, from a bounded sample.

Every choice is made from the evidence of many rows, never from the first line alone:

- line ends: the counts of CRLF, lone CR and lone LF in the sample;
- delimiter and quoting: each candidate parses the sample (Python's csv module, linear in
  its size); the winner gives the most rows of one field count, a header line of that count
  (or one less: a row-name column), and more fields when two are as consistent;
- quoting: a quote character is used when fields wrapped in it are seen or when only it
  makes the field counts agree; a field that starts with a quote but does not end with one
  (a title such as `"Heroes" season 1`) is evidence of none.  With no quote in the sample,
  CSV follows RFC 4180 (double quotes) and TSV the IANA text/tab-separated-values
  registration (no quoting at all);
- header: each column's values below the first row are typed (integer, number, date, text);
  a first row that fits the types of the rows below it is data, a text cell above numbers
  is a name.  With no typed column the first row is taken as the header (common practice);
- preamble and comments: title and note lines before the first line of the table's width
  are skipped; lines starting with `#` are comments wherever they are, when the sample
  shows them below the header or before it.

The cost is bounded: SAMPLE_BYTES of the file (plus the first line whole, up to the record
limit), a fixed number of candidate parses, each linear.  A user may pin any part per glob
(`--csv-dialect`); the rest is still found from the data.
"""

from __future__ import annotations

import csv
import re
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from driftline.core.dialectpin import Pin, parse_pin, pin_for
from driftline.core.stagetime import staged
from driftline.core.textfile import Dialect

__all__ = ["Dialect", "Finding", "Pin", "find_dialect", "header_votes", "parse_pin", "pin_for", "positional_name"]

SAMPLE_BYTES = 1 << 20  # what the finder reads of a file (more only to hold the first line whole)
MAX_PREAMBLE = 64  # lines before the header that may be skipped as a preamble
_HEAD_LINES = MAX_PREAMBLE + 2
_TYPED_ROWS = 300  # body rows whose cells are typed for the header decision
# Candidates in order of preference when the evidence is equal; space only as a last resort.
DELIMITERS = (",", "\t", ";", "|", ":", "^", "~")
_SPACE = " "
ROW_NAME_COLUMN = "row_name"


def positional_name(i: int) -> str:
    """The name of column i (0-based) of a file without a header: column_1, column_2, …"""
    return f"column_{i + 1}"


# -- the sample --------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Finding:
    """A dialect, and where the table starts in the sample (after any byte order mark)."""

    dialect: Dialect
    names: tuple[str, ...] | None  # the header's names (None: no header)
    width: int  # fields per row
    start_lines: int  # lines before the first row: preamble and header
    start_bytes: int  # their bytes
    stray_quote: bool  # the header line opens a quote it never closes; it was read alone


def line_end_of(sample: bytes) -> str:
    """LF, CRLF or CR, by count: a file of lone CRs (old spreadsheet exports) is CR."""
    crlf = sample.count(b"\r\n")
    cr = sample.count(b"\r") - crlf
    lf = sample.count(b"\n") - crlf
    if cr > lf + crlf:
        return "CR"
    return "CRLF" if crlf > lf else "LF"


def _lines(text: str, line_end: str) -> list[str]:
    """The sample's lines, each with its line end, for the csv module.  In a CR file every CR
    ends a line (the reader turns it into LF); elsewhere a lone CR, which the csv module
    refuses outside quotes, stands in as _LONE_CR (one character for one)."""
    text = text.replace("\r", "\n") if line_end == "CR" else re.sub("\r(?!\n)", _LONE_CR, text)
    parts = text.split("\n")  # not splitlines(): it also ends lines at \v, \f, U+2028 …
    return [p + "\n" for p in parts[:-1]] + ([parts[-1]] if parts[-1] else [])


_LONE_CR = "\ue000"  # a private-use character


def _reader(lines: Iterable[str], delimiter: str, quote: str | None, escape: str | None) -> Any:
    if quote is None:
        return csv.reader(lines, delimiter=delimiter, quoting=csv.QUOTE_NONE, escapechar=escape, strict=False)
    return csv.reader(lines, delimiter=delimiter, quotechar=quote, escapechar=escape, doublequote=True, strict=False)


def _counts(lines: Sequence[str], delimiter: str, quote: str | None, escape: str | None) -> list[int]:
    try:
        return [len(r) for r in _reader(lines, delimiter, quote, escape) if r]
    except csv.Error:  # a field longer than the csv module's limit: a candidate without evidence
        return []


def _first_record(lines: Sequence[str], at: int, dialect: tuple[str, str | None, str | None]) -> tuple[list[str], int]:
    """The record starting at line `at` and the lines it spans (at least one).  A record is
    looked for in _HEAD_LINES lines at most: the cost stays bounded whatever quotes do."""
    reader = _reader(iter(lines[at : at + _HEAD_LINES]), *dialect)
    try:
        rec: list[str] = next(reader, [])
    except csv.Error:
        return [], 1
    return rec, max(reader.line_num, 1)


@dataclass(slots=True)
class _Candidate:
    delimiter: str
    quote: str | None
    escape: str | None
    width: int = 0
    share: float = 0.0  # body rows of `width` fields over all body rows
    cover: float = 0.0  # lines the reading explains (header and rows of `width`) over all non-blank lines
    rows: int = 0
    fit: int = 0  # 2: the header has `width` names, 1: one fewer (row names), 0: neither
    skip: int = 0
    header: list[str] | None = None
    header_lines: int = 1
    stray: bool = False
    comments: int = 0  # lines starting with '#' below the header, of another width than the rows
    hash_rows: int = 0  # lines starting with '#' below the header that are as wide as the rows: data

    @property
    def key(self) -> tuple[str, str | None, str | None]:
        return self.delimiter, self.quote, self.escape


def _is_comment(line: str) -> bool:
    return line.lstrip().startswith("#")


_COMMENT_LINE = re.compile(r"^[ \t]*#", re.M)


def _without_comments(lines: Sequence[str]) -> Sequence[str]:
    if not _COMMENT_LINE.search("".join(lines)):
        return lines  # the common case: one search
    return [line for line in lines if not _is_comment(line)]


def _judge(c: _Candidate, lines: Sequence[str], skip: int | None, header: str | None) -> _Candidate:
    """Field counts, table start and header record of one candidate."""
    head = [(i, len(r)) for i, r in enumerate(_per_line(lines[:_HEAD_LINES], c.key)) if r]
    widths = Counter(n for i, n in head if not _is_comment(lines[i]))
    guess = widths.most_common(1)[0][0] if widths else 1
    for _ in range(2):  # once with the width of the first lines, again with the body's if it differs
        start = skip if skip is not None else _table_start(lines, head, guess, header, c.key)
        rec, span = _first_record(lines, start, c.key)
        stray = False
        if span > 1 and len(rec) not in (guess, guess - 1):
            # an opening quote never closed (or closed far below): the header line alone, its
            # quotes taken as characters
            rec, span, stray = _alone(lines[start], (c.delimiter, None, c.escape)), 1, True
        body = _without_comments(lines[start + span :])
        counts = _counts(body, *c.key)
        width = Counter(counts).most_common(1)[0][0] if counts else len(rec)
        if width == guess or counts == []:
            break
        guess = width
    if len(rec) == width + 1 and not rec[-1].strip():
        rec = rec[:-1]  # a header line ending with the delimiter above rows that do not
    c.width, c.rows = width, len(counts)
    if len(body) < len(lines) - start - span:  # '#' lines: comments, unless as wide as the rows
        hashed = [len(_alone(x, c.key)) for x in lines[start + span :] if _is_comment(x)]
        c.hash_rows = sum(1 for n in hashed if n == width)
        c.comments = len(hashed) - c.hash_rows
    # rows as wide as a longer header are explained too: rows short of trailing empty fields
    explained = sum(1 for n in counts if n == width or (n == len(rec) > width))
    c.share = explained / len(counts) if counts else (1.0 if len(rec) > 1 else 0.0)
    row_names = len(rec) == width - 1 and len(rec) >= 2 and header != "no"
    longer = len(rec) > width and header != "no"
    c.fit = 2 if len(rec) == width else 1 if row_names or longer or header == "row-names" else 0
    c.skip, c.header, c.header_lines, c.stray = start, rec, span, stray
    # a skipped line is one the reading could not explain, unless the user said to skip it
    skipped = 0 if skip is not None else sum(1 for i, _ in head if i < start)
    c.cover = (explained + (c.fit > 0)) / (len(counts) + 1 + skipped)
    return c


def _per_line(lines: Sequence[str], key: tuple[str, str | None, str | None]) -> list[list[str]]:
    return [_alone(line, key) for line in lines]


def _alone(line: str, key: tuple[str, str | None, str | None]) -> list[str]:
    try:
        return next(_reader([line], *key), [])
    except csv.Error:
        return []


def _table_start(
    lines: Sequence[str],
    head: list[tuple[int, int]],
    width: int,
    header: str | None,
    key: tuple[str, str | None, str | None],
) -> int:
    """The first line of the table: past comment lines and title lines of another width, the
    first record of `width` fields (or one fewer: row names) followed by one of `width`.
    Records, not lines: a quoted field may hold a line break.  A record that opens a quote it
    never closes is tried as its line alone, its quotes taken as characters."""
    want = (width, width - 1, width + 1) if header != "no" else (width,)
    passed = False  # a line that could have been the header was passed over
    for i, n in head:
        if i > MAX_PREAMBLE:
            break
        if _is_comment(lines[i]) or (n == 1 and width == 2 and header != "row-names"):
            continue
        rec, span = _first_record(lines, i, key)
        if not _fits_width(rec, want, width):
            rec, span = _alone(lines[i], (key[0], None, key[2])), 1
            if not _fits_width(rec, want, width):
                continue
        after, _ = _first_record(lines, _next_line(lines, i + span), key)
        # a line is skipped as a preamble only for a table that has rows below its header
        if (after and len(after) in (width, len(rec))) or (not after and not passed):
            return i
        passed = True
    return next((i for i, _ in head if i <= MAX_PREAMBLE and not _is_comment(lines[i])), 0)


def _fits_width(rec: list[str], want: tuple[int, ...], width: int) -> bool:
    # a header may be wider than the rows (rows short of trailing empty fields)
    return len(rec) in want or (width + 1 in want and len(rec) > width)


def _next_line(lines: Sequence[str], at: int) -> int:
    while at < len(lines) and (not lines[at].strip() or _is_comment(lines[at])):
        at += 1
    return at


# -- cell types for the header ---------------------------------------------------------------

_INT = re.compile(r"[+-]?\d+")
_NUM = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|[+-]?(?:inf|nan)", re.I)
_DATE = re.compile(
    r"\d{4}-\d{1,2}-\d{1,2}(?:[T ][\d:.]+(?:Z|[+-]\d\d:?\d\d)?)?|\d{1,2}/\d{1,2}/\d{2,4}|"
    r"\d{1,2}:\d\d(?::\d\d(?:\.\d+)?)?"
)
_BOOL = {"true", "false", "t", "f", "yes", "no"}


def _kind(cell: str) -> str:
    s = cell.strip()
    if not s:
        return "empty"
    if _INT.fullmatch(s):
        return "int"
    if _NUM.fullmatch(s):
        return "number"
    if _DATE.fullmatch(s):
        return "date"
    if s.lower() in _BOOL:
        return "bool"
    return "text"


def _fits(cell: str, column: str) -> bool:
    kind = _kind(cell)
    return kind == column or (kind == "int" and column == "number")


def header_votes(first: Sequence[str], rows: Sequence[Sequence[str]]) -> tuple[int, int]:
    """(votes for a header, votes for data) from the columns of rows below the first.

    A column whose values below are all of one type (integer, number, date, boolean) votes
    for a header when the first row's cell is text there, for data when it fits; a text
    column of five or more values all of one length votes for a header when the first cell's
    length differs (csv.Sniffer's test), for data when the first cell is one of its values.
    An integer above a column of decimals does not vote (a year as a column name).

    >>> header_votes(["id", "price"], [["1", "2.5"], ["2", "3"]])
    (2, 0)
    >>> header_votes(["155190", "0.5"], [["15519", "0.25"], ["2", "3"]])
    (0, 2)
    >>> header_votes(["country", "1960", "1961"], [["Aruba", "8.41", "8.2"], ["Chad", "", "7.25"]])
    (0, 0)
    """
    yes = no = 0
    for j, cell in enumerate(first):
        values = [r[j] for r in rows if j < len(r) and r[j].strip()]
        if not values or not cell.strip():
            continue
        kinds = {_kind(v) for v in set(values)}
        column = "number" if kinds == {"int", "number"} else next(iter(kinds)) if len(kinds) == 1 else "text"
        if column != "text":
            if column == "number" and _kind(cell) == "int":
                continue  # an integer over decimals may be a name: years above yearly values
            if _fits(cell, column):
                no += 1
            elif _kind(cell) == "text":
                yes += 1
            continue
        lengths = {len(v) for v in values}
        if len(values) >= 5 and len(lengths) == 1 and len(cell) not in lengths:
            yes += 1
        elif len(values) > 1 and cell in set(values):
            no += 1
    return yes, no


# -- the finder ------------------------------------------------------------------------------


@staged("dialect")
def find_dialect(sample: bytes, *, at_end: bool, tsv: bool = False, pin: Pin | None = None) -> Finding:
    """The dialect of a delimited text sample (the file's first bytes, without a byte order mark).

    at_end says the sample is the whole file (else its last, partial line is left out).
    tsv is the format the file name says; it decides quoting when the sample has no quote.

    >>> f = find_dialect(b'id|title|tags\\r1|"Heroes" season 1|{"a": 1, "b": 2}\\r2|Fargo|{}\\r3|"Lost|[]\\r',
    ...                  at_end=True)
    >>> f.dialect.describe(), f.names
    ("'|' no quotes, header, CR (confidence 0.44)", ('id', 'title', 'tags'))
    >>> print(find_dialect(b"155190,0.5\\n15519,0.25\\n2,3\\n", at_end=True).dialect.shape())
    ',' "-quoted, no header, LF
    """
    pin = pin or Pin()
    line_end = pin.lines or line_end_of(sample)
    text = sample.decode("utf-8", "replace")
    lines = _lines(text, line_end)
    if not at_end and len(lines) > 1:
        lines.pop()  # cut short by the sample's end
    best, others = _choose(lines, tsv, pin)
    if pin.skip is None and pin.header is None:
        best = _names_below(lines, best)
    rows = _body_rows(lines, best)
    votes = header_votes(best.header or [], rows) if rows else (0, 0)
    header = pin.header or _header_kind(best, rows, votes)
    skip, span = best.skip, best.header_lines
    found = tuple(n.replace(_LONE_CR, "\r") for n in best.header or ())
    names: tuple[str, ...] | None = found
    width = best.width
    if header == "no":
        names, span = None, 0
    elif header == "row-names":
        width = max(width, len(found) + 1)
    else:
        width = len(found)
    start_lines = skip + span
    confidence = _confidence(best, others, votes, header, pin)
    comment: str | None
    if pin.comment is not False:
        comment = pin.comment if isinstance(pin.comment, str) else None
    else:  # '#' lines below the header, or a preamble of them: the file's comment convention
        # only where no '#' line is as wide as the rows, and a row has more than one field
        seen = best.comments or any(_is_comment(x) for x in lines[:skip])
        comment = "#" if seen and not best.hash_rows and best.width > 1 else None
    dialect = Dialect(
        best.delimiter, best.quote, best.escape, line_end, header, skip, confidence, best.rows, pin.keys(), comment
    )
    return Finding(
        dialect, names, width, start_lines, _line_offset(sample, line_end, start_lines), best.stray and header != "no"
    )


def _choose(lines: Sequence[str], tsv: bool, pin: Pin) -> tuple[_Candidate, list[_Candidate]]:
    """The best candidate, and the runners-up of other delimiters (for the confidence)."""
    delimiters = [pin.delimiter] if pin.delimiter else _present(lines)
    judged = []
    for d in delimiters:
        judged.append(_best_quoting(d, lines, tsv, pin))
    valid = [c for c in judged if c.width >= 2 and c.fit]
    if not valid and not pin.delimiter:
        space = _best_quoting(_SPACE, lines, tsv, pin) if any(_SPACE in x for x in lines[:_HEAD_LINES]) else None
        valid = [space] if space is not None and space.width >= 2 and space.fit and space.cover >= 0.9 else []
    if not valid:  # one column, or nothing fits: the most consistent reading, commas by default
        pool = judged or [_judge(_Candidate(",", _default_quote(tsv, pin), None), lines, pin.skip, pin.header)]
        best = max(
            pool,
            key=lambda c: (c.cover, c.width > 1, -DELIMITERS.index(c.delimiter) if c.delimiter in DELIMITERS else 0),
        )
        if best.width < 2:
            best = _judge(
                _Candidate(pin.delimiter or ("\t" if tsv else ","), _default_quote(tsv, pin), None),
                lines,
                pin.skip,
                pin.header,
            )
        return best, []
    top = max(c.cover for c in valid)
    close = [c for c in valid if c.cover >= top - 0.05]
    order = list(DELIMITERS) + [_SPACE] + [d for d in delimiters if d not in DELIMITERS]
    # nearly as consistent: the one with no preamble to skip, an exact header, more columns
    best = max(close, key=lambda c: (c.skip == 0, c.fit == 2, c.width, -order.index(c.delimiter)))
    return best, [c for c in judged if c is not best and c.width >= 2 and c.fit]


def _present(lines: Sequence[str]) -> list[str]:
    """Candidate delimiters that occur on the first lines (the header is among them)."""
    head = "".join(lines[:_HEAD_LINES])
    return [d for d in DELIMITERS if d in head]


def _default_quote(tsv: bool, pin: Pin) -> str | None:
    if pin.quote is not False:
        return pin.quote  # type: ignore[return-value]
    return None if tsv else '"'


def _best_quoting(d: str, lines: Sequence[str], tsv: bool, pin: Pin) -> _Candidate:
    """The quoting of delimiter d that its rows support (see the module's docstring)."""
    fixed_escape = pin.escape is not False
    escape = pin.escape if fixed_escape else None
    if pin.quote is not False:
        return _judge(_Candidate(d, pin.quote, escape), lines, pin.skip, pin.header)  # type: ignore[arg-type]
    bare = _judge(_Candidate(d, None, None), lines, pin.skip, pin.header)
    wrapped, opened = _quote_starts(lines, d, '"')
    if not wrapped and not opened:
        if tsv:
            single = _single_quoted(d, lines, pin, bare)
            return single or bare
        # no field opens a quote: quoting changes nothing in the sample, RFC 4180 decides
        quoted = replace(bare, quote='"', escape=escape)  # type: ignore[arg-type]
        return _single_quoted(d, lines, pin, bare) or quoted
    quoted = _judge(_Candidate(d, '"', escape), lines, pin.skip, pin.header)  # type: ignore[arg-type]
    if not fixed_escape and '\\"' in "".join(lines):
        escaped = _judge(_Candidate(d, '"', "\\"), lines, pin.skip, pin.header)
        text = "".join(lines)
        if _score(escaped) > _score(quoted) or (
            _score(escaped) == _score(quoted) and text.count('\\"') > text.count('""')
        ):
            quoted = escaped
    if _score(quoted) > _score(bare):
        return quoted
    if _score(quoted) == _score(bare) and wrapped and (not opened or not tsv):
        return quoted  # fields wrapped in quotes, and none only opened: quoting
    return bare


def _single_quoted(d: str, lines: Sequence[str], pin: Pin, bare: _Candidate) -> _Candidate | None:
    """Single quotes, only where the rows need them (apostrophes are common in text)."""
    if not any(_quote_starts(lines, d, "'")):
        return None
    quoted = _judge(_Candidate(d, "'", None), lines, pin.skip, pin.header)
    wrapped, opened = _quote_starts(lines, d, "'")
    better = _score(quoted) > _score(bare) or (_score(quoted) == _score(bare) and wrapped and not opened)
    return quoted if better else None


def _score(c: _Candidate) -> tuple[bool, float, int, bool]:
    return c.fit > 0, round(c.cover, 4), c.fit, not c.stray


def _quote_starts(lines: Sequence[str], d: str, q: str) -> tuple[int, int]:
    """Fields that start with q (at a line's start or after d): wrapped in it (the closing q,
    inner ones doubled, right before d or the line end), or only opened."""
    text = "".join(lines)
    if q not in text:
        return 0, 0
    starts = text.count(d + q) + text.count("\n" + q) + text.startswith(q)
    if not starts:
        return 0, 0
    dq, qq = re.escape(d), re.escape(q)
    wrapped = 0
    for m in re.finditer(f"{qq}(?:[^{qq}]|{qq}{qq})*{qq}(?={dq}|\r?\n|\\Z)", text):
        wrapped += m.start() == 0 or text[m.start() - 1] in (d, "\n")  # at a field's start
    return wrapped, starts - wrapped


_NAMES_BELOW = 3  # lines below the table's first line where a header may still be found


def _names_below(lines: Sequence[str], c: _Candidate) -> _Candidate:
    """A line of names just below the first line of the table's width: a count line above a
    header (scikit-learn's '506,13,,,…' above 'CRIM,ZN,…') is a preamble, not the header.
    Taken when that line reads as names over the rows below it and the first line does not."""
    if c.header and all(_kind(x) == "text" for x in c.header):
        return c  # already a line of names
    at = c.skip + c.header_lines
    for _ in range(_NAMES_BELOW):
        at = _next_line(lines, at)
        if at >= len(lines):
            break
        rec, span = _first_record(lines, at, c.key)
        if len(rec) != c.width:
            break
        below = _body_rows(lines, replace(c, skip=at, header_lines=span))
        yes, no = header_votes(rec, below)
        if yes and not no:
            first_yes, first_no = header_votes(c.header or [], below)
            if first_no or not first_yes:
                return replace(c, skip=at, header=rec, header_lines=span, fit=2)
            break
        at += span
    return c


def _body_rows(lines: Sequence[str], c: _Candidate) -> list[list[str]]:
    body = lines[c.skip + c.header_lines :]
    rows: list[list[str]] = []
    try:
        for r in _reader(body, *c.key):
            if len(r) == c.width:
                rows.append(r)
                if len(rows) >= _TYPED_ROWS:
                    break
    except csv.Error:
        pass
    return rows


def _header_kind(c: _Candidate, rows: list[list[str]], votes: tuple[int, int]) -> str:
    first = c.header or []
    if c.fit == 1 and len(first) == c.width - 1:
        return "row-names"
    if not rows:  # a single line: a header by convention, unless it repeats numbers (names are distinct)
        cells = [x for x in first if x.strip()]
        numbers = all(_kind(x) in ("int", "number") for x in cells)
        return "no" if cells and numbers and len(set(cells)) < len(cells) else "yes"
    yes, no = votes
    return "no" if no > 0 and yes == 0 else "yes"


def _confidence(best: _Candidate, others: list[_Candidate], votes: tuple[int, int], header: str, pin: Pin) -> float:
    """How sure the finder is, in [0, 1]: the product of the evidence for each part.

    delimiter: the share of lines read as the header or a row of the table's width, times
    (n + 1) / (n + 6) for n body rows (few rows are weak evidence), less half the share a
    rival delimiter reached; header: the share
    of column votes it won (0.6 with no vote: a guess by convention).
    """
    keys = pin.keys()
    n = best.rows
    if "delimiter" in keys:
        part_d = 1.0
    else:
        # a rival that needs more lines skipped than the best is a weaker one
        rival = max((o.cover for o in others if o.delimiter != best.delimiter and o.skip <= best.skip), default=0.0)
        part_d = best.cover * ((n + 1) / (n + 6)) * (1 - rival / 2)
    if "header" in keys or header == "row-names":
        part_h = 1.0
    else:
        yes, no = votes
        part_h = max(yes, no) / (yes + no) if yes + no else 0.6
    part_q = 1.0 if best.stray is False else 0.5
    return round(max(0.0, min(1.0, part_d * part_h * part_q)), 2)


def _line_offset(sample: bytes, line_end: str, lines: int) -> int:
    """The byte offset after the first `lines` lines of sample (in a CR file, CR and LF both
    end a line, as they do for the reader)."""
    if line_end == "CR":
        sample = sample.replace(b"\r", b"\n")
    at = 0
    for _ in range(lines):
        nxt = sample.find(b"\n", at)
        if nxt < 0:
            return len(sample)
        at = nxt + 1
    return at
