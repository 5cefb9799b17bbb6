"""What the recommender hands out: a plan per field path, its effects, the whole recommendation.

Values only; every view (the Arrow schema, the schema files, the rules file, the terminal
lines) is derived from these by the emitters.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any, Literal

import orjson
import pyarrow as pa

from driftline.core.lattice import DType, to_arrow

# The schema files' names (core/schemaformats.py, for a verb's --help), kept here for the recommender's users.
from driftline.core.schemaformats import JsonMode as JsonMode
from driftline.core.schemaformats import OutputFormat as OutputFormat
from driftline.core.schemaformats import SchemaFormat as SchemaFormat
from driftline.core.stats import Example
from driftline.core.words import count
from driftline.recommendation.options import RecommendOptions
from driftline.recommendation.partitions import PartitionColumn

EffectKind = Literal["null", "change", "note"]

#: Every cause an effect can name, with what it means. Apply measures the same causes.
CAUSES: dict[str, str] = {
    "null_token": "a null token such as 'n/a' becomes null",
    "empty": "an empty or blank string becomes null",
    "unparsed": "a string that does not parse as the target type becomes null",
    "unsafe_int": "an integer beyond ±(2**53-1) becomes float64, which need not hold it exactly (RFC 7493 §2.2)",
    "leap_second": "a leap second (:60) becomes :59 of the same minute (pyarrow rejects :60)",
    "truncated": "fraction digits finer than the target unit are cut off",
    "rounded": "a decimal or integer with more than 15 significant digits becomes float64 and may round",
    "leading_zeros": "a string with leading zeros (zero_padded: 09001) becomes a number, which keeps none of them",
    "out_of_range": "a float string beyond float64's range becomes ±inf (1e400), or 0 when too small (1e-400)",
    "wrapped": "a scalar becomes a one-element list",
    "as_text": "a non-string value becomes its text",
    "as_json_text": "a value becomes its JSON text",
    "assumed_zone": "a local time (no offset) is read in the target zone",
    "lowercase": "a lower-case RFC 3339 't' or 'z' is upper-cased before the cast (same instant)",
    "dropped": "the field is left out of the schema",
}


@dataclass(frozen=True, slots=True)
class Effect:
    """What a rule does to some of the values: null them, change them, or a note.

    exact is False when the scan could not count the values (count is then what it
    could count, usually 0, and note says why).
    """

    kind: EffectKind
    cause: str
    count: int
    examples: tuple[Example, ...] = ()
    exact: bool = True
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "kind": self.kind,
            "cause": self.cause,
            "count": self.count,
            "exact": self.exact,
            "examples": [e.to_json() for e in self.examples],
        }
        if self.note:
            out["note"] = self.note
        return out


@dataclass(frozen=True, slots=True)
class Alternative:
    """Another target the rule considered, and what it would have cost."""

    rule: str
    target: str  # type key
    note: str

    def to_json(self) -> dict[str, Any]:
        return {"rule": self.rule, "target": self.target, "note": self.note}


@dataclass(frozen=True, slots=True)
class FieldPlan:
    """One field path: its target type, the cast rule and what that rule would cost.

    inputs counts the values by the form they arrive in: a type key for typed values
    (JSON, Parquet), 'text' for CSV/TSV cells (blank cells are nulls, not counted).
    children are the struct fields, the list item ('[]') or the map key and value.
    """

    path: str
    name: str
    target: DType  # its nullable flag is the field's nullability
    rule: str
    does: str
    why: str
    inputs: dict[str, int] = field(default_factory=dict)
    effects: tuple[Effect, ...] = ()
    params: dict[str, Any] = field(default_factory=dict)
    alternatives: tuple[Alternative, ...] = ()
    children: tuple[FieldPlan, ...] = ()
    required: bool = False  # present in every row / parent value (JSON Schema "required")
    max_chars: int | None = None  # upper bound of the target's text length, when a string
    input_chars: int | None = None  # upper bound of an input value's text (CSV cell, JSON text)
    # What the scan saw that the schema files need: content classes and longest strings
    # per source ('string' typed, 'text' CSV), and leap seconds.
    observed: dict[str, Any] = field(default_factory=dict)

    @property
    def nullable(self) -> bool:
        return self.target.nullable

    @property
    def nulled(self) -> int:
        return sum(e.count for e in self.effects if e.kind == "null")

    @property
    def changed(self) -> int:
        return sum(e.count for e in self.effects if e.kind == "change")

    @property
    def exact(self) -> bool:
        return all(e.exact for e in self.effects)

    def effect(self, cause: str) -> Effect | None:
        """The effect with that cause, if the rule has one."""
        return next((e for e in self.effects if e.cause == cause), None)

    def child(self, name: str) -> FieldPlan:
        """The plan of a direct child, by name ('item' for a list's elements)."""
        for c in self.children:
            if c.name == name:
                return c
        raise KeyError(name)

    def walk(self) -> Iterator[FieldPlan]:
        """This plan and every plan below it, depth first."""
        yield self
        for c in self.children:
            yield from c.walk()


@dataclass(frozen=True, slots=True)
class Dropped:
    """A field left out by min_field_share, with how often it was present."""

    path: str
    present: int
    container: int

    def to_json(self) -> dict[str, Any]:
        return {"path": self.path, "present": self.present, "container": self.container}


@dataclass(frozen=True)
class Recommendation:
    """The unified schema: one plan per top-level field (sorted by name), plus what was dropped.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"t": "2026-11-29T10:00:00Z"}\\n')
    >>> rec = driftline.scan(d).recommend()
    >>> [(p.name, p.rule, p.target.key()) for p in rec.fields]
    [('t', 'parse_timestamp', 'timestamp[us, UTC]')]
    """

    root: str
    rows: int
    files: int
    fields: tuple[FieldPlan, ...]
    options: RecommendOptions
    dropped: tuple[Dropped, ...] = ()
    #: The key=value folder keys, typed by their values: the partition columns of the formats that have them.
    partitions: tuple[PartitionColumn, ...] = ()

    def walk(self) -> Iterator[FieldPlan]:
        """Every plan, top-level fields first, each followed by the plans below it."""
        for f in self.fields:
            yield from f.walk()

    def plan(self, path: str) -> FieldPlan:
        """The plan of one field path.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
        >>> driftline.scan(d).recommend().plan("x").rule
        'widen_numeric'
        """
        for p in self.walk():
            if p.path == path:
                return p
        raise KeyError(path)

    def field(self, name: str) -> FieldPlan:
        """The plan of a top-level field, by name (KeyError if the schema has none)."""
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)

    def conflicts(self) -> tuple[FieldPlan, ...]:
        """Plans that strict mode refuses (see is_conflict)."""
        return tuple(p for p in self.walk() if is_conflict(p))

    # -- the schema; its files are the public Recommendation's (driftline._api), since
    # they are rendered by driftline.emit.schemas, a floor above this one.
    @property
    def schema(self) -> pa.Schema:
        """The unified schema as a pyarrow.Schema: each field's rule as field metadata, every
        path's rule as schema metadata (the schema apply() casts to, and `--to arrow` writes).

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
        >>> driftline.scan(d).recommend().schema.field("x")
        pyarrow.Field<x: double not null>
        """
        return target_schema(self)

    def arrow_schema(self) -> pa.Schema:
        """The target as a pyarrow.Schema (with the rules as field metadata); the same as schema."""
        return target_schema(self)


#: Rules whose very use means the kinds of a field disagree.
CONFLICT_RULES = frozenset({"wrap_scalar_in_list", "format_as_string", "keep_as_json_text"})
#: Effects strict mode accepts: the values were nulls in all but spelling.
BENIGN_CAUSES = frozenset({"null_token", "empty", "lowercase"})


def is_conflict(plan: FieldPlan) -> bool:
    """True when strict mode refuses the plan: a conflicting rule, or a lossy or inexact effect."""
    if plan.rule in CONFLICT_RULES:
        return True
    return any((e.count or not e.exact) and e.cause not in BENIGN_CAUSES for e in plan.effects)


# -- what the scan saw, as a note: never a bound ---------------------------------------------
# A schema file is a contract for data still to come, so the figures of the sample (the longest
# string, the smallest and largest number, the share of nulls) go where no validator enforces
# them: JSON Schema "description", Avro "doc", Arrow field metadata (driftline.observed).
# `driftline schema --bounds-from-sample` turns some of them into bounds on purpose.


def _longest_string(plan: FieldPlan) -> int | None:
    """The longest string value the scan saw at this path (typed strings and CSV cells), if any."""
    lengths = plan.observed.get("max_length", {})
    return max(lengths.values()) if lengths else None


def _number(x: float) -> str:
    return f"{x:,}" if isinstance(x, int) else f"{x:g}"


def observed_note(plan: FieldPlan) -> str:
    """One line of observed figures, or '' when the scan saw nothing to tell.

    >>> p = FieldPlan("n", "n", DType("int64"), "identity", "", "", {"int64": 3},
    ...     observed={"numbers": [1, 2077], "null_share": 0.25})
    >>> observed_note(p)
    'observed (not enforced): 3 values; numbers from 1 to 2,077; 25.0% null or absent'
    """
    parts = []
    values = sum(plan.inputs.values())
    if values:
        parts.append(count(values, "value"))
    longest = _longest_string(plan)
    if longest is not None:
        parts.append(f"longest string {count(longest, 'character')}")
    numbers = plan.observed.get("numbers")
    if numbers:
        parts.append(f"numbers from {_number(numbers[0])} to {_number(numbers[1])}")
    span = plan.observed.get("range")
    if span:
        parts.append(f"from {span[0]} to {span[1]}")
    share = plan.observed.get("null_share")
    if share:
        parts.append(f"{100 * share:.1f}% null or absent")
    return "observed (not enforced): " + "; ".join(parts) if parts else ""


# -- the recommendation as an Arrow schema: the exact schema apply() produces -----------------
# Field order is name order at every level (struct fields included); each top-level field
# carries its rule as metadata, and the schema carries every path's rule as JSON.

RULE_KEY = b"driftline.rule"
RULES_KEY = b"driftline.rules"
OBSERVED_KEY = b"driftline.observed"


def arrow_type(plan: FieldPlan) -> pa.DataType:
    """The Arrow type of a plan, nested fields built from the child plans."""
    name = plan.target.name
    if name == "struct":
        return pa.struct([arrow_field(c) for c in plan.children])
    if name == "list":
        return pa.list_(arrow_field(plan.children[0], "item"))
    if name == "map":
        key, value = plan.children
        return pa.map_(pa.field("key", arrow_type(key), nullable=False), arrow_field(value, "value"))
    return to_arrow(plan.target)


def arrow_field(plan: FieldPlan, name: str | None = None) -> pa.Field:
    return pa.field(plan.name if name is None else name, arrow_type(plan), nullable=plan.nullable)


def _field_metadata(plan: FieldPlan) -> dict[bytes, bytes]:
    out = {RULE_KEY: plan.rule.encode()}
    note = observed_note(plan)
    if note:
        out[OBSERVED_KEY] = note.encode()
    return out


def target_schema(rec: Recommendation) -> pa.Schema:
    """The unified schema, with rules as metadata.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> print(target_schema(driftline.scan(d).recommend()).field("x"))
    pyarrow.Field<x: double not null>
    """
    fields = [arrow_field(p).with_metadata(_field_metadata(p)) for p in rec.fields]
    rules = {p.path: p.rule for p in rec.walk()}
    return pa.schema(fields, metadata={RULES_KEY: orjson.dumps(rules)})
