"""Baselines: JSON Schema 2020-12 files and saved scan reports, read into path → Expected."""

from __future__ import annotations

import json

import pytest
from jsonschema import Draft202012Validator

import driftline
from conftest import ROOT, write_lines
from driftline.core.lattice import parse_key, shallow
from driftline.errors import DamagedFileError, InputPathError, ReportVersionError, UnreadableFileError
from driftline.gate.baseline import (
    FORMAT_CLASSES,
    baseline_from_json_schema,
    load_baseline,
)
from driftline.results.report import dumps

SCHEMA = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "type": "object",
    "required": ["device", "reading"],
    "properties": {
        "device": {"type": "string"},
        "seq": {"type": "integer", "minimum": 0, "maximum": 9223372036854775807},
        "reading": {
            "type": "object",
            "required": ["value"],
            "properties": {"value": {"type": ["number", "null"]}, "unit": {"type": "string"}},
        },
        "tags": {"type": "array", "items": {"type": "string"}},
        "at": {"type": "string", "format": "date-time"},
        "a.b/c~d": {"type": "boolean"},
        "meta": {"type": "object"},
        "anything": {},
        "when": {
            "type": "string",
            "format": "date-time",
            "x-driftline": {"arrow": "timestamp[us, UTC]", "rule": "parse_timestamp"},
        },
        "labels": {"type": "object", "x-driftline": {"arrow": "map<string, int64>", "rule": "identity"}},
    },
}


def test_the_fixture_is_a_valid_2020_12_schema():
    # source: jsonschema 4.26.0 Draft202012Validator.check_schema (the 2020-12 meta-schema)
    Draft202012Validator.check_schema(SCHEMA)


def test_paths_are_spelled_as_the_scan_spells_them():
    b = baseline_from_json_schema(SCHEMA)
    assert list(b.fields) == [
        "device",
        "seq",
        "reading",
        "reading.value",
        "reading.unit",
        "tags",
        "tags[]",
        "at",
        "`a.b/c~d`",
        "meta",
        "anything",
        "when",
        "labels",
        "labels{key}",
        "labels{value}",
    ]


def test_required_and_nullable_follow_the_keywords():
    f = baseline_from_json_schema(SCHEMA).fields
    # source: JSON Schema 2020-12 Validation §6.5.3 "required": the named properties must be present.
    assert (f["device"].required, f["seq"].required, f["reading.value"].required, f["reading.unit"].required) == (
        True,
        False,
        True,
        False,
    )
    # source: JSON Schema 2020-12 Validation §6.1.1 — "null" in "type" admits null.
    assert (f["reading.value"].nullable, f["device"].nullable) == (True, False)
    assert f["anything"].type is None and f["anything"].nullable  # no "type": any value
    assert f["tags[]"].required  # a list element is there whenever its list is


def test_types_formats_and_ranges():
    f = baseline_from_json_schema(SCHEMA).fields
    assert [f[p].type.key() for p in ("device", "seq", "reading", "tags", "`a.b/c~d`")] == [
        "string",
        "int64",
        "struct<>",
        "list<unknown>",
        "bool",
    ]
    assert f["reading.value"].type.key() == "float64"
    assert (f["seq"].minimum, f["seq"].maximum) == (0, 9223372036854775807)
    # source: RFC 3339 §5.6 — format "date-time" is the RFC 3339 date-time production.
    assert f["at"].classes == FORMAT_CLASSES["date-time"] == frozenset({"timestamp_rfc3339"})
    assert f["device"].classes is None
    assert f["meta"].open and not f["reading"].open  # an object without properties takes any child


def test_the_annotation_gives_the_arrow_type_the_rule_and_children():
    f = baseline_from_json_schema(SCHEMA).fields
    assert (f["when"].type.key(), f["when"].rule) == ("timestamp[us, UTC]", "parse_timestamp")
    assert (f["labels"].type.key(), f["labels"].rule, f["labels"].open) == ("map<string, int64>", "identity", False)
    assert (f["labels{key}"].type.key(), f["labels{value}"].type.key()) == ("string", "int64")


def test_shallow_types_compare_nested_kinds_by_kind():
    assert shallow(parse_key("list<struct<a: int64>>")).key() == "list<unknown>"
    assert shallow(parse_key("struct<a: int64>")).key() == "struct<>"
    assert shallow(parse_key("union<int64 | list<string>>")).key() == "union<int64 | list<unknown>>"


@pytest.mark.parametrize(
    ("schema", "message"),
    [
        (
            {"type": "object", "properties": {"a/b": {"type": "int64"}}},
            # source: RFC 6901 §3 — '/' in a name is written '~1' in a JSON Pointer.
            "at /properties/a~1b/type: unknown JSON Schema type 'int64'",
        ),
        (
            {"type": "object", "properties": {"x": {"type": "integer", "minimum": "3"}}},
            "at /properties/x/minimum: 'minimum' must be a number",
        ),
        (
            {"type": "object", "properties": {"x": {"type": "integer"}}, "required": "x"},
            "at /required: 'required' must be a list of property names",
        ),
        (
            {"type": "object", "properties": {"x": {"x-driftline": {"arrow": "int63"}}}},
            "at /properties/x/x-driftline/arrow: cannot parse type key 'int63'",
        ),
        ({"type": "object"}, "the root schema has no 'properties'"),
    ],
)
def test_bad_schemas_name_the_place(schema, message):
    with pytest.raises(UnreadableFileError) as err:
        baseline_from_json_schema(schema, source="'contract.json'")
    assert message in str(err.value)
    assert str(err.value).startswith("'contract.json'")


def test_the_bad_schemas_are_bad_for_the_reference_validator_too():
    # source: REFERENCES.md §4 — check_schema raises SchemaError for {"type":"int64"},
    # {"minimum":"3"} and {"required":"a"} (jsonschema 4.26.0)
    from jsonschema.exceptions import SchemaError

    for bad in ({"type": "int64"}, {"minimum": "3"}, {"required": "a"}):
        with pytest.raises(SchemaError):
            Draft202012Validator.check_schema(bad)


def test_load_tells_a_schema_from_a_report(tmp_path):
    schema_file = tmp_path / "contract.schema.json"
    schema_file.write_text(json.dumps(SCHEMA), encoding="utf-8")
    assert load_baseline(schema_file).kind == "json-schema"

    data = write_lines(tmp_path / "d" / "a.jsonl", ['{"x": 1, "y": null}', '{"x": 2}', '{"x": 3, "y": "z"}'])
    report = tmp_path / "report.json"
    report.write_bytes(dumps(driftline.scan(data.parent)))
    b = load_baseline(report)
    assert b.kind == "report" and b.has_shares
    x, y = b.fields["x"], b.fields["y"]
    assert (x.type.key(), x.required, x.nullable, x.null_share) == ("int64", True, False, 0.0)
    # y: null in row 0, absent in row 1, a string in row 2 → 2 of 3 places hold no value.
    assert (y.type.key(), y.required, y.nullable, y.null_share) == ("string", False, True, 2 / 3)
    assert y.classes == frozenset({"text"})


def test_load_errors_are_clear(tmp_path):
    with pytest.raises(InputPathError, match="cannot read baseline"):
        load_baseline(tmp_path / "missing.json")
    bad = tmp_path / "bad.json"
    bad.write_text('{"type": "object",\n "properties": {,}}', encoding="utf-8")
    with pytest.raises(UnreadableFileError, match=r"is not JSON \(.* at line 2, column"):
        load_baseline(bad)
    other = tmp_path / "other.json"
    other.write_text('{"format": "something-else", "rows": []}', encoding="utf-8")
    with pytest.raises(
        ReportVersionError,
        match="neither a JSON Schema nor a driftline scan report "
        r"\(its format is 'something-else'\)",
    ):
        load_baseline(other)


def _recommended(tmp_path):
    data = write_lines(
        tmp_path / "d" / "a.jsonl",
        [
            '{"id": 1, "at": "2026-11-29T10:00:00Z", "n": "12", "tags": ["a"], "geo": {"lat": 1.5}}',
            '{"id": 2, "at": "2026-11-29T11:00:00Z", "n": 7, "tags": "b", "geo": {"lat": 2}, "opt": null}',
        ],
    )
    return driftline.scan(data.parent).recommend()


def test_a_rules_file_and_the_json_schema_give_the_same_baseline(tmp_path):
    from driftline.emit.schemas.json_schema import json_schema
    from driftline.emit.schemas.rules_json import rules_document

    rec = _recommended(tmp_path)
    doc = rules_document(rec)
    # source: docs/rules.schema.json (the rules file's published format), checked by jsonschema 4.26.0
    Draft202012Validator(json.loads((ROOT / "docs" / "rules.schema.json").read_text())).validate(doc)
    rules_file, schema_file = tmp_path / "rules.json", tmp_path / "contract.schema.json"
    rules_file.write_text(json.dumps(doc), encoding="utf-8")
    schema = json_schema(rec)
    Draft202012Validator.check_schema(schema)
    schema_file.write_text(json.dumps(schema), encoding="utf-8")
    from_rules, from_schema = load_baseline(rules_file), load_baseline(schema_file)
    assert (from_rules.kind, from_schema.kind) == ("rules", "json-schema")
    assert list(from_rules.fields) == list(from_schema.fields)
    for path, r in from_rules.fields.items():
        s = from_schema.fields[path]
        assert (r.type, r.nullable, r.required, r.rule) == (s.type, s.nullable, s.required, s.rule), path
    assert {p: e.rule for p, e in from_rules.fields.items()} == {
        "at": "parse_timestamp",
        "geo": "identity",
        "geo.lat": "widen_numeric",
        "id": "identity",
        "n": "parse_integer",
        "opt": "identity",
        "tags": "wrap_scalar_in_list",
        "tags[]": "identity",
    }
    assert from_rules.fields["n"].accept == frozenset({"integer"})  # what the rule parses


def test_bad_rules_files(tmp_path):
    from driftline.emit.schemas.rules_json import rules_document

    doc = rules_document(_recommended(tmp_path))
    f = tmp_path / "rules.json"
    f.write_text(json.dumps(doc | {"version": 9}), encoding="utf-8")
    with pytest.raises(ReportVersionError, match=r"has rules version 9 \(at /version\); this driftline reads"):
        load_baseline(f)
    broken = dict(doc, fields=[*doc["fields"][:2], {k: v for k, v in doc["fields"][2].items() if k != "target"}])
    f.write_text(json.dumps(broken), encoding="utf-8")
    # source: docs/rules.schema.json — "target" is a required key of every field entry
    with pytest.raises(DamagedFileError, match=r"is damaged at /fields/2/target: expected a required key, found none"):
        load_baseline(f)
    broken["fields"][2] = doc["fields"][2] | {"target": "int65"}
    f.write_text(json.dumps(broken), encoding="utf-8")
    with pytest.raises(UnreadableFileError, match=r"at /fields/2/target: cannot parse type key 'int65'"):
        load_baseline(f)
