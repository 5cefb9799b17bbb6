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

from driftline.core.words import count
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


OPERATORS = ("=", "==", "!=", "<", "<=", ">", ">=")
_HOW = f"write key OP value, e.g. 'day>=2026-11-01', with OP one of {' '.join(OPERATORS)}"


def parse_condition(text: str) -> Condition:
    """A condition from its text; OptionError (naming --where) when it cannot be read.

    A value that begins with an operator's character is a reversed or doubled operator
    ('day=>2026-11-01'), never a value: it is refused rather than compared as text.

    >>> try:
    ...     parse_condition("day=>2026-11-01")
    ... except OptionError as exc:
    ...     print(str(exc).split(";")[0])
    malformed --where 'day=>2026-11-01': '=>' is not an operator
    """
    m = _CONDITION.match(text) if isinstance(text, str) else None
    if m and m.group(3) and m.group(3)[0] in "<>=!":
        op = m.group(2) + re.match(r"[<>=!]+", m.group(3)).group(0)  # type: ignore[union-attr]
        raise OptionError(f"malformed --where {text!r}: {op!r} is not an operator; {_HOW}")
    if not m or not m.group(3):
        raise OptionError(f"malformed --where {text!r}; {_HOW}")
    return Condition(m.group(1), m.group(2), m.group(3))


def where_text(conditions: Sequence[Condition]) -> str:
    """The conditions as the command line gives them: "--where 'day>=2026-11-01'", joined by 'and'.

    >>> where_text([parse_condition("day>=2026-11-01"), parse_condition("region=north")])
    "--where 'day>=2026-11-01' and --where 'region=north'"
    """
    return " and ".join(f"--where '{c}'" for c in conditions)


def filter_problem(partitions: Sequence[Sequence[tuple[str, str]]], conditions: Sequence[Condition]) -> str:
    """Why conditions keep none of the files whose partition values are given (one tuple per
    file): a key that no file has, with the keys there are, or the filter itself.

    >>> files = [(("day", "2026-11-01"),), (("day", "2026-11-02"),)]
    >>> filter_problem(files, [parse_condition("daye>=2026-11-01")])
    "--where 'daye>=2026-11-01' names the partition key 'daye', which no file has; the partition keys are: day"
    >>> print(*filter_problem(files, [parse_condition("day>=2027-01-01")]).split("; "), sep="\\n")
    the filter removed every file (2 files matched none of --where 'day>=2027-01-01'
    day runs from 2026-11-01 to 2026-11-02)
    """
    values: dict[str, set[str]] = {}
    for parts in partitions:
        for key, value in parts:
            values.setdefault(key, set()).add(value)
    for c in conditions:
        if c.key not in values:
            known = (
                f"the partition keys are: {', '.join(sorted(values))}" if values else "no file is in a key=value folder"
            )
            return f"--where '{c}' names the partition key {c.key!r}, which no file has; {known}"
    spans = "; ".join(
        f"{key} runs from {min(values[key], key=_order)} to {max(values[key], key=_order)}"
        if len(values[key]) > 1
        else f"{key} is {next(iter(values[key]))} only"
        for key in dict.fromkeys(c.key for c in conditions)
    )
    matched = f"{count(len(partitions), 'file')} matched none of {where_text(conditions)}"
    return f"the filter removed every file ({matched}; {spans})"


def _order(value: str) -> tuple[int, int, str]:
    # The order conditions compare in: integers as numbers, before the other values as text.
    return (0, int(value), "") if _INTEGER.fullmatch(value) else (1, 0, value)


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
