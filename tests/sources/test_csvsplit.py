"""csvsplit: a CSV file read as byte spans gives one reader's result, whatever its bytes.

The spans' own checks are what make a split exact, so they are tested apart from the
planner: spans are cut at arbitrary newlines (inside quotes too) from states that may be
wrong, and whenever the spans say they join, their observations must be the ones
read_file gives; whenever they do not, assemble falls back to read_file.
"""

from __future__ import annotations

import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from driftline.core.options import ReadOptions
from driftline.sources import csvsplit
from driftline.sources.csvsplit import Span, plan, read_span
from driftline.sources.discover import FileRef, discover
from driftline.sources.readers import read_file
from driftline.sources.split import assemble  # csvsplit's, with one reader's result when the spans do not join

SETTINGS = settings(
    max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture]
)


def ref_of(path: Path) -> FileRef:
    return discover([str(path)]).files[0]


def spans_at(ref: FileRef, opts: ReadOptions, cuts: list[int]) -> list[Span] | None:
    """Spans cut at the given offsets, each with the state the quote-parity guess gives it."""
    head = csvsplit._head(ref, opts)
    if head is None:
        return None
    data = Path(ref.path).read_bytes()
    starts = [head.header.size, *sorted({c for c in cuts if head.header.size < c < ref.size})]
    out = []
    for k, start in enumerate(starts):
        before = data[head.header.size : start]
        rows = sum(1 for i, b in enumerate(before) if b == 10 and before[:i].count(b'"') % 2 == 0)
        line = head.header.lines + 1 if k == 0 else 1 + data[:start].count(b"\n")
        out.append(
            Span(ref, head, start, starts[k + 1] if k + 1 < len(starts) else None, line, rows, rows // opts.batch_rows)
        )
    return out


def joined_result(ref: FileRef, opts: ReadOptions, spans: list[Span]) -> bool:
    """Read the spans; when they join, their result must be read_file's.  Returns whether they joined."""
    results = [read_span(s, opts) for s in spans]
    whole = read_file(ref, opts)
    assert assemble(ref, results, opts) == whole
    if not csvsplit._joined(results):
        return False
    got = tuple(o for r in results for o in r.observations)
    assert got == whole.observations
    assert results[0].span.head.warnings == whole.issues
    return True


# Bytes that matter to a CSV reader: delimiters, quotes (stray ones too), every line end,
# blank lines, a character of two bytes, an invalid byte.
_PIECES = ["x", "7", "", ",", ",", '"', '""', '"a\nb"', "\n", "\n", "\n", "\r\n", "\r", "\n\n", "é", "\udcff"]


def _body(pieces: list[str]) -> bytes:
    return "".join(pieces).encode("utf-8", "surrogateescape")


@SETTINGS
@given(
    st.lists(st.sampled_from(_PIECES), max_size=60),
    st.sets(st.integers(0, 200), max_size=6),
    st.integers(1, 3),
    st.booleans(),
)
# a lone CR in what the dialect takes for a preamble (test_lone_cr_before_the_first_row_...)
@example(pieces=["x", "\r", '"a\nb"', ",", "\n", ","], cuts=set(), batch_rows=1, crlf_header=False)
def test_arbitrary_cuts_join_only_when_one_reader_agrees(
    tmp_path_factory: pytest.TempPathFactory, pieces: list[str], cuts: set[int], batch_rows: int, crlf_header: bool
) -> None:
    path = tmp_path_factory.mktemp("c") / "f.csv"
    header = b"a,b\r\n" if crlf_header else b"a,b\n"
    path.write_bytes(header + _body(pieces))
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=batch_rows, max_record_bytes=40)
    newlines = [i + 1 for i, b in enumerate(path.read_bytes()) if b == 10]
    spans = spans_at(ref, opts, [newlines[c % len(newlines)] for c in cuts] if newlines else [])
    if spans is not None:
        joined_result(ref, opts, spans)


def test_lone_cr_before_the_first_row_leaves_the_file_to_one_reader(tmp_path: Path) -> None:
    """The dialect takes the first two lines for a preamble and the third (`b",`) for the header,
    so the lone CR lies before the first row, where no span reads it.  One reader's line count
    covers the whole file and reports it; the spans must not join without it."""
    path = tmp_path / "f.csv"
    path.write_bytes(b'a,b\nx\r"a\nb",\n,')
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=1, max_record_bytes=40)
    whole = read_file(ref, opts)
    # source: RFC 4180 section 2 (rule 2): a line ends with CRLF; a CR alone ends none there,
    # while Arrow's CSV lexer ends a row at it (pyarrow.csv ParseOptions: newlines are CR, LF or CRLF)
    assert [(i.kind, i.line) for i in whole.issues] == [("preamble", 1), ("cr-line-ends", 2)]
    assert csvsplit._head(ref, opts) is None  # no spans: the planner leaves it to one reader
    assert plan(ref, opts, 2) == []


# Cells as a CSV writer makes them (RFC 4180 section 2: quoted fields with commas, doubled
# quotes, line breaks), and what writers get wrong: a quote inside an unquoted field, a
# quote never closed, a blank line, a CR alone, a ragged row, bytes that are not UTF-8.
_CELLS = [
    "x",
    "7",
    "",
    "é",
    '"a,b"',
    '"say ""hi"""',
    '"line\nbreak"',
    '"crlf\r\nin"',
    '"two\n\nlines"',
    '""',
    'x"y',
    '"open',
    "\udcff",
    "a\rb",
]
_ENDS = ["\n", "\n", "\n", "\r\n", "\r", "\n\n", ""]


@st.composite
def csv_body(draw: st.DrawFn, columns: int) -> bytes:
    """Rows of `columns` cells (one more now and then), mostly well formed."""
    odd = draw(st.sampled_from([0, 0, 1, 8]))  # in 100 rows: none in half the files
    cell = st.integers(0, 199).flatmap(lambda r: st.sampled_from(_CELLS if r < odd else _CELLS[:10]))
    width = st.integers(0, 99).map(lambda r: columns + (r < odd))
    row = width.flatmap(lambda n: st.lists(cell, min_size=n, max_size=n))
    end = st.integers(0, 99).flatmap(lambda r: st.sampled_from(_ENDS if r < odd else _ENDS[:4]))
    rows = draw(st.lists(st.tuples(row, end), max_size=40))
    return "".join(",".join(cells) + eol for cells, eol in rows).encode("utf-8", "surrogateescape")


HEADERS = [(b"a,b\n", 2), (b"a,b\r\n", 2), (b'"a","b\nc"\n', 2), (b"a\n", 1), (b"\xef\xbb\xbfa,b\n", 2)]


@SETTINGS
@given(
    st.data(),
    st.sampled_from(HEADERS),
    st.sets(st.integers(0, 200), max_size=6),
    st.integers(1, 3),
    st.sampled_from([12, 1000, 1000]),
)
def test_cuts_between_written_rows(
    tmp_path_factory: pytest.TempPathFactory,
    data: st.DataObject,
    header: tuple[bytes, int],
    cuts: set[int],
    batch_rows: int,
    limit: int,
) -> None:
    path = tmp_path_factory.mktemp("c") / "f.csv"
    path.write_bytes(header[0] + data.draw(csv_body(header[1])))
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=batch_rows, max_record_bytes=limit)
    newlines = [i + 1 for i, b in enumerate(path.read_bytes()) if b == 10]
    spans = spans_at(ref, opts, [newlines[c % len(newlines)] for c in cuts] if newlines else [])
    if spans is not None:
        joined_result(ref, opts, spans)


def _rows(rng: random.Random, n: int, odd: float) -> list[str]:
    """Rows of three columns, RFC 4180 quoting (quoted newlines and quotes), and with
    probability `odd` a row that one of the checks has to catch."""
    out = []
    for i in range(n):
        cells = [
            str(i),
            rng.choice(["1.5", "-3", "2026-02-28", "true", "n/a", ""]),
            rng.choice(["plain", '"a,b"', '"line\nbreak"', '"say ""hi"""', '"two\n\nlines"', "déjà"]),
        ]
        if rng.random() < odd:
            cells[2] = rng.choice(['x"y', '"open', "a\rb", "", "\udcff", "1,2"]) + ("\n" if rng.random() < 0.3 else "")
        out.append(",".join(cells))
    return out


@pytest.mark.parametrize("seed", range(40))
def test_planned_spans_of_generated_files(tmp_path: Path, seed: int) -> None:
    rng = random.Random(seed)
    odd = 0.0 if seed % 4 == 0 else 0.01
    eol = "\r\n" if seed % 5 == 0 else "\n"
    n = rng.randint(20, 400)
    text = "id,v,note" + eol + eol.join(_rows(rng, n, odd)) + rng.choice([eol, ""])
    path = tmp_path / "g.csv"
    path.write_bytes(("\ufeff" if seed % 7 == 0 else "").encode() + text.encode("utf-8", "surrogateescape"))
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=rng.choice([1, 2, 5, 16, 64]), max_record_bytes=rng.choice([64, 10_000]))
    spans = plan(ref, opts, 4)
    if odd == 0.0 and n >= 8 * opts.batch_rows:
        assert len(spans) > 1
    if spans:
        joined = joined_result(ref, opts, spans)
        if odd == 0.0 and opts.max_record_bytes > 64:
            assert joined  # nothing for the checks to catch: the planner's guess holds


def test_a_clean_file_is_read_as_spans_and_joins(tmp_path: Path) -> None:
    rng = random.Random(1)
    path = tmp_path / "c.csv"
    path.write_text("id,v,note\n" + "\n".join(_rows(rng, 3000, 0.0)) + "\n", encoding="utf-8")
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=100)
    spans = plan(ref, opts, 4)
    assert len(spans) == 8  # 2 per part asked for
    assert all(s.rows % 100 == 0 for s in spans)
    assert joined_result(ref, opts, spans)


def test_a_cut_inside_quotes_is_caught(tmp_path: Path) -> None:
    # A stray quote in an unquoted field (kept as a character by the reader) makes every
    # later newline look quoted, then a quoted field's newline look like a row's end.
    path = tmp_path / "s.csv"
    path.write_bytes(b'a,b\n1,x"y\n2,z\n3,"p\nq"\n4,w\n')
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=1)
    inside = path.read_bytes().index(b"p\n") + 2  # after the newline inside "p\nq"
    spans = spans_at(ref, opts, [inside])
    assert spans is not None and not joined_result(ref, opts, spans)
    results = [read_span(s, opts) for s in spans]
    assert not results[0].clean  # its last row ran into the end of the span: the marker row is missing


@pytest.mark.parametrize(
    ("body", "why"),
    [
        (b"1,2\n\n3,4\n5,6\n", "a blank line"),
        (b"1,2\r3,4\n5,6\n", "a CR alone ends a row"),
        (b"1,\xff\n3,4\n5,6\n", "invalid UTF-8"),
        (b"1,2,3\n3,4\n5,6\n", "a ragged row"),
        (b"1," + b"x" * 50 + b"\n3,4\n5,6\n", "a line past max_record_bytes"),
    ],
)
def test_a_span_with_anything_one_reader_reports_does_not_join(tmp_path: Path, body: bytes, why: str) -> None:
    path = tmp_path / "p.csv"
    start = b"a,b\n" + b"0,0\n" * 20  # past what the header's reading looks at (its guard's first read)
    path.write_bytes(start + body)
    ref = ref_of(path)
    opts = ReadOptions(batch_rows=1, max_record_bytes=40)
    cut = len(start) + body.index(b"5,6")
    spans = spans_at(ref, opts, [cut])
    assert spans is not None
    assert not joined_result(ref, opts, spans), why


def test_dense_quotes_and_a_header_with_problems(tmp_path: Path) -> None:
    # Every field quoted (common practice of some writers), then quoted line breaks in every
    # row: the planner counts them a block at a time.
    opts = ReadOptions(batch_rows=100)
    for body in ('"x","y"\n' * 8000, '"x\ny","z"\n' * 8000, '"a""b",c\n' * 8000):  # past _WALK_QUOTES
        quoted = tmp_path / "q.csv"
        quoted.write_text("a,b\n" + body, encoding="utf-8")
        spans = plan(ref_of(quoted), opts, 2)
        assert len(spans) == 4
        assert joined_result(ref_of(quoted), opts, spans)
    bad = tmp_path / "h.csv"
    bad.write_bytes(b"a,\xff\n" + b"1,2\n" * 2000)  # invalid UTF-8 in the header
    assert plan(ref_of(bad), ReadOptions(batch_rows=10), 2) == []


@SETTINGS
@given(st.binary(max_size=300).map(lambda b: bytes(b'"\nx'[c % 3] for c in b)), st.booleans(), st.integers(0, 600))
def test_the_planners_count_either_way(data: bytes, inside: bool, walk: int) -> None:
    # A newline is outside quotes when an even number of quotes precede it (common practice,
    # see RFC 4180 section 2 rule 6): counted quote by quote, or a block at once past `walk`
    # quotes, and found again by halving.
    rows = newlines = 0
    state = inside
    ends = []
    for i, c in enumerate(data):
        if c == 34:
            state = not state
        elif c == 10:
            newlines += 1
            if not state:
                rows += 1
                ends.append(i + 1)
    buf = bytearray(data)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(csvsplit, "_WALK_QUOTES", walk)
        mp.setattr(csvsplit, "_LOCATE_WINDOW", walk % 16)
        assert csvsplit._count(buf, 0, len(buf), inside) == (rows, newlines, state)
        for k in range(1, rows + 1):
            assert csvsplit._locate(buf, 0, len(buf), inside, k) == ends[k - 1]


def test_a_file_gone_before_planning_is_left_to_one_reader(tmp_path: Path) -> None:
    path = tmp_path / "g.csv"
    path.write_text("a,b\n" + "1,2\n" * 1000, encoding="utf-8")
    ref = ref_of(path)
    path.unlink()
    assert plan(ref, ReadOptions(batch_rows=10), 2) == []
    issues = read_file(ref, ReadOptions(batch_rows=10)).issues
    assert [i.kind for i in issues] == ["vanished"]
