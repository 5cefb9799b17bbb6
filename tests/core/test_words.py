"""Counts in words: the helper, and real messages at 1 and at 2 of what they count."""

from __future__ import annotations

import io

import pytest
from rich.console import Console

import driftline
from conftest import write_lines
from driftline.core.words import count, plural
from driftline.emit.terminal import overview
from driftline.gate.baseline import baseline_from_json_schema
from driftline.gate.compare import compare
from driftline.gate.verdict import render

# source: English grammar (any style guide, e.g. the Chicago Manual of Style 7.5): the singular
# for exactly one, the plural for zero and for more than one; irregular plurals are spelled out.
CASES = [
    (1, "file", None, "1 file"),
    (0, "file", None, "0 files"),
    (2, "file error", None, "2 file errors"),
    (1, "file error", None, "1 file error"),
    (1, "entry", "entries", "1 entry"),
    (3, "entry", "entries", "3 entries"),
    (1234567, "row", None, "1,234,567 rows"),
]


@pytest.mark.parametrize(("n", "noun", "many", "expected"), CASES)
def test_count_agrees_with_its_number(n, noun, many, expected):
    assert count(n, noun, many) == expected


def test_plural_is_the_noun_alone():
    assert (plural(1, "value"), plural(2, "value"), plural(2, "entry", "entries")) == ("value", "values", "entries")


SCHEMA = {"type": "object", "required": ["id"], "properties": {"id": {"type": "integer"}}}


def _verdict_text(tmp_path, lines):
    write_lines(tmp_path / "d" / "part-0.jsonl", lines)
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(SCHEMA, source="contract"))
    buf = io.StringIO()
    render(v, Console(file=buf, width=200, color_system=None))
    return v, buf.getvalue()


def test_verdict_messages_at_one_and_two(tmp_path):
    v1, text1 = _verdict_text(tmp_path / "one", ['{"id": "x"}'])
    v2, text2 = _verdict_text(tmp_path / "two", ['{"id": "x"}', '{"id": "y"}'])
    assert text1.splitlines()[0] == "FAIL  1 violation, 0 warnings"
    assert text2.splitlines()[0] == "FAIL  1 violation, 0 warnings"
    assert v1.violations[0].message == ("1 value of type string in 1 file, which the baseline type int64 cannot hold")
    assert v2.violations[0].message == ("2 values of type string in 1 file, which the baseline type int64 cannot hold")
    assert "1 file (1 read, 0 from state), 1 row, 1 field" in text1
    assert "1 file (1 read, 0 from state), 2 rows, 1 field" in text2


def test_the_pass_line_counts_in_the_fail_line_order(tmp_path):
    _, text = _verdict_text(tmp_path, ['{"id": 1}'])
    assert text.splitlines()[0] == "PASS  0 violations, 0 warnings"


def _overview_line(root):
    return overview(driftline.scan(root)).plain.splitlines()[1]


def test_scan_overview_at_one_and_two(tmp_path):
    write_lines(tmp_path / "one" / "a.jsonl", ['{"id": 1}', "{not json"])
    write_lines(tmp_path / "two" / "a.jsonl", ['{"id": 1, "t": 2}', "{not json"])
    write_lines(tmp_path / "two" / "b.jsonl", ['{"id": 1}', '{"id": 2}', "[1"])
    one = _overview_line(tmp_path / "one")
    two = _overview_line(tmp_path / "two")
    assert one.startswith("1 file (1 jsonl), 1 row, ")
    assert ", 1 field, 0 skipped, 1 file error, " in one
    assert two.startswith("2 files (2 jsonl), 3 rows, ")
    assert ", 2 fields, 0 skipped, 2 file errors, " in two
