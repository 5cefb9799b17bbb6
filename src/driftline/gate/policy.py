"""The gate policy: for each kind of change, allow / warn / fail, plus three thresholds.

A Policy is a value of keyword-only options with safe defaults. It loads from a TOML
file of flat keys; an unknown key or a bad value is a PolicyError that names the key and
what is allowed, never silently ignored.

>>> Policy().type_change, Policy(widening="warn").widening
('fail', 'warn')
>>> policy_from_mapping({"new_field": "fail"}).new_field
'fail'
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from driftline.core.jsontypes import JSONObject
from driftline.core.validation import check_document, pointer
from driftline.errors import InputPathError, PolicyError

Action = Literal["allow", "warn", "fail"]
ACTIONS: tuple[str, ...] = ("allow", "warn", "fail")
ACTION_MEANING = {
    "allow": "passes silently (listed as allowed in --json)",
    "warn": "passes with a warning (exit 0)",
    "fail": "a policy violation (exit 1)",
}

# The rules the gate checks, in report order: key → what it catches. Each rule's action is
# the Policy attribute of the same name; the threshold rules also have a `max_` limit.
RULES: dict[str, str] = {
    "type_change": "a value of a type the baseline type cannot hold (int64 → string)",
    "widening": "a value of a wider type of the same kind (int64 → float64)",
    "narrowing": "all values fit a narrower type than the baseline's (float64 → int64)",
    "new_field": "a field the baseline does not name",
    "missing_required": "a required field absent from some or all rows",
    "optional_gone": "an optional field absent from every scanned row",
    "unexpected_nulls": "nulls in a field the baseline declares non-nullable",
    "content_class": "strings of a content class the baseline lacks (e.g. not its format)",
    "out_of_range": "a number below the baseline's minimum or above its maximum, a string longer than its maxLength",
    "null_share_rise": "null/absent share up more than max_null_share_rise points",
    "file_errors": "more than max_file_error_rate percent of files have read errors",
    "unread_rows": "a file with rows set aside, or read as empty although it holds data",
    "cast_loss": "a cast rule would null more than max_cast_loss values of a field",
}

# The policy key that judges against a baseline the change each drift event kind reports
# against the scan's own past (docs/drift.md, "The gate's policy keys"); element-changed,
# partition-type and textclass-changed go by the event's level, field-gone and
# partition-lacks by whether the field is required.
_EVENT_RULES: dict[str, str] = {
    "field-new": "new_field",
    "nested-new": "new_field",
    "field-gone": "missing_required",
    "nested-gone": "missing_required",
    "type-widened": "widening",
    "type-conflict": "type_change",
    "element-changed": "type_change",
    "nulls-begin": "unexpected_nulls",
    "textclass-changed": "content_class",
    "partition-lacks": "missing_required",  # absent from the rows of some partition values
    "partition-type": "type_change",  # by level: widening, or narrowing where the others' type holds it
    "partition-nulls": "unexpected_nulls",
}


def rule_of_event(kind: str, level: str, *, required: bool = True) -> str:
    """The policy key that decides, in `check`, the change a drift event of this kind and level
    reports; a field-gone of a field the baseline holds optional is optional_gone.

    >>> rule_of_event("type-conflict", "breaking"), rule_of_event("element-changed", "widening")
    ('type_change', 'widening')
    >>> rule_of_event("field-gone", "breaking", required=False)
    'optional_gone'
    """
    rule = _EVENT_RULES[kind]
    if kind in ("element-changed", "partition-type") and level == "widening":
        return "widening"
    if kind == "partition-type" and level == "info":
        return "narrowing"
    if rule == "missing_required" and not required:
        return "optional_gone"
    return rule


DATASET_TABLES = ("baselines", "datasets")  # the policy file's tables for a root of several datasets

_THRESHOLDS: dict[str, tuple[type, float, float, str]] = {
    # key: (type, lowest, highest, unit); the rule it limits is the key without "max_"
    "max_null_share_rise": (float, 0.0, 100.0, "percentage points"),
    "max_file_error_rate": (float, 0.0, 100.0, "percent of scanned files"),
    "max_cast_loss": (int, 0, math.inf, "values per field"),
}
THRESHOLD_RULE = {
    "max_null_share_rise": "null_share_rise",
    "max_file_error_rate": "file_errors",
    "max_cast_loss": "cast_loss",
}


@dataclass(frozen=True, kw_only=True, slots=True)
class Policy:
    """What the gate does with each kind of change. Keys and defaults as in docs/gate.md.

    Every action is one of 'allow', 'warn', 'fail'. Thresholds: a null share may rise by
    at most max_null_share_rise percentage points; at most max_file_error_rate percent of
    files may have a read error; a cast rule may lose at most max_cast_loss values.

    >>> Policy(widening="warn", max_cast_loss=5).action("widening")
    'warn'
    >>> Policy(new_field="block")
    Traceback (most recent call last):
    driftline.errors.PolicyError: policy key 'new_field' has the value 'block'; allowed values: allow, warn, fail
    """

    type_change: Action = "fail"
    widening: Action = "allow"
    narrowing: Action = "allow"
    new_field: Action = "warn"
    missing_required: Action = "fail"
    optional_gone: Action = "warn"
    unexpected_nulls: Action = "fail"
    content_class: Action = "warn"
    out_of_range: Action = "fail"
    null_share_rise: Action = "warn"
    max_null_share_rise: float = 10.0
    file_errors: Action = "fail"
    max_file_error_rate: float = 0.0
    unread_rows: Action = "fail"
    cast_loss: Action = "fail"
    max_cast_loss: int = 0

    def __post_init__(self) -> None:
        for key in RULES:
            value = getattr(self, key)
            if value not in ACTIONS:
                raise PolicyError(f"policy key {key!r} has the value {value!r}; allowed values: {', '.join(ACTIONS)}")
        for key, (kind, low, high, unit) in _THRESHOLDS.items():
            value = getattr(self, key)
            ok = isinstance(value, int | float) and not isinstance(value, bool)
            if ok and kind is int:
                ok = isinstance(value, int) or float(value).is_integer()
            if not ok or not (low <= value <= high):
                bound = f"{low:g} to {high:g}" if high != math.inf else f"a whole number from {low:g} up"
                raise PolicyError(f"policy key {key!r} has the value {value!r}; allowed values: {bound} ({unit})")
            object.__setattr__(self, key, kind(value))

    def action(self, rule: str) -> Action:
        """The action for a rule name from RULES."""
        action: Action = getattr(self, rule)
        return action

    def to_dict(self) -> JSONObject:
        """Every key with its value, as a policy file would spell it."""
        return dataclasses.asdict(self)


def keys() -> tuple[str, ...]:
    """Every policy key, in file order."""
    return tuple(f.name for f in dataclasses.fields(Policy))


def key_help() -> list[tuple[str, str, str]]:
    """(key, default, meaning) for every key: the single source of the --help table and docs."""
    defaults = Policy()
    out = []
    for key in keys():
        default = getattr(defaults, key)
        if key in RULES:
            out.append((key, f'"{default}"', RULES[key]))
        else:
            _, low, high, unit = _THRESHOLDS[key]
            out.append((key, f"{default:g}", f"the limit of {THRESHOLD_RULE[key]}, in {unit}"))
    return out


def policy_from_mapping(data: Mapping[str, Any], *, source: str = "policy") -> Policy:
    """Build a Policy from already-parsed keys (a TOML table); names unknown keys."""
    known = keys()
    for key in data:
        if key not in known:
            close = difflib.get_close_matches(str(key), known, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise PolicyError(
                f"{source} at {pointer([str(key)])}: unknown policy key {key!r}{hint}; allowed keys: {', '.join(known)}"
            )
    try:
        return Policy(**data)
    except PolicyError as exc:
        bad = next((k for k in data if f"policy key {k!r} " in str(exc)), None)
        raise PolicyError(f"{source}{f' at {pointer([bad])}' if bad else ''}: {exc}") from None


def load_policy(path: str | Path) -> Policy:
    """Read a policy from a TOML file of flat keys (see docs/gate.md).

    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "gate.toml"; _ = f.write_text('widening = "warn"\\n')
    >>> load_policy(f).widening
    'warn'
    """
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise InputPathError(f"cannot read policy file {str(path)!r}: {exc.strerror}") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise PolicyError(f"policy file {str(path)!r} is not UTF-8 text (byte {exc.start})") from None
    except tomllib.TOMLDecodeError as exc:
        raise PolicyError(f"policy file {str(path)!r} is not valid TOML: {exc}") from None
    data.pop("output", None)  # the [output] table: how examples are shown (driftline.core.valuepolicy.output_values)
    # [baselines] and [datasets]: a root of several datasets (gate/baselines.py reads them)
    tables = [k for k, v in data.items() if isinstance(v, dict) and k not in DATASET_TABLES]
    if tables:
        raise PolicyError(
            f"policy file {str(path)!r} at {pointer([tables[0]])}: unknown policy key {tables[0]!r} (a table); "
            f"policy keys are flat, one per line; allowed keys: {', '.join(keys())}"
        )
    flat = {k: v for k, v in data.items() if not (k in DATASET_TABLES and isinstance(v, dict))}
    policy = policy_from_mapping(flat, source=f"policy file {str(path)!r}")
    check_document(data, "policy", "policy file", repr(str(path)))  # docs/policy.schema.json
    return policy
