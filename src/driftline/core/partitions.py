"""Partition conditions (`--where 'day>=2026-11-01'`): parsing one, and testing key=value partitions.

Pure functions over strings, shared by local discovery, object store listing and the options
value. A condition names a partition key, an operator and a value; values compare as
integers when both sides are integers, else as strings (ISO dates order correctly as strings).

>>> c = parse_condition("day>=2026-11-29")
>>> partitions_pass((("day", "2026-11-30"),), [c]), partitions_pass((("day", "2026-11-28"),), [c])
(True, False)
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from driftline.errors import OptionError

_CONDITION = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_.-]*)\s*(>=|<=|!=|==|=|>|<)\s*(.*?)\s*$")
_INTEGER = re.compile(r"-?\d+")


@dataclass(frozen=True, slots=True)
class Condition:
    """One `key OP value` test on a key=value partition, e.g. `day>=2026-11-01`.

    >>> c = parse_condition("day>=2026-11-29")
    >>> c.holds("2026-11-30"), c.holds("2026-11-28"), str(c)
    (True, False, 'day>=2026-11-29')
    """

    key: str
    op: str
    value: str

    def holds(self, actual: str) -> bool:
        a: Any = actual
        b: Any = self.value
        if _INTEGER.fullmatch(actual) and _INTEGER.fullmatch(self.value):
            a, b = int(actual), int(self.value)
        return {
            ">=": a >= b,
            "<=": a <= b,
            ">": a > b,
            "<": a < b,
            "=": a == b,
            "==": a == b,
            "!=": a != b,
        }[self.op]

    def __str__(self) -> str:
        return f"{self.key}{self.op}{self.value}"


def parse_condition(text: str) -> Condition:
    """A condition from its text; OptionError (naming --where) when it cannot be read."""
    m = _CONDITION.match(text) if isinstance(text, str) else None
    if not m or not m.group(3):
        raise OptionError(
            f"cannot read --where {text!r}; write key OP value, e.g. 'day>=2026-11-01' (OP one of = != < <= > >=)"
        )
    return Condition(m.group(1), m.group(2), m.group(3))


def partitions_pass(parts: Sequence[tuple[str, str]], conditions: Sequence[Condition]) -> bool:
    """Whether a file with these partition values is kept (a missing key fails, as in SQL)."""
    values = dict(parts)
    return all(c.key in values and c.holds(values[c.key]) for c in conditions)


def folder_passes(name: str, conditions: Sequence[Condition]) -> bool:
    """Whether listing may descend into a folder: only a key=value folder can be ruled out.

    >>> folder_passes("day=3", [parse_condition("day<3")]), folder_passes("raw", [parse_condition("day<3")])
    (False, True)
    """
    key, sep, value = name.partition("=")
    if not sep:
        return True
    return all(c.holds(value) for c in conditions if c.key == key)
