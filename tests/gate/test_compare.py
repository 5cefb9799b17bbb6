"""compare: each rule on invented data, with counts checked against the jsonschema validator."""

from __future__ import annotations

import json
import random
from collections import Counter
from pathlib import Path

import pytest
from jsonschema import Draft202012Validator, FormatChecker

import driftline
from conftest import write_lines
from driftline.core.lattice import parse_key
from driftline.gate.baseline import baseline_from_json_schema, baseline_from_profile
from driftline.gate.compare import compare, fits
from driftline.gate.policy import Policy

CONTRACT = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "type": "object",
    "required": ["id", "ts"],
    "properties": {
        "id": {"type": "integer"},
        "ts": {"type": "string", "format": "date-time"},
        "note": {"type": ["string", "null"]},
    },
}

# source: REFERENCES.md §1 — RFC 3339 §5.8 examples (valid) and the "not valid" list.
VALID_TS = [
    "1985-04-12T23:20:50.52Z",
    "1996-12-19T16:39:57-08:00",
    "1937-01-01T12:00:27.87+00:20",
    "1985-04-12t23:20:50z",
]
INVALID_TS = [
    "1985-04-12 23:20:50Z",
    "1985-04-12T23:20:50",
    "85-04-12T23:20:50Z",
    "1985-04-12T24:00:00Z",
    "1985-02-29T23:20:50Z",
    "1985-04-12T23:20:50.Z",
    "1985-04-12T23:20:50+0800",
    "1985-04-12T23:20:50+08",
    "1985-04-12T23:20Z",
    "1985-04-12T23:20:50,52Z",
    "19850412T232050Z",
]


def _records(seed: int, n: int) -> list[dict]:
    """Invented readings; about one row in six breaks the contract in some way."""
    rnd = random.Random(seed)
    out = []
    for i in range(n):
        rec: dict = {"id": i, "ts": rnd.choice(VALID_TS), "note": rnd.choice([None, "ok", "late"])}
        roll = rnd.random()
        if roll < 0.04:
            rec["id"] = rnd.choice(["A12", "n/a", "7"])  # a string where an integer belongs
        elif roll < 0.08:
            rec["id"] = i + 0.5  # a float: a widening of int64
        elif roll < 0.11:
            rec["id"] = None
        elif roll < 0.14:
            del rec["id"]
        elif roll < 0.19:
            rec["ts"] = rnd.choice(INVALID_TS)
        elif roll < 0.21:
            del rec["ts"]
        elif roll < 0.23:
            rec["id"] = rnd.choice([True, False])
        out.append(rec)
    return out


def _write(folder: Path, name: str, records: list[dict]) -> None:
    write_lines(folder / name, [json.dumps(r) for r in records])


def _reference_errors(records: list[dict]) -> Counter:
    """What the reference validator rejects, by (field, kind)."""
    # source: jsonschema 4.26.0 Draft202012Validator with FormatChecker (rfc3339-validator 0.1.4)
    v = Draft202012Validator(CONTRACT, format_checker=FormatChecker())
    found: Counter = Counter()
    for rec in records:
        for e in v.iter_errors(rec):
            if e.validator == "required":
                found[(e.message.split("'")[1], "missing")] += 1
            elif e.validator == "type":
                found[(e.path[0], "null" if e.instance is None else "type")] += 1
            elif e.validator == "format":
                found[(e.path[0], "format")] += 1
    return found


def _ours(verdict) -> Counter:
    kinds = {
        "type_change": "type",
        "widening": "type",
        "unexpected_nulls": "null",
        "missing_required": "missing",
        "content_class": "format",
    }
    got: Counter = Counter()
    for v in (*verdict.violations, *verdict.warnings, *verdict.allowed):
        if v.rule in kinds:
            got[(v.field, kinds[v.rule])] += v.count
    return got


@pytest.mark.parametrize("batch_rows", [7, 65_536])
def test_counts_agree_with_the_reference_validator(tmp_path, batch_rows):
    records = _records(11, 400)
    _write(tmp_path / "d", "part-0.jsonl", records[:250])
    _write(tmp_path / "d", "part-1.jsonl", records[250:])
    profile = driftline.scan(tmp_path / "d", batch_rows=batch_rows)
    verdict = compare(profile, baseline_from_json_schema(CONTRACT))
    expected = _reference_errors(records)
    assert sum(expected.values()) > 60  # the fixture really breaks the contract
    assert _ours(verdict) == expected


def test_where_it_first_shows(tmp_path):
    _write(tmp_path / "d" / "day=1", "a.jsonl", [{"id": 1, "ts": VALID_TS[0]}])
    _write(
        tmp_path / "d" / "day=2",
        "a.jsonl",
        [{"id": 2, "ts": VALID_TS[0]}, {"id": "17b", "ts": VALID_TS[1]}, {"id": "x", "ts": VALID_TS[1]}],
    )
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(CONTRACT))
    assert not v.passed and v.exit_code == 1
    [tc] = [x for x in v.violations if x.rule == "type_change"]
    assert (tc.field, tc.change, tc.file, tc.partitions, tc.row, tc.line, tc.example, tc.count, tc.files) == (
        "id",
        "int64 → string",
        "day=2/a.jsonl",
        (("day", "2"),),
        1,
        2,
        '"17b"',
        2,
        1,
    )
    assert tc.where() == "day=2/a.jsonl, partition day=2, row 1 (line 2)"


def test_integral_floats_are_a_documented_difference(tmp_path):
    # source: JSON Schema 2020-12 Validation §6.1.1 — "integer" matches any number with a zero
    # fractional part, so the reference validator accepts 1.0 (REFERENCES.md §4). The scan sees
    # a float64 value, and the gate reports the widening int64 → float64 (allowed by default).
    _write(tmp_path / "d", "a.jsonl", [{"id": 1.0, "ts": VALID_TS[0]}])
    assert Draft202012Validator(CONTRACT).is_valid({"id": 1.0, "ts": VALID_TS[0]})
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(CONTRACT))
    assert v.passed and [(a.rule, a.change) for a in v.allowed] == [("widening", "int64 → float64")]


def test_leap_seconds_are_a_documented_difference(tmp_path):
    # source: RFC 3339 §5.8 lists 1990-12-31T23:59:60Z as valid; REFERENCES.md §1: the jsonschema
    # date-time checker rejects it. The gate follows the RFC: no content_class warning.
    leap = "1990-12-31T23:59:60Z"
    assert not Draft202012Validator(CONTRACT, format_checker=FormatChecker()).is_valid({"id": 1, "ts": leap})
    _write(tmp_path / "d", "a.jsonl", [{"id": 1, "ts": leap, "note": None}])
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(CONTRACT))
    assert not v.warnings and v.passed


def test_fits_matches_pyarrow_permissive_unification():
    # source: REFERENCES.md §5 — pyarrow 26.0.1 unify_schemas(promote_options="permissive"):
    # int8+int64 → int64, int64+float64 → double, null+int32 → int32, int64+string raises.
    assert fits(parse_key("int8"), parse_key("int64")) and fits(parse_key("int64"), parse_key("float64"))
    assert not fits(parse_key("float64"), parse_key("int64"))
    assert not fits(parse_key("string"), parse_key("int64")) and not fits(parse_key("int64"), parse_key("string"))


def test_new_gone_and_narrowing(tmp_path):
    _write(
        tmp_path / "a", "x.jsonl", [{"id": 1, "v": 1.5, "opt": "x", "s": {"k": 1}}, {"id": 2, "v": 2.5, "s": {"k": 2}}]
    )
    _write(tmp_path / "b", "x.jsonl", [{"id": 1, "v": 1, "extra": True, "s": {"k": 1, "j": 2}}])
    base = baseline_from_profile(driftline.scan(tmp_path / "a"))
    v = compare(driftline.scan(tmp_path / "b"), base, Policy(narrowing="warn"))
    got = {(x.rule, x.field, x.change, x.severity) for x in (*v.violations, *v.warnings)}
    assert got == {
        ("narrowing", "v", "float64 → int64", "warn"),
        ("new_field", "extra", "new field (bool)", "warn"),
        ("new_field", "s.j", "new field (int64)", "warn"),
        ("optional_gone", "opt", "optional field no longer seen", "warn"),
    }
    assert v.passed


def test_missing_required_counts_rows_and_knows_the_row_when_a_batch_lacks_it(tmp_path):
    _write(tmp_path / "a", "x.jsonl", [{"id": 1, "k": 1}])
    _write(tmp_path / "b", "x.jsonl", [{"id": 1, "k": 1}, {"id": 2, "k": 2}, {"id": 3}, {"id": 4}])
    base = baseline_from_profile(driftline.scan(tmp_path / "a"))
    v = compare(driftline.scan(tmp_path / "b", batch_rows=2), base)
    [m] = v.violations
    assert (m.rule, m.field, m.count, m.file, m.row) == ("missing_required", "k", 2, "x.jsonl", 2)
    assert m.message == "absent from 2 rows in 1 file, where the baseline requires it"


def test_null_share_rise_needs_a_report_and_respects_the_limit(tmp_path):
    _write(tmp_path / "a", "x.jsonl", [{"n": 1}] * 9 + [{"n": None}])  # 10 % null
    _write(tmp_path / "b", "x.jsonl", [{"n": 1}] * 7 + [{"n": None}] * 3)  # 30 % null: +20 points
    base = baseline_from_profile(driftline.scan(tmp_path / "a"))
    b = driftline.scan(tmp_path / "b")
    [w] = compare(b, base).warnings
    assert (w.rule, w.change, w.count, w.row) == ("null_share_rise", "null share 10.0% → 30.0%", 3, 7)
    quiet = compare(b, base, Policy(max_null_share_rise=20))
    assert not quiet.warnings and [a.rule for a in quiet.allowed] == ["null_share_rise"]
    rules = {r.rule: r for r in compare(b, baseline_from_json_schema(CONTRACT)).rules}
    assert rules["null_share_rise"].status == "skipped" and "no null shares" in rules["null_share_rise"].reason


def test_file_errors_against_the_rate(tmp_path):
    d = tmp_path / "d"
    write_lines(d / "good.jsonl", ['{"id": 1, "ts": "1985-04-12T23:20:50.52Z"}'])
    write_lines(d / "bad.jsonl", ['{"id": 2, "ts": "1985-04-12T23:20:50.52Z"}', '{"id": 3,'])
    p = driftline.scan(d)
    v = compare(p, baseline_from_json_schema(CONTRACT))
    e, lost = v.violations
    assert (e.rule, e.field, e.change, e.file, e.line) == (
        "file_errors",
        None,
        "file error: malformed-json",
        "bad.jsonl",
        2,
    )
    assert "1 of 2 files (50.0%)" in e.message
    # The rate may allow the errors; the line set aside still counts (unread_rows, default fail).
    assert (lost.rule, lost.change, lost.file, lost.line) == (
        "unread_rows",
        "rows not read: malformed-json",
        "bad.jsonl",
        2,
    )
    lenient = compare(p, baseline_from_json_schema(CONTRACT), Policy(max_file_error_rate=50))
    assert [v.rule for v in lenient.violations] == ["unread_rows"]
    assert compare(p, baseline_from_json_schema(CONTRACT), Policy(max_file_error_rate=50, unread_rows="warn")).passed


def test_cast_rules_turn_strings_into_cast_loss(tmp_path):
    schema = {
        "type": "object",
        "properties": {
            "n": {"type": "integer", "x-driftline": {"arrow": "int64", "rule": "parse_integer"}},
            "m": {"type": "integer", "x-driftline": {"arrow": "int64", "rule": "identity"}},
        },
    }
    _write(tmp_path / "d", "x.jsonl", [{"n": "12", "m": "12"}, {"n": "n/a", "m": 3}, {"n": "4.5", "m": 4}, {"n": 7}])
    base = baseline_from_json_schema(schema)
    v = compare(driftline.scan(tmp_path / "d"), base)
    got = [(x.rule, x.field, x.change, x.count, x.row, x.example) for x in v.violations]
    # "12" parses as int64 (pyarrow 26.0.1 pc.cast accepts it, REFERENCES.md §5); "n/a" and
    # "4.5" do not: two values lost. The identity rule casts nothing: "12" is a type change.
    assert got == [
        ("type_change", "m", "int64 → string", 1, 0, '"12"'),
        ("cast_loss", "n", "cast rule parse_integer: string → int64", 2, 1, '"n/a"'),
    ]
    assert compare(driftline.scan(tmp_path / "d"), base, Policy(max_cast_loss=2, type_change="warn")).passed


def test_csv_cells_are_text_for_a_string_baseline(tmp_path):
    d = tmp_path / "d"
    write_lines(d / "a.csv", ["code,count", "007,1", "ABC,2", "12,x"])
    schema = {"type": "object", "properties": {"code": {"type": "string"}, "count": {"type": "integer"}}}
    v = compare(driftline.scan(d), baseline_from_json_schema(schema))
    # code: every CSV cell is text, so a string column holds 007 and 12 as they are.
    # count: "x" is text where an integer belongs (row 2, line 4 of the file).
    assert [(x.field, x.change, x.row, x.line, x.example) for x in v.violations] == [
        ("count", "int64 → string", 2, 4, '"x"')
    ]


def test_range_reports_the_extreme(tmp_path):
    schema = {"type": "object", "properties": {"p": {"type": "integer", "minimum": 0, "maximum": 100}}}
    _write(tmp_path / "d", "a.jsonl", [{"p": 5}, {"p": 140}, {"p": -3}])
    _write(tmp_path / "d", "b.jsonl", [{"p": 180}])
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(schema))
    got = [(x.change, x.file, x.example, x.files) for x in v.violations]
    assert got == [("below the minimum 0", "a.jsonl", "-3", 1), ("above the maximum 100", "b.jsonl", "180", 2)]


# source: REFERENCES.md §5 — pyarrow 26.0.1 pc.cast from string (safe), and the RFC 3339 list of §1.
CAST_CASES = {
    "int64": ["42", "-42", "007", "+42", " 42", "4.0", "1e3", "9223372036854775808", "", "n/a"],
    "timestamp[us, UTC]": [
        "1985-04-12T23:20:50.52Z",
        "1996-12-19T16:39:57-08:00",
        "1937-01-01T12:00:27.87+00:20",
        "1985-04-12T23:20:50+0800",
        "1985-04-12T23:20:50+08",
        "1985-04-12 23:20:50Z",
        "1985-04-12T23:20:50",
        "1985-04-12",
        "1985-04-12T24:00:00Z",
        "19850412T232050Z",
        "yesterday",
    ],
}
# Where the gate and a bare pc.cast differ, and why (each value alone in its own row):
CAST_DIFFERENCES = {
    "0x1F": ("int64", "pc.cast reads hex (31); the gate counts it lost: its content class is text"),
    "9223372036854775807": (
        "int64",
        "pc.cast takes int64's maximum; the scan classes 19-digit numbers as "
        "decimal, so the gate counts it lost (conservative)",
    ),
    "1990-12-31T23:59:60Z": (
        "timestamp[us, UTC]",
        "pc.cast rejects leap seconds; the parse rule turns :60 "
        "into :59 (a change, not a loss: recommendation/plan.py CAUSES)",
    ),
    "1985-04-12t23:20:50z": (
        "timestamp[us, UTC]",
        "pc.cast rejects lower-case t/z; the parse rule upper-cases them first (RFC 3339 §5.6 allows them)",
    ),
}


@pytest.mark.parametrize("target", list(CAST_CASES))
def test_cast_loss_agrees_with_pyarrow_casts(tmp_path, target):
    import pyarrow as pa
    import pyarrow.compute as pc

    from driftline.core.lattice import to_arrow

    values = CAST_CASES[target] + [v for v, (t, _) in CAST_DIFFERENCES.items() if t == target]
    rule = "parse_integer" if target == "int64" else "parse_timestamp"
    schema = {"type": "object", "properties": {"v": {"x-driftline": {"arrow": target, "rule": rule}}}}
    _write(tmp_path / "d", "a.jsonl", [{"v": v} for v in values])
    v = compare(driftline.scan(tmp_path / "d"), baseline_from_json_schema(schema))
    lost = sum(x.count for x in (*v.violations, *v.allowed) if x.rule == "cast_loss")

    def casts(value: str) -> bool:
        try:
            pc.cast(pa.array([value]), to_arrow(parse_key(target)))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return False
        return True

    by_pyarrow = sum(not casts(x) for x in CAST_CASES[target])
    assert by_pyarrow == {"int64": 7, "timestamp[us, UTC]": 5}[target]  # the published behaviour
    extra = sum(1 for x, (t, _) in CAST_DIFFERENCES.items() if t == target and casts(x))  # we count these lost
    assert lost == by_pyarrow + extra


def test_rules_from_a_recommendation(tmp_path):
    # The recommender (recommendation/rules.py) plans day 1; its rules are the baseline of day 2.
    from driftline.gate.baseline import baseline_from_recommendation

    _write(
        tmp_path / "a",
        "x.jsonl",
        [
            {"tags": ["a"], "odd": 1, "at": "2026-11-29T10:00:00Z", "n": "12"},
            {"tags": "b", "odd": {"k": 1}, "at": "2026-11-29T11:00:00+01:00", "n": 7},
        ],
    )
    rec = driftline.scan(tmp_path / "a").recommend()
    base = baseline_from_recommendation(rec)
    assert {p: (e.rule, e.type.key()) for p, e in base.fields.items()} == {
        "at": ("parse_timestamp", "timestamp[us, UTC]"),
        "n": ("parse_integer", "int64"),
        "odd": ("keep_as_json_text", "string"),
        "tags": ("wrap_scalar_in_list", "list<string>"),
        "tags[]": ("identity", "string"),
    }
    _write(
        tmp_path / "b",
        "x.jsonl",
        [
            {"tags": "c", "odd": [1], "at": "yesterday", "n": "x"},
            {"tags": 5, "odd": "s", "at": "2026-11-29 10:00:00Z", "n": "n/a"},
        ],
    )
    v = compare(driftline.scan(tmp_path / "b"), base)
    # "c" is wrapped into a list of strings, 5 is not a string; odd is kept as JSON text whatever
    # it holds; "x" and "n/a" do not parse as integers. The timestamp rule parses the classes it
    # was planned for (params.accept: RFC 3339 only), so "yesterday" and the space-separated
    # "2026-11-29 10:00:00Z" are both lost, although pyarrow could cast the second.
    assert base.fields["at"].accept == frozenset({"timestamp_rfc3339"})
    assert [(x.rule, x.field, x.change, x.count, x.example) for x in (*v.violations, *v.warnings)] == [
        ("type_change", "tags", "list → int64", 1, "5"),
        ("cast_loss", "at", "cast rule parse_timestamp: string → timestamp[us, UTC]", 2, '"yesterday"'),
        ("cast_loss", "n", "cast rule parse_integer: string → int64", 2, '"x"'),
    ]
