"""Verdict renderings: JUnit XML (parsed back with xml.etree), JSON and the terminal."""

from __future__ import annotations

import io
import json
import xml.etree.ElementTree as ET

from rich.console import Console

import driftline
from conftest import write_lines
from driftline.gate.baseline import baseline_from_json_schema, load_baseline
from driftline.gate.compare import compare
from driftline.gate.policy import RULES, Policy
from driftline.gate.verdict import junit_xml, render

SCHEMA = {
    "type": "object",
    "required": ["id"],
    "properties": {"id": {"type": "integer"}, "t": {"type": "number"}, "at": {"type": "string", "format": "date-time"}},
}


def _verdict(tmp_path, lines, policy=None):
    write_lines(tmp_path / "d" / "day=3" / "part-0.jsonl", lines)
    return compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(SCHEMA, source="contract"), policy)


def test_junit_has_one_case_per_rule_and_the_failures(tmp_path):
    v = _verdict(
        tmp_path,
        [
            '{"id": 1.5, "t": 1.5, "at": "2026-11-30T00:00:00Z"}',
            '{"id": "17b", "t": 2, "at": "2026-11-30 00:00:00Z", "extra": 1}',
        ],
        Policy(widening="warn"),
    )
    root = ET.fromstring(junit_xml(v))
    # common practice: the JUnit XML of Ant's junit task as the Jenkins junit-4.xsd describes it —
    # <testsuites> holding <testsuite name tests failures errors skipped>, <testcase name classname>,
    # <failure message type>, <skipped message>, <system-out>, <properties><property name value>.
    assert root.tag == "testsuites"
    [suite] = root.findall("testsuite")
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == list(RULES)
    assert {c.get("classname") for c in cases} == {"driftline.check"}
    failed = [c for c in cases if c.find("failure") is not None]
    assert [c.get("name") for c in failed] == ["type_change"]
    failure = failed[0].find("failure")
    assert failure.get("type") == "type_change"
    assert failure.get("message") == (
        "1 violation; first: id: int64 → string — 1 value of type string in 1 file, which the baseline type "
        'int64 cannot hold at day=3/part-0.jsonl, partition day=3, row 1 (line 2), e.g. "17b"'
    )
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors")) == (str(len(RULES)), "1", "0")
    skipped = {c.get("name"): c.find("skipped").get("message") for c in cases if c.find("skipped") is not None}
    assert skipped["narrowing"] == "allowed by the policy (0 changes seen)"
    assert skipped["cast_loss"] == "the baseline declares no cast rules"
    assert suite.get("skipped") == str(len(skipped))
    outs = {c.get("name"): c.find("system-out").text for c in cases if c.find("system-out") is not None}
    assert outs["widening"] == (
        "warning: id: int64 → float64 — 1 value of type float64 in 1 file widen the "
        "baseline type at day=3/part-0.jsonl, partition day=3, row 0 (line 1), e.g. 1.5"
    )
    assert set(outs) == {"widening", "new_field", "content_class"}
    props = {p.get("name"): p.get("value") for p in suite.find("properties")}
    assert (props["baseline"], props["files"], props["violations"]) == ("contract", "1", "1")


def test_control_characters_in_names_stay_out_of_the_xml_and_the_terminal(tmp_path):
    v = _verdict(tmp_path, ['{"id": 1, "bad\\u0001\\u001b[31mname": "\\u0007x"}'])
    raw = junit_xml(v)
    # source: XML 1.0 (Fifth Edition) §2.2 Char — #x1-#x8, #x1B are not allowed characters;
    # the document must still parse.
    root = ET.fromstring(raw)
    assert b"\x01" not in raw and b"\x1b" not in raw
    text = "".join(root.itertext())
    assert "bad\\x01\\x1b[31mname" in text
    buf = io.StringIO()
    render(v, Console(file=buf, width=200, color_system=None))
    shown = buf.getvalue()
    assert "\x1b" not in shown and "\x07" not in shown
    # The example is the value's JSON text, where the scan already wrote the BEL as \u0007.
    assert "`bad\\x01\\x1b[31mname`: new field (string)" in shown and 'value "\\u0007x"' in shown


def test_terminal_shows_the_verdict_first_then_each_violation(tmp_path):
    at = {"at": "2026-11-30T00:00:00Z"}
    v = _verdict(tmp_path, [json.dumps(r | at) for r in ({"id": 1}, {"id": "17b"}, {"t": 3})])
    buf = io.StringIO()
    render(v, Console(file=buf, width=100, color_system=None))
    lines = buf.getvalue().splitlines()
    assert lines[0] == "FAIL  2 violations, 0 warnings"
    body = "\n".join(lines)
    assert "  FAIL  type_change       id: int64 → string\n" in body
    assert '        at day=3/part-0.jsonl, partition day=3, row 1 (line 2)\n        value "17b"' in body
    assert "  FAIL  missing_required  id: required field absent" in body


def test_json_lists_everything(tmp_path):
    v = _verdict(tmp_path, ['{"id": 1, "t": 1}', '{"id": 2.5, "t": 2}'])
    doc = json.loads(json.dumps(v.to_json()))
    assert (doc["format"], doc["version"], doc["passed"], doc["exit_code"]) == ("driftline-verdict", 2, True, 0)
    assert [(a["rule"], a["field"], a["change"]) for a in doc["allowed"]] == [
        ("widening", "id", "int64 → float64"),
        ("narrowing", "t", "float64 → int64"),
    ]
    assert doc["allowed"][0] | {"message": None} == {
        "rule": "widening",
        "severity": "allow",
        "field": "id",
        "change": "int64 → float64",
        "message": None,
        "count": 1,
        "files": 1,
        "file": "day=3/part-0.jsonl",
        "partitions": {"day": "3"},
        "row": 1,
        "line": 2,
        "example": {"value": 2.5},  # source: RFC 8259 section 6: a number, not the text "2.5"
    }
    assert {r["rule"]: r["status"] for r in doc["rules"]}["type_change"] == "passed"
    assert doc["counts"]["rows"] == 2 and doc["counts"]["violations"] == 0


def test_a_baseline_file_is_named_by_its_plain_path_in_json_and_junit(tmp_path):
    schema_file = tmp_path / "contract.schema.json"
    schema_file.write_text(json.dumps(SCHEMA))
    write_lines(tmp_path / "d" / "part-0.jsonl", ['{"id": 1}'])
    v = compare(driftline.scan(tmp_path / "d"), load_baseline(schema_file))
    # common practice: a path in JSON is the string itself, no quotes of a programming language inside it
    assert v.to_json()["baseline"] == str(schema_file)
    props = {p.get("name"): p.get("value") for p in ET.fromstring(junit_xml(v)).find("testsuite").find("properties")}
    assert props["baseline"] == str(schema_file)
    buf = io.StringIO()
    render(v, Console(file=buf, width=300, color_system=None))
    assert buf.getvalue().splitlines()[1].startswith(f"checked {tmp_path / 'd'} against {schema_file}: ")
