"""The JSON Schema 2020-12 file: valid against the meta-schema, sound for every scanned
record (permissive mode, format checker on), and describing the cast output (strict mode).

source: jsonschema 4.26.0 Draft202012Validator with rfc3339-validator 0.1.4 (REFERENCES.md section 4)
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pyarrow as pa
import pytest
from jsonschema import Draft202012Validator, SchemaError

import driftline
from _orders import make_orders
from driftline.core.lattice import parse_key
from driftline.emit.schemas.json_schema import META_SCHEMA, json_schema
from driftline.gate.baseline import baseline_from_json_schema
from driftline.recommendation import Recommendation
from driftline.recommendation.apply import apply
from driftline.recommendation.raw import iter_records, json_value, raw_batches

ALLOWED = {
    "type",
    "properties",
    "required",
    "items",
    "additionalProperties",
    "format",
    "minimum",
    "maximum",
    "maxLength",
    "description",
    "x-driftline",
}
CHECKER = Draft202012Validator.FORMAT_CHECKER


@pytest.fixture(scope="module")
def orders(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_orders(tmp_path_factory.mktemp("orders"))


@pytest.fixture(scope="module")
def sources(demo_dir: Path, orders: Path) -> dict[str, tuple[Path, Recommendation]]:
    out = {}
    for name, root in (("demo", demo_dir / "landing"), ("orders", orders)):
        out[name] = (root, driftline.scan(root).recommend())
    return out


def _nodes(node: dict[str, Any], where: str = "#") -> list[tuple[str, dict[str, Any]]]:
    out = [(where, node)]
    for name, child in node.get("properties", {}).items():
        out += _nodes(child, f"{where}/properties/{name}")
    if "items" in node:
        out += _nodes(node["items"], f"{where}/items")
    return out


def test_the_format_checker_really_checks():
    # Without rfc3339-validator, date-time would pass anything (2020-12 formats annotate).
    assert not CHECKER.conforms("garbage", "date-time")
    assert not CHECKER.conforms("1990-12-31T23:59:60Z", "date-time")  # the RFC's own leap second
    with pytest.raises(SchemaError):
        Draft202012Validator.check_schema({"type": "int64"})


@pytest.mark.parametrize("name", ["demo", "orders"])
@pytest.mark.parametrize("mode", ["permissive", "strict"])
def test_schema_passes_the_meta_schema_with_plain_keywords(sources, name: str, mode: str):
    root, rec = sources[name]
    profiles = {name: driftline.scan(root)}
    schema = json_schema(rec, mode=mode)
    Draft202012Validator.check_schema(schema)
    assert schema["$schema"] == META_SCHEMA == Draft202012Validator.META_SCHEMA["$id"]
    for where, node in _nodes(schema)[1:]:
        assert set(node) <= ALLOWED, where
        note = node["x-driftline"]
        assert {"arrow", "rule"} <= set(note) <= {"arrow", "rule", "classes", "null_share"}
        assert parse_key(note["arrow"]).key() == note["arrow"]
        assert "maxLength" not in node, where  # a contract: no length taken from the sample
    top = {p.name: p for p in rec.fields}
    for name_, node in schema["properties"].items():
        plan = top[name_]
        assert (node["x-driftline"]["arrow"], node["x-driftline"]["rule"]) == (plan.target.key(), plan.rule)
        s = profiles[name].fields[plan.path]
        assert node["x-driftline"]["null_share"] == (s.stats.nulls + s.absent) / s.container


@pytest.mark.parametrize("name", ["demo", "orders"])
def test_every_record_validates_against_the_permissive_schema(sources, name: str):
    root, rec = sources[name]
    validator = Draft202012Validator(json_schema(rec), format_checker=CHECKER)
    records = list(iter_records(root))
    assert len(records) == rec.rows
    bad = [(f, r, e.json_path, e.message) for f, r, x in records for e in validator.iter_errors(x)]
    assert bad == []


@pytest.mark.parametrize("name", ["demo", "orders"])
def test_cast_output_validates_against_the_strict_schema(sources, name: str):
    root, rec = sources[name]
    strict = Draft202012Validator(json_schema(rec, mode="strict"), format_checker=CHECKER)
    table = pa.Table.from_batches([apply(b.batch, rec) for b in raw_batches(root)])
    rows = [json_value(r) for r in table.to_pylist(maps_as_pydicts="lossy")]
    assert [e.message for r in rows for e in strict.iter_errors(r)] == []
    # ... while raw records that still need a rule do not.
    raw_fails = sum(not strict.is_valid(x) for _, _, x in iter_records(root))
    assert raw_fails > 0


def test_int64_carries_its_range_and_float64_is_number(sources):
    # source: JSON Schema 2020-12 validation section 6.1.1 ("integer" matches any number with
    # a zero fractional part) and REFERENCES.md section 4: 1.0 and 1e308 pass "integer".
    _, rec = sources["orders"]
    props = json_schema(rec)["properties"]
    node = props["id"]
    assert (node["minimum"], node["maximum"]) == (-9223372036854775808, 9223372036854775807)
    v = Draft202012Validator(node)
    assert v.is_valid(9223372036854775807) and not v.is_valid(2**63)  # int64 bounds
    assert Draft202012Validator({"type": "integer"}).is_valid(1.0)  # why float64 cannot be "integer"
    assert props["big"]["type"] == ["number", "null"] and "maximum" not in props["big"]


def test_date_time_format_only_when_every_value_is_rfc3339(sources, tmp_path: Path):
    # source: RFC 3339 section 5.6; jsonschema's date-time checker rejects leap seconds
    _, orders_rec = sources["orders"]
    props = json_schema(orders_rec)["properties"]
    assert "format" not in props["created"]  # a leap second, an offset without a colon, local times
    assert json_schema(orders_rec, mode="strict")["properties"]["created"]["format"] == "date-time"
    _, demo_rec = sources["demo"]
    assert json_schema(demo_rec)["properties"]["ingested_at"]["format"] == "date-time"  # typed timestamps
    (tmp_path / "a.jsonl").write_text('{"t": "1985-04-12T23:20:50.52Z"}\n{"t": "1996-12-19T16:39:57-08:00"}\n')
    assert json_schema(driftline.scan(tmp_path).recommend())["properties"]["t"]["format"] == "date-time"


def test_the_gate_reads_the_schema_as_a_baseline(sources):
    _, rec = sources["orders"]
    baseline = baseline_from_json_schema(json_schema(rec), source="orders schema")
    for plan in rec.walk():
        expected = baseline.fields[plan.path]
        assert expected.type is not None and expected.type.key() == plan.target.key(), plan.path
        # Map keys have no node of their own (an object's keys are its property names); the
        # gate takes their types from the map's annotation. Values are additionalProperties.
        assert expected.rule == (None if "{key}" in plan.path else plan.rule), plan.path
    assert baseline.fields["created"].required and not baseline.fields["meta.agent"].required
