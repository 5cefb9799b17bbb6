"""observe.linetext: what the raw text of JSON lines tells, checked on hand-written lines.

Every answer here decides only which rows the JSON fast path sets aside or walks; the
differential test (test_fastpath_differential.py) checks that the reports never change.
These tests pin the answers themselves, so that a faster search finds the same rows.
"""

from __future__ import annotations

import pyarrow as pa

from driftline.observe import linetext


def _joined(lines: list[bytes]) -> bytes:
    return b"\n".join(lines) + b"\n"


# -- matching: the rows a remembered pattern finds, in one pass over the joined lines ----


def test_matching_finds_the_kind_after_the_key_with_any_json_whitespace() -> None:
    # source: RFC 8259 section 2: space, horizontal tab, line feed and carriage return may
    # surround the name separator ':'; within one line only the first three can occur
    # (a line feed ends the line in JSON Lines, source: JSON Lines format, jsonlines.org).
    lines = [b'{"t":"a"}', b'{"t": "a"}', b'{"t"\t:\t"a"}', b'{"t" \r: "a"}', b'{"t": ["a"]}', b'{"t":1}']
    assert linetext.matching(_joined(lines), ('"t"', "string"), 10) == {0, 1, 2, 3}
    assert linetext.matching(_joined(lines), ('"t"', "array"), 10) == {4}
    assert linetext.matching(_joined(lines), ('"t"', "number"), 10) == {5}


def test_matching_each_kind_by_its_first_character() -> None:
    # source: RFC 8259 sections 3-7: a value starts with '"' (string), '[' (array),
    # '{' (object), '-' or a digit (number), 't'/'f' (true/false) or 'n' (null).
    lines = [
        b'{"k": "s"}',
        b'{"k": [1]}',
        b'{"k": {"a": 1}}',
        b'{"k": -1}',
        b'{"k": 7}',
        b'{"k": true}',
        b'{"k": false}',
        b'{"k": null}',
    ]
    data = _joined(lines)
    found = {
        kind: linetext.matching(data, ('"k"', kind), 10)
        for kind in ("string", "array", "object", "number", "boolean", "null")
    }
    assert found == {"string": {0}, "array": {1}, "object": {2}, "number": {3, 4}, "boolean": {5, 6}, "null": {7}}


def test_matching_a_key_as_a_value_or_escaped_is_not_a_hit() -> None:
    # The key's text as a string value is followed by ',' or '}' (not ':'); an escaped key
    # (RFC 8259 section 7: "\u0074" is "t") is not the key's text at all.  Those rows are
    # found by Arrow's error instead, if they hold the odd kind.
    lines = [b'{"a": "t", "b": "x"}', b'{"\\u0074": "x"}', b'{"note": "\\"t\\": \\"x\\""}', b'{"t": "x"}']
    assert linetext.matching(_joined(lines), ('"t"', "string"), 10) == {3}


def test_matching_finds_the_name_at_any_depth() -> None:
    # The pattern knows a name, not a path: a nested field of the same name is found too.
    # Setting such a row aside costs time only (it is observed apart, exactly).
    lines = [b'{"t": [1]}', b'{"s": {"t": "x"}}', b'{"t": [2]}']
    assert linetext.matching(_joined(lines), ('"t"', "string"), 10) == {1}


def test_matching_counts_a_row_once_and_stops_past_the_limit() -> None:
    lines = [b'{"t": "a", "u": {"t": "b"}}', b'{"t": [1]}', b'{"t": "c"}', b'{"t": "d"}']
    data = _joined(lines)
    assert linetext.matching(data, ('"t"', "string"), 3) == {0, 2, 3}
    assert linetext.matching(data, ('"t"', "string"), 2) is None
    assert linetext.matching(b"", ('"t"', "string"), 0) == set()


def test_matching_a_name_with_regex_characters_and_non_ascii() -> None:
    lines = [b'{"a.b*": "x"}', b'{"aXb*": "x"}', '{"é": "x"}'.encode()]
    data = _joined(lines)
    assert linetext.matching(data, ('"a.b*"', "string"), 10) == {0}
    assert linetext.matching(data, ('"é"', "string"), 10) == {2}


# -- conflict_rows: the rows of the rarer kind Arrow's message names ---------------------


def test_conflict_rows_of_the_rarer_kind_within_some_rows() -> None:
    lines = [b'{"t": 1}', b'{"t": "a"}', b'{"t": 2}', b'{"t": 3}', b'{"t": "b"}', b'{"t": 4}']
    arr = pa.array(lines, pa.binary())
    why = "JSON parse error: Column(/t) changed from number to string in row 1"
    # pyarrow's JSON reader message for a field of two kinds (pyarrow 26.0.1).
    assert linetext.conflict_rows(arr, why) == ({1, 4}, ('"t"', "string"))
    # Over rows 1, 2 and 4 only, the number is the rarer kind.
    assert linetext.conflict_rows(arr, why, pa.array([1, 2, 4], pa.int64())) == ({2}, ('"t"', "number"))
    assert linetext.conflict_rows(arr, "JSON parse error: Column(/a) was specified twice in row 0") is None


# -- odd_rows: lines the fast path walks, or that send the batch to the exact walk --------


def test_odd_rows_with_the_joined_lines() -> None:
    good = [b'{"a": 1}', '{"a": "déjà 😀"}'.encode()]
    assert linetext.odd_rows(good, pa.array(good, pa.binary()), _joined(good)) == set()
    scalar = [*good, b"[1, 2]", b"7"]
    assert linetext.odd_rows(scalar, pa.array(scalar, pa.binary()), _joined(scalar)) == {2, 3}
    # source: RFC 3629 section 3: 0xFF never appears in UTF-8; a lone continuation byte
    # (0x80) and a truncated sequence (0xC3 at the end of a line) are invalid too.
    for bad in (b'{"a": "\xff"}', b'{"a": "\x80"}', b'{"a": "\xc3"}'):
        lines = [*good, bad]
        assert linetext.odd_rows(lines, pa.array(lines, pa.binary()), _joined(lines)) is None
    # A multi-byte character split across two lines is invalid in each of them.
    split = [b'{"a": "x\xc3', b'\xa9"}']
    assert linetext.odd_rows(split, pa.array(split, pa.binary()), _joined(split)) is None
    for reported in (b'{"a": 1}\r', b"", b"  ", b"\xef\xbb\xbf{}", b"[1,]"):
        lines = [*good, reported]
        assert linetext.odd_rows(lines, pa.array(lines, pa.binary()), _joined(lines)) is None


def test_odd_rows_deep_lines_are_walked() -> None:
    deep = b'{"a": ' + b"[" * 600 + b"]" * 600 + b"}"
    lines = [b'{"a": 1}', deep, b'{"a": "' + b"x" * 1000 + b'"}']
    assert linetext.odd_rows(lines, pa.array(lines, pa.binary()), _joined(lines)) == {1}
