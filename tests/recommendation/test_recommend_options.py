"""RecommendOptions: keyword-only with safe defaults, validated, loadable from TOML; and what
each option changes in a recommendation."""

from __future__ import annotations

import json
from dataclasses import fields
from pathlib import Path

import pytest

import driftline
from conftest import ROOT
from driftline.errors import PolicyError
from driftline.recommendation import RecommendOptions, SchemaConflictError, recommend


def _root(tmp_path: Path, name: str, text: str) -> Path:
    (tmp_path / name).write_text(text)
    return tmp_path


def _jsonl(tmp_path: Path, rows: list[dict]) -> Path:
    return _root(tmp_path, "a.jsonl", "".join(json.dumps(r) + "\n" for r in rows))


def test_defaults_are_the_safe_ones():
    o = RecommendOptions()
    assert (
        o.mode,
        o.prefer_decimal,
        o.timestamp_unit,
        o.timestamp_zone,
        o.parse_strings,
        o.null_tokens,
        o.max_null_share,
        o.min_field_share,
    ) == ("permissive", False, "us", "UTC", "mixed", "parse", 0.0, 0.0)
    with pytest.raises(TypeError):
        RecommendOptions("strict")  # type: ignore[misc]  # keyword-only


def test_every_option_is_documented_value_by_value():
    doc = RecommendOptions.__module__ and __import__("driftline.recommendation.options", fromlist=["x"]).__doc__
    for f in fields(RecommendOptions):
        assert f"\n{f.name}\n" in doc
    for value in ("permissive", "strict", "mixed", "always", "parse", "never", '"s"', '"ns"'):
        assert value in doc
    docs = (ROOT / "docs" / "recommend.md").read_text()
    for f in fields(RecommendOptions):
        assert f"`{f.name}`" in docs


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"mode": "lenient"}, "mode must be one of permissive, strict; got 'lenient'"),
        ({"timestamp_unit": "m"}, "timestamp_unit must be one of s, ms, us, ns"),
        ({"max_null_share": 1.5}, "max_null_share must be a number from 0 to 1; got 1.5"),
        ({"min_field_share": True}, "min_field_share must be a number from 0 to 1; got True"),
        ({"prefer_decimal": "yes"}, "prefer_decimal must be true or false"),
        ({"timestamp_zone": "Mars/Olympus"}, "timestamp_zone 'Mars/Olympus' is neither an IANA zone name"),
    ],
)
def test_bad_values_name_the_option_and_what_is_allowed(change: dict, message: str):
    with pytest.raises(PolicyError, match=message.replace("(", r"\(").replace(")", r"\)")):
        RecommendOptions.from_mapping(change)


def test_toml_loading_names_the_file_and_the_key(tmp_path: Path):
    good = _root(tmp_path, "r.toml", '[recommend]\nmode = "strict"\nprefer_decimal = true\n[other]\nx = 1\n') / "r.toml"
    o = RecommendOptions.from_toml(good)
    assert (o.mode, o.prefer_decimal, o.timestamp_unit) == ("strict", True, "us")
    bad = _root(tmp_path, "b.toml", "[recommend]\nprefer_decimals = true\n") / "b.toml"
    with pytest.raises(PolicyError, match=r"b\.toml.*unknown option 'prefer_decimals'; known options: "):
        RecommendOptions.from_toml(bad)
    broken = _root(tmp_path, "c.toml", "[recommend\n") / "c.toml"
    with pytest.raises(PolicyError, match=r"c\.toml' is not valid TOML"):
        RecommendOptions.from_toml(broken)
    with pytest.raises(PolicyError, match="cannot read"):
        RecommendOptions.from_toml(tmp_path / "missing.toml")


def test_replace_ignores_options_not_given():
    o = RecommendOptions(timestamp_unit="ms").replace(mode="strict", prefer_decimal=None)
    assert (o.mode, o.timestamp_unit, o.prefer_decimal) == ("strict", "ms", False)


def test_strict_mode_refuses_conflicts_and_lists_them(tmp_path: Path):
    p = driftline.scan(_jsonl(tmp_path, [{"a": 1, "b": [1]}, {"a": 2.5, "b": 2}, {"a": "n/a", "b": None}]))
    rec = recommend(p)  # permissive: every field gets a rule
    assert [(x.path, x.rule) for x in rec.conflicts()] == [("b", "wrap_scalar_in_list")]
    with pytest.raises(SchemaConflictError, match=r"strict mode: 1 field needs .*: b \(wrap_scalar_in_list\)") as exc:
        recommend(p, mode="strict")
    assert [x.path for x in exc.value.conflicts] == ["b"]
    assert isinstance(exc.value, PolicyError)  # the strict policy cannot be met


def test_max_null_share_trades_text_for_a_typed_target(tmp_path: Path):
    rows = [{"n": i} for i in range(19)] + [{"n": "lots"}]
    p = driftline.scan(_jsonl(tmp_path, rows))
    keep = recommend(p).plan("n")
    assert (keep.rule, keep.target.key()) == ("format_as_string", "string")
    assert [(a.rule, a.target) for a in keep.alternatives] == [("parse_integer", "int64")]
    assert "would null 1 string (5.0%)" in keep.alternatives[0].note
    typed = recommend(p, max_null_share=0.05).plan("n")
    assert (typed.rule, typed.target.key(), typed.nulled) == ("parse_integer", "int64", 1)
    assert typed.effect("unparsed").examples[0].value == '"lots"'
    assert recommend(p, max_null_share=0.04).plan("n").rule == "format_as_string"


def test_parse_strings_keeps_quoted_numbers_by_default(tmp_path: Path):
    p = driftline.scan(_jsonl(tmp_path, [{"zip": "01234"}, {"zip": "99501"}]))
    keep = recommend(p).plan("zip")
    assert (keep.rule, keep.target.key()) == ("identity", "string")
    # "01234" has a leading zero (a ZIP code, common practice): only leading_zeros = "parse" makes it a number.
    assert [(a.rule, a.target, a.note) for a in keep.alternatives] == [
        (
            "parse_integer",
            "int64",
            'drops the leading zeros of 1 value; leading_zeros = "parse" and parse_strings = "always" chooses it',
        )
    ]
    assert recommend(p, parse_strings="always").plan("zip").rule == "identity"
    parsed = recommend(p, parse_strings="always", leading_zeros="parse").plan("zip")
    assert (parsed.rule, [(e.cause, e.count) for e in parsed.effects]) == ("parse_integer", [("leading_zeros", 1)])


def test_null_tokens_never_treats_them_as_text(tmp_path: Path):
    p = driftline.scan(_root(tmp_path, "a.csv", "v\n1\nNA\n2\n"))
    assert recommend(p).plan("v").rule == "parse_integer"
    never = recommend(p, null_tokens="never").plan("v")
    assert (never.rule, never.target.key()) == ("identity", "string")  # the cells stay text
    unparsed = recommend(p, null_tokens="never", max_null_share=0.5).plan("v")
    assert (unparsed.rule, [(e.cause, e.count) for e in unparsed.effects]) == ("parse_integer", [("unparsed", 1)])


def test_min_field_share_drops_rare_fields(tmp_path: Path):
    rows = [{"a": i} for i in range(9)] + [{"a": 9, "rare": True}]
    p = driftline.scan(_jsonl(tmp_path, rows))
    assert [f.name for f in recommend(p).fields] == ["a", "rare"]
    rec = recommend(p, min_field_share=0.2)
    assert [f.name for f in rec.fields] == ["a"]
    assert [(d.path, d.present, d.container) for d in rec.dropped] == [("rare", 1, 10)]


def test_timestamp_unit_sets_the_unit_of_parsed_strings(tmp_path: Path):
    p = driftline.scan(_jsonl(tmp_path, [{"t": "2026-11-29T10:00:00.125Z"}]))
    assert recommend(p, timestamp_unit="ms").plan("t").target.key() == "timestamp[ms, UTC]"
    assert (
        recommend(p, timestamp_unit="ns", timestamp_zone="Europe/Berlin").plan("t").target.key()
        == "timestamp[ns, Europe/Berlin]"
    )
