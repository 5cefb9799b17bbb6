"""One comparison for both baseline kinds: a JSON Schema baseline and a saved-report baseline
of the same data give the same verdict, rule by rule, on the same change.

The expected rule of each change is the policy's own meaning of that rule (docs/gate.md,
"The policy file": the table of rules and their defaults) # common practice: a table test
of changes × baseline kinds.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import driftline
from driftline.core.marker import MARKER

BASE_JSON = [
    {"id": 1, "v": "12", "t": "2026-11-29T10:00:00Z", "note": "a"},
    {"id": 2, "v": "7", "t": "2026-11-29T11:00:00Z"},
    {"id": 3, "v": "40", "t": "2026-11-29T12:00:00Z", "note": "b"},
]
BASE_CSV = "k,n\na,1\nb,2\nc,3\n"

# change → (the new records, or CSV text; the findings (rule, severity, field) expected).
CHANGES: dict[str, tuple[list[dict[str, object]] | str, set[tuple[str, str, str | None]]]] = {
    "none": (BASE_JSON, set()),
    "new field": (
        [{**r, "extra": 1} for r in BASE_JSON],
        {("new_field", "warn", "extra")},
    ),
    "vanished required field": (
        [{k: v for k, v in r.items() if k != "v"} for r in BASE_JSON],
        {("missing_required", "fail", "v")},
    ),
    "vanished optional field": (
        [{k: v for k, v in r.items() if k != "note"} for r in BASE_JSON],
        {("optional_gone", "warn", "note")},
    ),
    "type widening": (
        [{**BASE_JSON[0], "id": 2.5}, *BASE_JSON[1:]],
        {("widening", "allow", "id")},
    ),
    "type change": (
        [{**BASE_JSON[0], "id": "4"}, *BASE_JSON[1:]],
        {("type_change", "fail", "id")},
    ),
    "new nulls": (
        [{**BASE_JSON[0], "v": None}, *BASE_JSON[1:]],
        {("unexpected_nulls", "fail", "v"), ("null_share_rise", "warn", "v")},
    ),
    "content class change": (
        [{**BASE_JSON[0], "v": "x9"}, *BASE_JSON[1:]],
        {("content_class", "warn", "v")},
    ),
    # t's rule is parse_timestamp: a string of a format it was not planned for becomes null.
    "timestamp format change": (
        [{**BASE_JSON[0], "t": "29/11/2026 10:00"}, *BASE_JSON[1:]],
        {("cast_loss", "fail", "t")},
    ),
    "csv cell that no longer parses": ("k,n\na,1\nb,x9\n", {("cast_loss", "fail", "n")}),
    "csv new column": ("k,n,m\na,1,z\n", {("new_field", "warn", "m")}),
}
KINDS = ("json-schema", "report")


def _write(folder: Path, data: list[dict[str, object]] | str) -> Path:
    folder.mkdir(parents=True)
    if isinstance(data, str):
        (folder / "a.csv").write_text(data)
    else:
        (folder / "a.jsonl").write_text("".join(json.dumps(r) + "\n" for r in data))
    return folder


def _baseline(base: Path, kind: str, out: Path) -> Path:
    profile = driftline.scan(base)
    if kind == "report":
        target = out / "base.report.json"
        profile.write_json(target)
    else:
        target = out / "base.schema.json"
        profile.recommend().write(target, "json-schema")
    return target


def _findings(verdict: driftline.Verdict) -> set[tuple[str, str, str | None]]:
    return {(v.rule, v.severity, v.field) for v in (*verdict.violations, *verdict.warnings, *verdict.allowed)}


@pytest.mark.parametrize("change", list(CHANGES))
@pytest.mark.parametrize("kind", KINDS)
def test_each_change_gets_its_rule(tmp_path: Path, change: str, kind: str) -> None:
    data, expected = CHANGES[change]
    base = _write(tmp_path / "base", BASE_CSV if isinstance(data, str) else BASE_JSON)
    new = _write(tmp_path / "new", data)
    verdict = driftline.check(new, baseline=_baseline(base, kind, tmp_path))
    assert _findings(verdict) == expected
    assert verdict.passed is not any(sev == "fail" for _, sev, _ in expected)


@pytest.mark.parametrize("change", list(CHANGES))
def test_both_baseline_kinds_give_one_verdict(tmp_path: Path, change: str) -> None:
    data, _ = CHANGES[change]
    base = _write(tmp_path / "base", BASE_CSV if isinstance(data, str) else BASE_JSON)
    new = _write(tmp_path / "new", data)
    verdicts = {kind: driftline.check(new, baseline=_baseline(base, kind, tmp_path)) for kind in KINDS}
    schema, report = verdicts["json-schema"], verdicts["report"]
    assert schema.passed == report.passed
    assert [(r.rule, r.action, r.status, r.reason) for r in schema.rules] == [
        (r.rule, r.action, r.status, r.reason) for r in report.rules
    ]
    strip = lambda v: (v.rule, v.severity, v.field, v.change, v.message, v.count, v.row, v.example)  # noqa: E731
    for part in ("violations", "warnings", "allowed"):
        assert [strip(v) for v in getattr(schema, part)] == [strip(v) for v in getattr(report, part)], part


def test_the_report_baseline_is_the_schema_written_from_it(tmp_path: Path) -> None:
    base = _write(tmp_path / "base", BASE_JSON)
    report = _baseline(base, "report", tmp_path)
    from_report = tmp_path / "from-report.schema.json"
    driftline.recommend(driftline.load_report(report)).write(from_report, "json-schema")
    a = driftline.gate.baseline.load_baseline(report)
    b = driftline.gate.baseline.load_baseline(from_report)
    assert a.kind == "report" and b.kind == "json-schema"
    assert dict(a.fields) == dict(b.fields)
    assert MARKER in from_report.read_text()
