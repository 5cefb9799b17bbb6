"""The gate policy: safe defaults, TOML loading, and errors that name the key and the choices."""

from __future__ import annotations

import dataclasses

import pytest

from conftest import ROOT
from driftline.errors import InputPathError, PolicyError
from driftline.gate.policy import ACTIONS, RULES, Policy, key_help, keys, load_policy, policy_from_mapping


def test_defaults_are_the_ones_the_issue_asks_for():
    p = Policy()
    # source: issue 4 "check" — widening allowed, int → string fails, a new optional field
    # warns, a vanished required field fails, nulls in a non-nullable field fail.
    assert (p.widening, p.type_change, p.new_field, p.missing_required, p.unexpected_nulls) == (
        "allow",
        "fail",
        "warn",
        "fail",
        "fail",
    )
    assert (p.max_null_share_rise, p.max_file_error_rate, p.max_cast_loss) == (10.0, 0.0, 0)


def test_every_rule_has_an_action_key_and_every_key_is_known():
    assert set(RULES) <= set(keys())
    assert set(keys()) - set(RULES) == {"max_null_share_rise", "max_file_error_rate", "max_cast_loss"}
    assert [k for k, _, _ in key_help()] == list(keys())


def test_options_are_keyword_only_and_frozen():
    with pytest.raises(TypeError):
        Policy("warn")  # type: ignore[misc]
    with pytest.raises(dataclasses.FrozenInstanceError):
        Policy().widening = "fail"  # type: ignore[misc]


def test_a_toml_file_sets_each_key(tmp_path):
    f = tmp_path / "gate.toml"
    # source: TOML v1.0.0 (toml.io) — basic strings, integers and floats as values.
    f.write_text(
        'widening = "warn"\nnew_field = "fail"\nmax_null_share_rise = 2.5\nmax_cast_loss = 3\n'
        "max_file_error_rate = 5\n",
        encoding="utf-8",
    )
    p = load_policy(f)
    assert (p.widening, p.new_field, p.max_null_share_rise, p.max_cast_loss, p.max_file_error_rate) == (
        "warn",
        "fail",
        2.5,
        3,
        5.0,
    )
    assert isinstance(p.max_file_error_rate, float) and isinstance(p.max_cast_loss, int)
    assert p.type_change == "fail"  # untouched keys keep their defaults


def test_an_unknown_key_names_the_key_and_the_allowed_keys(tmp_path):
    f = tmp_path / "gate.toml"
    f.write_text('widen = "warn"\n', encoding="utf-8")
    with pytest.raises(PolicyError) as err:
        load_policy(f)
    msg = str(err.value)
    assert "unknown policy key 'widen'" in msg and "did you mean 'widening'" in msg
    assert msg.endswith("allowed keys: " + ", ".join(keys()))


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ('widening = "block"', "policy key 'widening' has the value 'block'; allowed values: allow, warn, fail"),
        ("widening = true", "policy key 'widening' has the value True; allowed values: allow, warn, fail"),
        ("max_cast_loss = 1.5", "policy key 'max_cast_loss' has the value 1.5; allowed values: a whole number"),
        ("max_cast_loss = -1", "policy key 'max_cast_loss' has the value -1; allowed values: a whole number"),
        ("max_cast_loss = false", "policy key 'max_cast_loss' has the value False"),
        ("max_null_share_rise = 101", "policy key 'max_null_share_rise' has the value 101; allowed values: 0 to 100"),
        # source: TOML v1.0.0 — nan and inf are valid float values, so they reach the range check.
        ("max_file_error_rate = nan", "policy key 'max_file_error_rate' has the value nan; allowed values: 0 to 100"),
        ('max_file_error_rate = "5%"', "policy key 'max_file_error_rate' has the value '5%'"),
    ],
)
def test_a_bad_value_names_the_key_and_the_allowed_values(tmp_path, text, expected):
    f = tmp_path / "gate.toml"
    f.write_text(text + "\n", encoding="utf-8")
    with pytest.raises(PolicyError) as err:
        load_policy(f)
    assert expected in str(err.value)
    assert repr(str(f)) in str(err.value)


def test_a_table_is_not_silently_ignored(tmp_path):
    f = tmp_path / "gate.toml"
    f.write_text('[changes]\nwidening = "warn"\n', encoding="utf-8")
    with pytest.raises(PolicyError, match="unknown policy key 'changes' \\(a table\\)"):
        load_policy(f)


def test_toml_syntax_errors_keep_the_position(tmp_path):
    f = tmp_path / "gate.toml"
    # source: TOML v1.0.0 — "Defining a key multiple times is invalid." (from memory of the spec text)
    f.write_text('widening = "warn"\nwidening = "fail"\n', encoding="utf-8")
    with pytest.raises(PolicyError, match=r"is not valid TOML: .*line 2"):
        load_policy(f)


def test_missing_and_non_utf8_files(tmp_path):
    with pytest.raises(InputPathError, match="cannot read policy file"):
        load_policy(tmp_path / "nope.toml")
    f = tmp_path / "latin1.toml"
    f.write_bytes(b'widening = "w\xe4rn"\n')
    with pytest.raises(PolicyError, match="is not UTF-8 text"):
        load_policy(f)


def test_the_constructor_checks_values_too():
    with pytest.raises(PolicyError, match="allowed values: allow, warn, fail"):
        Policy(type_change="error")  # type: ignore[arg-type]
    assert policy_from_mapping({}) == Policy()
    assert set(ACTIONS) == {"allow", "warn", "fail"}


def test_docs_name_every_key_with_its_default():
    doc = (ROOT / "docs" / "gate.md").read_text(encoding="utf-8")
    for key, default, _ in key_help():
        assert f"`{key}`" in doc, key
        assert f"| `{key}` | `{default}` |" in doc, f"docs/gate.md lists {key} with default {default}"
