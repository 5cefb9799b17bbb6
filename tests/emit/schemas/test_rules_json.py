"""The cast rules file: valid against its own published JSON Schema (docs/rules.schema.json),
every path listed parents first, and read back with a clear error for other formats."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from jsonschema import Draft202012Validator

import driftline
from _orders import make_orders
from conftest import ROOT
from driftline.core import paths
from driftline.emit.schemas.rules_json import dumps, load_rules, rules_document
from driftline.errors import ReportVersionError
from driftline.recommendation import CAUSES, REGISTRY

DOC_SCHEMA = json.loads((ROOT / "docs" / "rules.schema.json").read_text())


def test_the_documented_schema_is_valid_and_names_every_rule_and_cause():
    Draft202012Validator.check_schema(DOC_SCHEMA)
    assert DOC_SCHEMA["$defs"]["rule"]["enum"] == list(REGISTRY)
    assert DOC_SCHEMA["$defs"]["cause"]["enum"] == list(CAUSES)


@pytest.mark.parametrize("which", ["demo", "orders"])
def test_rules_file_validates_and_lists_parents_first(demo_dir: Path, tmp_path: Path, which: str):
    root = demo_dir / "landing" if which == "demo" else make_orders(tmp_path)
    rec = driftline.scan(root).recommend()
    doc = json.loads(dumps(rec))
    assert list(Draft202012Validator(DOC_SCHEMA).iter_errors(doc)) == []
    seen: set[str] = set()
    for f in doc["fields"]:
        assert f["parent"] is None or f["parent"] in seen
        assert (f["parent"], f["as"]) == paths.parent(f["path"])
        seen.add(f["path"])
    assert seen == {p.path for p in rec.walk()}
    assert doc["source"] == {"root": rec.root, "rows": rec.rows, "files": rec.files}


def test_rules_carry_the_loss_with_examples(demo_dir: Path):
    doc = rules_document(driftline.scan(demo_dir / "landing").recommend())
    pm25 = next(f for f in doc["fields"] if f["path"] == "pm25")
    assert (pm25["rule"], pm25["target"], pm25["nulled"], pm25["changed"], pm25["exact"]) == (
        "parse_float",
        "float64",
        6,
        0,
        True,
    )
    [token] = pm25["effects"]
    assert token["examples"][0] == {
        "file": "readings/region=east/day=2026-11-29/part-0000.jsonl.gz",
        "row": 185,
        "line": 186,
        "value": "n/a",  # source: RFC 8259 section 7: the JSON string n/a, not the text "\"n/a\""
    }
    assert pm25["params"]["tokens"] == {"string": "null", "text": "null"}


def test_load_rules_round_trip_and_errors(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"x": 1}\n')
    rec = driftline.scan(tmp_path).recommend()
    good = tmp_path / "rules.json"
    good.write_bytes(dumps(rec))
    assert load_rules(good)["fields"][0]["rule"] == "identity"
    other = tmp_path / "other.json"
    other.write_text(json.dumps({**json.loads(dumps(rec)), "version": 3}))
    with pytest.raises(
        ReportVersionError, match=r"has rules version 3 \(at /version\); this driftline reads versions 1 and 2"
    ):
        load_rules(other)
    report = tmp_path / "report.json"
    report.write_text('{"format": "driftline-report", "version": 1}')
    with pytest.raises(ReportVersionError, match="is not a driftline rules file"):
        load_rules(report)
    (tmp_path / "bad.json").write_text("{")
    with pytest.raises(ReportVersionError, match="is not JSON"):
        load_rules(tmp_path / "bad.json")
