"""The report's example values are JSON values (version 2), and a version 1 report still loads.

tests/fixtures/report_v1/report-v1.json was written by driftline's report version 1 from
tests/fixtures/report_v1/data (kept as it was written: it is the old format under test).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import pytest

import driftline
from conftest import fixture_path
from driftline.core.stats import Example, example_json, example_text
from driftline.emit.schemas.rules_json import RULES_VERSION, load_rules, rules_document
from driftline.errors import ReportVersionError
from driftline.gate.baseline import load_baseline
from driftline.gate.state import STATE_VERSION, load_state, scan_incremental
from driftline.results.landing import from_dict_set, to_dict_set
from driftline.results.report import REPORT_VERSION, dumps, from_dict, to_dict

V1 = fixture_path("report_v1/report-v1.json")
DATA = fixture_path("report_v1/data")


def _examples(report: dict[str, Any]) -> dict[tuple[str, str], list[tuple[str, int, str]]]:
    """(field, sample key) → [(file, row, JSON text of the value)] from a report's fields."""
    return {
        (path, key): [(e["file"], e["row"], example_text(e)) for e in exs]
        for path, st in report["fields"].items()
        for key, exs in st["samples"].items()
    }


def test_example_values_are_json_values_not_json_text():
    doc = json.loads(dumps(driftline.scan(DATA)))
    assert doc["version"] == REPORT_VERSION == 2
    samples = doc["fields"]["price"]["samples"]
    # source: RFC 8259 section 6: 19.9 in a JSON document is a number.
    assert samples["type:float64"][0] == {"file": "a.jsonl", "row": 0, "line": 1, "value": 19.9}
    # source: RFC 4180 section 2: a CSV field is text; the cell 19.9 is the JSON string "19.9"
    # (RFC 8259 section 7), written once, not as the JSON text "\"19.9\"" inside a string.
    assert samples["class:decimal"][0] == {"file": "b.csv", "row": 0, "line": 2, "value": "19.9"}
    assert samples["null"][0] == {"file": "a.jsonl", "row": 1, "line": 2, "value": None}
    # source: RFC 8259 section 5: an array value.
    assert doc["fields"]["tags"]["samples"]["type:list"][0]["value"] == ["a", "b"]
    # A value cut at 80 characters is no JSON value: it stays text, marked by the key.
    long = doc["fields"]["note"]["samples"]["class:text"][0]
    assert long == {"file": "a.jsonl", "row": 0, "line": 1, "text": '"' + "long " * 15 + "lon…"}
    event = next(e for e in doc["events"] if e["kind"] == "textclass-changed")
    assert event["example"] == {"value": "2026-11-28"}


@pytest.mark.parametrize(
    ("text", "written"),
    [
        ('"19.9"', {"value": "19.9"}),  # source: RFC 8259 section 7 (a string)
        ("19.9", {"value": 19.9}),  # source: RFC 8259 section 6 (a number)
        ("123456789012345678901234567890", {"value": 123456789012345678901234567890}),  # RFC 8259 section 6
        ('{"a":[1,null]}', {"value": {"a": [1, None]}}),  # source: RFC 8259 sections 4 and 5
        ('"caf\u00e9"', {"value": "caf\u00e9"}),  # source: RFC 8259 section 8.1 (UTF-8)
        ("", {"text": ""}),  # hidden by --example-values hide
        ("hmac:0123456789abcdef", {"text": "hmac:0123456789abcdef"}),  # hashed
        ("Decimal('1.50')", {"text": "Decimal('1.50')"}),  # a Python repr: no JSON text
        ('"abc…', {"text": '"abc…'}),  # cut short
        ("1.0e2", {"text": "1.0e2"}),  # JSON, but it would not read back to the same text
    ],
)
def test_example_json_and_back(text: str, written: dict[str, Any]):
    assert example_json(text) == written
    assert example_text(written) == text
    assert Example.from_json({"file": "f", "row": 0, "line": None, **written}).value == text


def test_a_version_1_report_loads_upgraded():
    old = json.loads(V1.read_text(encoding="utf-8"))
    assert old["version"] == 1
    # In version 1 the CSV cell 19.9 was the JSON text of a string, inside a string.
    assert old["fields"]["price"]["samples"]["class:decimal"][0]["value"] == '"19.9"'
    loaded = driftline.load_report(V1)
    again = to_dict(loaded)
    assert again["version"] == 2
    # Every example reads as the same JSON text as in version 1, now written as a value.
    assert _examples(again) == {
        (path, key): [(e["file"], e["row"], e["value"]) for e in exs]
        for path, st in old["fields"].items()
        for key, exs in st["samples"].items()
    }
    assert again["fields"]["price"]["samples"]["class:decimal"][0]["value"] == "19.9"
    # And as a fresh scan of the same files gives them.
    assert _examples(again) == _examples(to_dict(driftline.scan(DATA)))
    assert [e["example"] for e in again["events"]] == [
        None if e["example"] is None else example_json(e["example"]) for e in old["events"]
    ]
    # The upgraded report is a valid version 2 report that loads back to the same profile.
    assert from_dict(json.loads(dumps(loaded))) == loaded


def test_other_versions_are_refused_naming_both_that_are_read():
    old = json.loads(V1.read_text(encoding="utf-8"))
    with pytest.raises(
        ReportVersionError, match=r"has report version 3 \(at /version\); this driftline reads versions 1 and 2"
    ):
        from_dict({**old, "version": 3})


def test_a_version_1_report_set_loads_upgraded():
    old_report = json.loads(V1.read_text(encoding="utf-8"))
    doc = to_dict_set(driftline.scan_datasets(DATA))
    assert doc["version"] == 2
    name = next(iter(doc["datasets"]))
    v1_set = {**doc, "version": 1, "datasets": {name: {**old_report, "root": doc["datasets"][name]["root"]}}}
    landing = from_dict_set(v1_set)
    assert _examples(to_dict(landing.datasets[name])) == _examples(to_dict(driftline.load_report(V1)))


def test_a_version_1_state_file_loads_upgraded(tmp_path: Path):
    data = tmp_path / "data"
    shutil.copytree(DATA, data)
    state = tmp_path / "state.json"
    scan_incremental([data], state, verify=True)
    doc = json.loads(state.read_text(encoding="utf-8"))
    assert doc["version"] == STATE_VERSION == 2
    old_files = json.loads(V1.read_text(encoding="utf-8"))["files"]
    by_path = {f["path"]: f for f in old_files}
    v1_files = [{**f, "batches": by_path[f["path"]]["batches"]} for f in doc["files"]]
    state.write_text(json.dumps({**doc, "version": 1, "files": v1_files}), encoding="utf-8")
    loaded = load_state(state)
    assert loaded is not None
    texts = {
        (f.rel, p, str(k)): [e.value for e in exs]
        for f in loaded.files.values()
        for o in f.observations
        for p, st in o.fields.items()
        for k, exs in st.samples.items()
    }
    assert texts[("b.csv", "price", "class:decimal")] == ['"19.9"']
    assert texts[("a.jsonl", "price", "type:float64")] == ["19.9"]


def test_a_version_1_rules_file_loads_upgraded_and_serves_as_a_baseline():
    # tests/fixtures/report_v1/rules-v1.json: written by rules version 1 from rules-data (its root made relative).
    v1 = fixture_path("report_v1/rules-v1.json")
    old = json.loads(v1.read_text(encoding="utf-8"))
    assert old["version"] == 1
    [effect] = old["fields"][0]["effects"]
    assert effect["examples"][0]["value"] == '"n/a"'
    doc = load_rules(v1)
    assert doc["version"] == RULES_VERSION == 2
    # source: RFC 8259 section 7: the example is the JSON string n/a itself.
    assert doc["fields"][0]["effects"][0]["examples"][0] == {"file": "a.jsonl", "row": 9, "line": 10, "value": "n/a"}
    fresh = rules_document(driftline.scan(fixture_path("report_v1/rules-data")).recommend())
    assert doc["fields"][0]["effects"] == fresh["fields"][0]["effects"]
    base = load_baseline(v1)
    assert (base.kind, base.fields["qty"].rule, base.fields["qty"].type.key()) == ("rules", "parse_integer", "int64")
