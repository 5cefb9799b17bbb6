"""Schema files are contracts, not snapshots: no length or range taken from the sample is a
bound a validator enforces, unless --bounds-from-sample asks; and `check` agrees with a
validator on the bounds a schema does carry.

source: JSON Schema 2020-12 Validation, sections 6.2.2-6.2.5 (maximum, minimum) and 6.3.1
(maxLength: "A string instance is valid against this keyword if its length is less than, or
equal to, the value of this keyword"); validator: jsonschema's Draft202012Validator
(REFERENCES.md section 4), format checker on.
"""

from __future__ import annotations

import copy
import importlib.util
import json
from importlib.machinery import SourceFileLoader
from pathlib import Path
from typing import Any

import pytest
from jsonschema import Draft202012Validator

import driftline
from conftest import ROOT, fixture_path
from driftline.emit.schemas.json_schema import json_schema
from driftline.gate.baseline import baseline_from_json_schema
from driftline.gate.compare import compare
from driftline.recommendation.raw import iter_records

CHECKER = Draft202012Validator.FORMAT_CHECKER
DRIFT_FIXTURES = sorted(p.parent.name for p in fixture_path("drift").glob("*/input"))


def _bench_drift(target: Path) -> Path:
    loader = SourceFileLoader("bench_for_contracts", str(ROOT / "scripts" / "bench"))
    spec = importlib.util.spec_from_loader("bench_for_contracts", loader)
    assert spec is not None
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    folder = Path(module.ensure_data(target, 0.001, lambda _msg: None))
    return folder / module.FILES["drift-json"]


@pytest.fixture(scope="module")
def roots(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    out = {"demo": demo_dir / "landing", "bench-drift-json": _bench_drift(tmp_path_factory.mktemp("bench"))}
    for name in DRIFT_FIXTURES:
        out[f"fixture-{name}"] = fixture_path(f"drift/{name}/input")
    return out


def _invalid(schema: dict[str, Any], records: list[Any]) -> list[tuple[int, str, str]]:
    validator = Draft202012Validator(schema, format_checker=CHECKER)
    return [(i, e.json_path, e.message) for i, x in enumerate(records) for e in validator.iter_errors(x)]


def _bigger(records: list[Any], schema: dict[str, Any]) -> tuple[list[Any], list[str]]:
    """Each record with every plain string 20 characters longer and every number 10**6 larger
    (integers past ±2**53 left alone: their type's range is a real bound)."""
    props = schema["properties"]
    grown: list[str] = []
    out = []
    for rec in records:
        if not isinstance(rec, dict):
            out.append(rec)
            continue
        rec = copy.deepcopy(rec)
        for name, value in list(rec.items()):
            node = props.get(name, {})
            if isinstance(value, str) and "format" not in node and node.get("type") == "string":
                rec[name] = value + "Z" * 20
                grown.append(name)
            elif isinstance(value, int | float) and not isinstance(value, bool) and abs(value) < 2**53:
                rec[name] = value + 10**6
                grown.append(name)
        out.append(rec)
    return out, sorted(set(grown))


def test_every_record_validates_against_the_permissive_schema(roots: dict[str, Path]) -> None:
    assert len(roots) == 2 + len(DRIFT_FIXTURES) and len(DRIFT_FIXTURES) >= 10
    for name, root in roots.items():
        rec = driftline.scan(root).recommend()
        schema = json_schema(rec)
        records = [x for _, _, x in iter_records(root)]
        assert len(records) == rec.rows > 0, name
        assert _invalid(schema, records) == [], name
        assert "maxLength" not in json.dumps(schema), name


def test_longer_strings_and_larger_numbers_still_validate(roots: dict[str, Path]) -> None:
    tights: dict[str, set[str]] = {}
    for name in ("demo", "bench-drift-json"):
        root = roots[name]
        rec = driftline.scan(root).recommend()
        records = [x for _, _, x in iter_records(root)]
        bigger, grown = _bigger(records, json_schema(rec))
        assert grown, name  # the test really grew some values
        assert _invalid(json_schema(rec), bigger) == [], name
        # The same values break the bounds taken from the sample: the opt-in really bounds.
        tight = {path.split(".")[1] for _, path, _ in _invalid(json_schema(rec, bounds_from_sample=True), bigger)}
        # Numbers the scan read only as CSV text carry no observed range: no bound to break.
        assert tight <= set(grown) and tight, name
        tights[name] = tight
    assert {"firmware", "temp_c"} <= tights["demo"]


def test_the_observed_figures_are_described_not_enforced(tmp_path: Path) -> None:
    (tmp_path / "a.jsonl").write_text('{"oven_id": "H-9", "temp": 180.5}\n{"oven_id": "H-1", "temp": 230}\n')
    rec = driftline.scan(tmp_path).recommend()
    loose, tight = json_schema(rec)["properties"], json_schema(rec, bounds_from_sample=True)["properties"]
    assert loose["oven_id"]["description"] == "observed (not enforced): 2 values; longest string 3 characters"
    assert loose["temp"]["description"] == "observed (not enforced): 2 values; numbers from 180.5 to 230"
    assert "maxLength" not in loose["oven_id"] and "maximum" not in loose["temp"]
    assert tight["oven_id"]["maxLength"] == 3
    assert (tight["temp"]["minimum"], tight["temp"]["maximum"]) == (180.5, 230)
    # source: JSON Schema 2020-12 Validation 6.3.1: "H-10" (4 characters) fails maxLength 3.
    assert _invalid(json_schema(rec), [{"oven_id": "H-10", "temp": 231}]) == []
    assert [m for _, _, m in _invalid(json_schema(rec, bounds_from_sample=True), [{"oven_id": "H-10", "temp": 1}])] == [
        "'H-10' is too long",
        "1 is less than the minimum of 180.5",
    ]


@pytest.mark.parametrize("bounds", [False, True])
def test_check_agrees_with_the_validator_on_the_bounds(tmp_path: Path, bounds: bool) -> None:
    base, new = tmp_path / "base", tmp_path / "new"
    base.mkdir(), new.mkdir()
    (base / "a.jsonl").write_text('{"oven_id": "H-9", "temp": 180}\n{"oven_id": "H-1", "temp": 230}\n')
    (new / "a.jsonl").write_text('{"oven_id": "H-10", "temp": 231}\n')
    schema = json_schema(driftline.scan(base).recommend(), bounds_from_sample=bounds)
    validator_fails = _invalid(schema, [json.loads((new / "a.jsonl").read_text())]) != []
    verdict = compare(driftline.scan(new), baseline_from_json_schema(schema))
    ranges = sorted(v.change for v in verdict.violations if v.rule == "out_of_range")
    assert validator_fails is bounds
    assert (not verdict.passed) is bounds
    assert ranges == (["above the maximum 230", "longer than the maxLength 3"] if bounds else [])
