"""driftline.check on a root of several datasets, in process: the baseline naming rule (a nested
name's '/' as '.'), the folder and mapping forms, the errors that say how to go on, a file gone
to the loose files since the state was written, and the state shared with a one-table check.
The layouts come from tests/fixtures/datasets/make_layouts.py (their datasets: expected.json).
"""

from __future__ import annotations

import doctest
import importlib
import importlib.util
import json
import os
import re
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import pytest

import driftline
from conftest import ROOT, fixture_path
from driftline.gate.baselines import assign, file_stem, load_dataset_rules
from driftline.gate.policy import load_policy
from driftline.gate.verdict import junit_xml


def _layout(out: Path, name: str) -> Path:
    spec = importlib.util.spec_from_file_location("make_layouts", fixture_path("datasets/make_layouts.py"))
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    module.main(out, [name])
    return out / name


def _schema(path: Path, props: dict[str, str]) -> Path:
    # source: JSON Schema 2020-12 (json-schema.org): "type" and "properties" keywords
    doc = {"type": "object", "properties": {k: {"type": t} for k, t in props.items()}}
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


# The fields make_layouts.nested writes for each table.
NESTED = {
    "crm/customers": {"customer_id": "integer", "name": "string", "country": "string"},
    "crm/orders": {
        "order_id": "integer",
        "customer_id": "integer",
        "total": "number",
        "currency": "string",
        "placed": "string",
    },
    "crm/orders/returns": {"return_id": "integer", "order_id": "integer", "reason": "string", "returned": "string"},
}


def test_a_nested_dataset_names_its_baseline_with_dots(tmp_path: Path) -> None:
    root = _layout(tmp_path, "nested")
    folder = tmp_path / "baselines"
    folder.mkdir()
    for name, props in NESTED.items():
        _schema(folder / f"{file_stem(name)}.schema.json", props)
    assert sorted(p.name for p in folder.iterdir()) == [
        "crm.customers.schema.json",
        "crm.orders.returns.schema.json",
        "crm.orders.schema.json",
    ]
    (folder / "notes.txt").write_text("not a baseline\n", encoding="utf-8")  # other names are not read
    v = driftline.check(root, baseline=folder, jobs=1)
    assert v.split and v.passed and v.exit_code == 0
    assert list(v.datasets) == ["crm/customers", "crm/orders", "crm/orders/returns"]
    assert {n: d.baseline for n, d in v.datasets.items()} == {  # as a check of one baseline names it
        n: str(folder / f"{n.replace('/', '.')}.schema.json") for n in NESTED
    }
    assert all(d.passed and not d.violations and not d.warnings for d in v.datasets.values())
    by_map = driftline.check(root, baseline={n: folder / f"{file_stem(n)}.schema.json" for n in NESTED}, jobs=1)
    assert {n: (d.passed, d.violations, d.warnings) for n, d in by_map.datasets.items()} == {
        n: (d.passed, d.violations, d.warnings) for n, d in v.datasets.items()
    }
    # one field of customers declared as a string: that dataset alone fails
    _schema(folder / "crm.customers.schema.json", {**NESTED["crm/customers"], "customer_id": "string"})
    v = driftline.check(root, baseline=folder, jobs=1)
    assert (v.passed, [n for n, d in v.datasets.items() if not d.passed]) == (False, ["crm/customers"])
    assert [(x.rule, x.field, x.change) for x in v.datasets["crm/customers"].violations] == [
        ("type_change", "customer_id", "string → int64")
    ]


def test_two_baselines_of_one_dataset_and_two_datasets_of_one_file_name(tmp_path: Path) -> None:
    root = _layout(tmp_path, "done_when")
    folder = tmp_path / "b"
    folder.mkdir()
    _schema(folder / "readings.schema.json", {"ts": "string"})
    _schema(folder / "readings.report.json", {"ts": "string"})
    with pytest.raises(driftline.InputPathError, match="readings.report.json and readings.schema.json; keep one"):
        driftline.check(root, baseline=folder, jobs=1)
    with pytest.raises(driftline.OptionError, match="share the baseline file name 'a.b'"):
        assign(["a.b", "a/b"], ["a.b", "a/b"], folder=os.fspath(tmp_path / "done_when" / "readings"))


def test_one_baseline_file_on_several_datasets_is_refused_unless_one_is_picked(tmp_path: Path) -> None:
    root = _layout(tmp_path, "done_when")
    schema = _schema(tmp_path / "r.schema.json", {"station_id": "string", "ts": "string"})
    with pytest.raises(driftline.OptionError, match=r"holds 3 datasets .* is one baseline"):
        driftline.check(root, baseline=schema, jobs=1)
    v = driftline.check(root, baseline=schema, dataset="readings", jobs=1)
    assert v.split and list(v.datasets) == ["readings"] and v.datasets["readings"].baseline == os.fspath(schema)
    with pytest.raises(driftline.OptionError, match="--one-table checks the root as one table"):
        driftline.check(root, baseline=tmp_path, one_table=True, jobs=1)
    with pytest.raises(driftline.OptionError, match="check needs a baseline"):
        driftline.check(root, jobs=1)


def test_a_file_gone_to_the_loose_files_is_a_change_of_the_root(tmp_path: Path) -> None:
    root = _layout(tmp_path, "done_when")
    folder = tmp_path / "b"
    folder.mkdir()
    _schema(
        folder / "readings.schema.json",
        {"station_id": "string", "ts": "string", "temp_c": "number", "humidity": "integer"},
    )
    _schema(
        folder / "depot_exports.schema.json",
        {"depot": "string", "sku": "string", "qty": "integer", "counted_at": "string"},
    )
    _schema(folder / "stations.parquet.schema.json", {"station_id": "string", "lat": "number", "lon": "number"})
    state = tmp_path / "gate.state"
    first = driftline.check(root, baseline=folder, state=state, jobs=1)
    assert first.passed and [d.counts["files_read"] for d in first.datasets.values()] == [3, 4, 1]
    # A gzip member cut to its first bytes: its head cannot be read, so it fits no dataset now.
    bad = root / "readings" / "region=south" / "day=2026-03-01" / "part-0.jsonl.gz"
    bad.write_bytes(bad.read_bytes()[:12])
    v = driftline.check(root, baseline=folder, state=state, jobs=1)
    assert [(x.rule, x.severity, x.change, x.file) for x in v.warnings] == [
        ("changed_dataset", "warn", "dataset readings → loose", "readings/region=south/day=2026-03-01/part-0.jsonl.gz")
    ]
    assert "was in the dataset 'readings' when the state was written; now it fits no dataset" in v.warnings[0].message
    assert v.passed and v.datasets["readings"].counts["files_reused"] == 3
    # JUnit: the three datasets, then the root's own suite holding the change as a warning
    top = ET.fromstring(junit_xml(v).split(b"-->\n", 1)[1])
    assert [s.get("name") for s in top.findall("testsuite")] == [
        "depot_exports",
        "readings",
        "stations.parquet",
        "(root)",
    ]
    case = top.findall("testsuite")[3].find("testcase")
    assert case is not None and case.get("name") == "changed_dataset"
    out = case.find("system-out")
    assert out is not None and (out.text or "").startswith("warning: dataset readings → loose")


def test_a_one_table_state_and_a_per_dataset_state_never_mix(tmp_path: Path) -> None:
    root = _layout(tmp_path, "done_when")
    schema = _schema(tmp_path / "all.schema.json", {"station_id": "string"})
    state = tmp_path / "gate.state"
    one = driftline.check(root, baseline=schema, one_table=True, state=state, jobs=1)
    assert not one.split and one.counts["files_read"] == 8
    doc: dict[str, Any] = json.loads(state.read_text(encoding="utf-8"))
    assert all("dataset" not in f for f in doc["files"])  # a one-table state is written as before
    v = driftline.check(root, baseline=schema, dataset=["readings", "depot_exports"], state=state, jobs=1)
    assert {n: (d.counts["files_read"], d.counts["files_reused"]) for n, d in v.datasets.items()} == {
        "depot_exports": (3, 0),
        "readings": (4, 0),
    }
    doc = json.loads(state.read_text(encoding="utf-8"))
    assert sorted({f["dataset"]["name"] for f in doc["files"]}) == ["depot_exports", "readings"]
    again = driftline.check(root, baseline=schema, one_table=True, state=state, jobs=1)
    assert (again.counts["files_read"], again.counts["files_reused"]) == (8, 0)


def test_the_documented_policy_tables_load(tmp_path: Path) -> None:
    text = (ROOT / "docs" / "gate.md").read_text(encoding="utf-8")
    toml = next(b for b in re.findall(r"```toml\n(.*?)```", text, re.S) if "[baselines]" in b)
    (tmp_path / "gate.toml").write_text(toml, encoding="utf-8")
    assert load_policy(tmp_path / "gate.toml") == driftline.Policy()  # the tables leave the flat keys alone
    rules = load_dataset_rules(tmp_path / "gate.toml")
    assert dict(rules.baselines) == {
        "readings": str(tmp_path / "contracts" / "readings.schema.json"),
        "depot_exports": str(tmp_path / "contracts" / "depot_exports.report.json"),
        "stations.parquet": str(tmp_path / "contracts" / "stations.rules.json"),
        "crm/orders": str(tmp_path / "contracts" / "orders.schema.json"),
    }
    assert (rules.no_baseline, rules.changed_dataset) == ("warn", "warn")
    (tmp_path / "bad.toml").write_text("[baselines]\nreadings = 3\n", encoding="utf-8")
    with pytest.raises(driftline.DamagedFileError, match="/baselines/readings"):
        load_policy(tmp_path / "bad.toml")


def test_the_examples_of_the_baselines_module_run() -> None:
    result = doctest.testmod(importlib.import_module("driftline.gate.baselines"), optionflags=doctest.ELLIPSIS)
    assert result.failed == 0 and result.attempted > 0


def test_a_roots_own_table_takes_the_baseline_named_after_its_folder(tmp_path: Path) -> None:
    root = _layout(tmp_path, "done_when")
    folder = tmp_path / "b"
    folder.mkdir()
    _schema(folder / "readings.schema.json", {"station_id": "string", "ts": "string", "temp_c": "number"})
    _schema(folder / "depot_exports.schema.json", {"depot": "string"})
    v = driftline.check(root / "readings", baseline=folder, jobs=1)
    assert list(v.datasets) == ["."] and v.datasets["."].baseline == str(folder / "readings.schema.json")
    assert v.datasets["."].counts["rows"] == 12 and v.passed
    assert [(x.rule, x.change) for x in v.warnings] == [("unknown_dataset", "baseline for 'depot_exports'")]
