"""One denominator: a type's share is of the non-null values, null and absent shares are of the
rows, in the terminal, the HTML page and the report's JSON Schema alike, and each says so.
String content classes of JSON strings and of CSV cells are counted apart."""

from __future__ import annotations

import json
import re
from pathlib import Path

from rich.console import Console

import driftline
from conftest import ROOT, write_lines
from driftline.emit import html as html_report
from driftline.emit.terminal import SHARES_NOTE, render
from driftline.results.report import dumps

# 7 lists, then 2 strings, then 1 null: 9 non-null values in 10 rows.
TAGS = ['{"tags": ["a"]}'] * 7 + ['{"tags": "x"}'] * 2 + ['{"tags": null}']
# Counted by hand from the 10 lines above (# common practice: a share is part / whole, one decimal):
# list 7/9 = 77.8 %, string 2/9 = 22.2 %, null 1/10 = 10.0 %. Over all 10 rows the list share
# would read 70.0 %, the number the HTML legend used to give.
WANT = {"list": "77.8%", "string": "22.2%", "null": "10.0%"}
HTML_NULL = "10%"  # the page writes a whole share without its ".0" (svg.pct)


def _terminal(profile: driftline.Profile, width: int) -> str:
    console = Console(record=True, width=width)
    render(profile, console)
    return console.export_text()


def test_terminal_and_html_give_the_same_shares_and_say_of_what(tmp_path: Path) -> None:
    write_lines(tmp_path / "land" / "a.jsonl", TAGS)
    profile = driftline.scan(tmp_path / "land")
    for width in (80, 200):
        text = _terminal(profile, width)
        row = next(line for line in text.splitlines() if re.search(r"(^|[ │])tags ", line))
        assert f"list {WANT['list']} · string {WANT['string']}" in row and WANT["null"] in row
        assert "types (share of non-null)" in text and SHARES_NOTE in text
    page = html_report.render_html(profile)
    # The field table's text, the bar's text alternative and the timeline's legend agree.
    assert f"list {WANT['list']} · string {WANT['string']}" in page
    assert f'aria-label="list {WANT["list"]}, string {WANT["string"]}, null {HTML_NULL}"' in page
    legend = re.findall(r'<g class="key">.*?<text[^>]*>([^<]*)</text></g>', page)
    assert legend == [f"list {WANT['list']}", f"string {WANT['string']}", f"null {HTML_NULL}"]
    said = "share is of the non-null values (nulls excluded); the null and absent shares are of the rows"
    assert said in html_report.SHARES_NOTE
    assert page.count(said) == 2  # the field table's and the timelines' hints (no partitions: no matrix)
    assert "70%" not in page and "70.0%" not in page


def test_report_schema_says_the_denominators() -> None:
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text(encoding="utf-8"))
    stats = schema["$defs"]["stats"]["properties"]
    assert "is of the non-null values: its count over the sum of types, nulls excluded" in stats["types"]["description"]
    assert "The null share is of the rows: nulls / container" in stats["nulls"]["description"]
    assert "JSON strings and CSV cells" in stats["classes"]["description"]


def test_string_content_of_json_strings_and_csv_cells_apart(tmp_path: Path) -> None:
    land = tmp_path / "land"
    write_lines(land / "a.jsonl", ['{"n": "2026-11-28"}', '{"n": "2026-11-29"}'])
    # source: RFC 4180 section 2: fields separated by commas, records by line breaks; the
    # second record's n is the empty field.
    write_lines(land / "b.csv", ["n,m", "5,1", ",2", "7,3", "8,4"])
    profile = driftline.scan(land)
    assert profile.classes_by_source["n"] == {"strings": {"date": 2}, "cells": {"integer": 3, "empty": 1}}
    assert profile.classes_by_source["m"] == {"cells": {"integer": 4}}
    text = _terminal(profile, 200)
    n_rows = [line for line in text.splitlines() if "strings: date" in line or "CSV cells: integer 75.0%" in line]
    assert len(n_rows) == 2  # one line per source, each share of its own count: 3 of 4 cells, 2 of 2 strings
    assert "strings: date 100.0%" in n_rows[0] and "CSV cells: integer 75.0%, empty 25.0%" in n_rows[1]
    assert "CSV cells: integer 100.0%" in text
    report = json.loads(dumps(profile))
    assert report["fields"]["n"]["classes"] == {"empty": 1, "integer": 3, "date": 2}
    assert report["fields"]["n"]["classes_by_source"] == profile.classes_by_source["n"]
