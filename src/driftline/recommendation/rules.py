"""The cast rules: a registry of small pure functions, each named after the cast it proposes.

The planner offers a field's facts to the rules in REGISTRY order; the first rule that
applies plans the field (returns a FieldPlan), the others return None. ``identity`` comes
first (nothing to do), ``keep_as_json_text`` last: it always applies, and says that it is
the last resort. Nested rules plan their children through ``ctx.plan``.

>>> list(REGISTRY)[:3], list(REGISTRY)[-1]
(['identity', 'merge_struct', 'wrap_scalar_in_list'], 'keep_as_json_text')
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass, field

from driftline.core import paths
from driftline.core.lattice import STRING, DType, family
from driftline.core.stats import FieldStats, class_sample, type_sample
from driftline.core.words import count, plural
from driftline.observe.records import is_int_key
from driftline.recommendation.bounds import json_chars, value_chars
from driftline.recommendation.effects import scalar_effects, target_nullable
from driftline.recommendation.facts import Facts, FactsTree
from driftline.recommendation.options import RecommendOptions
from driftline.recommendation.plan import Alternative, Dropped, Effect, FieldPlan
from driftline.recommendation.reading import NESTED, PADDED, Reading, read_scalar, timestamp_formats

TOKENS_SHOWN = "'n/a', 'null', '-', ..."


@dataclass
class Context:
    """What rules may use besides the facts: the tree, the options, and the planner.

    plan(f) plans a path (None when min_field_share drops it); plans of the tree's own
    facts are kept, so a rule that looks at children twice plans them once.
    """

    tree: FactsTree
    opts: RecommendOptions
    dropped: list[Dropped] = field(default_factory=list)
    _plans: dict[str, FieldPlan | None] = field(default_factory=dict)
    # Keyed by id(); the Facts object is kept in the value so that its id is never reused.
    _readings: dict[int, tuple[Facts, Reading, tuple[Effect, ...]]] = field(default_factory=dict)

    def reading(self, f: Facts) -> tuple[Reading, tuple[Effect, ...]]:
        got = self._readings.get(id(f))
        if got is None or got[0] is not f:
            r = read_scalar(f, self.opts)
            got = self._readings[id(f)] = (f, r, scalar_effects(r, self.opts))
        return got[1], got[2]

    def plan(self, f: Facts) -> FieldPlan | None:
        own = self.tree.facts.get(f.path) is f
        if own and f.path in self._plans:
            return self._plans[f.path]
        plan = None if own and self._drops(f) else plan_field(f, self)
        if own:
            self._plans[f.path] = plan
        return plan

    def _drops(self, f: Facts) -> bool:
        s = f.summary
        if self.opts.min_field_share <= 0 or not s.container or s.share(s.stats.present) >= self.opts.min_field_share:
            return False
        self.dropped.append(Dropped(f.path, s.stats.present, s.container))
        return True


Rule = Callable[[Facts, Context], FieldPlan | None]


# -- shared helpers -------------------------------------------------------------------------


def _nested(f: Facts) -> set[str]:
    return set(f.kinds) & NESTED


def _observed(f: Facts) -> dict[str, object]:
    out: dict[str, object] = {}
    classes = {side: dict(c) for side, c in (("string", f.strings), ("text", f.cells)) if c}
    if classes:
        out["classes"] = classes
        out["max_length"] = {
            side: st.max_length for side, st in (("string", f.typed), ("text", f.text)) if side in classes
        }
    leap = f.typed.leap_seconds + f.text.leap_seconds
    if leap:
        out["leap_seconds"] = leap
    if isinstance(f.typed.minimum, str) and isinstance(f.typed.maximum, str):
        out["range"] = [f.typed.minimum, f.typed.maximum]  # temporal values, as ISO 8601 text
    low, high = f.typed.minimum, f.typed.maximum
    if all(isinstance(x, int | float) and not isinstance(x, bool) and math.isfinite(x) for x in (low, high)):
        out["numbers"] = [low, high]  # the smallest and largest number seen: an annotation, never a bound
    s = f.summary
    if s.container:
        out["null_share"] = (s.stats.nulls + s.absent) / s.container  # null or absent, as a report records it
    return out


def _inputs(f: Facts) -> dict[str, int]:
    out = dict(f.kinds)
    if f.text_values:
        out["text"] = f.text_values
    return out


def describe_inputs(inputs: dict[str, int]) -> str:
    """'3,838 float64, 122 strings and 599 CSV cells'."""
    parts = []
    for key, n in sorted(inputs.items(), key=lambda kv: (-kv[1], kv[0])):
        what = {"string": "strings", "text": "CSV cells", "struct": "objects", "list": "lists"}.get(key, key)
        parts.append(f"{n:,} {what}")
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1] if parts else "no values"


def parse_rule_name(t: DType) -> str:
    """The parse rule that yields type t."""
    n = t.name
    if n.startswith(("int", "uint")):
        return "parse_integer"
    if n.startswith("float"):
        return "parse_float"
    return {
        "decimal": "parse_decimal",
        "bool": "parse_boolean",
        "date32": "parse_date",
        "date64": "parse_date",
        "timestamp": "parse_timestamp",
    }.get(n, "parse_" + n)


def parquet_decimal_storage(precision: int) -> str:
    """Parquet physical type for a decimal stored as an integer (LogicalTypes.md, DECIMAL).

    >>> parquet_decimal_storage(9), parquet_decimal_storage(18), parquet_decimal_storage(19)
    ('INT32', 'INT64', 'FIXED_LEN_BYTE_ARRAY')
    """
    return "INT32" if precision <= 9 else "INT64" if precision <= 18 else "FIXED_LEN_BYTE_ARRAY"


def _params(r: Reading, t: DType) -> dict[str, object]:
    out: dict[str, object] = {"accept": sorted(r.accept), "tokens": dict(r.tokens), "empty": r.empty}
    if t.name == "timestamp":
        out.update(unit=t.unit, zone=t.tz, formats=timestamp_formats(r))
    if t.name == "decimal":
        assert t.precision is not None
        out.update(precision=t.precision, scale=t.scale, parquet=parquet_decimal_storage(t.precision))
    return out


def _scalar_plan(
    f: Facts, ctx: Context, rule: str, does: str, why: str, alternatives: tuple[Alternative, ...] = ()
) -> FieldPlan:
    r, effects = ctx.reading(f)
    target = target_nullable(r.target, f.summary.nullable, effects)
    notes = "; ".join(r.notes)
    return FieldPlan(
        path=f.path,
        name=f.name,
        target=target,
        rule=rule,
        does=does,
        why=why + (f"; {notes}" if notes and notes not in why else ""),
        inputs=_inputs(f),
        effects=effects,
        params=_params(r, target),
        alternatives=alternatives,
        required=f.summary.absent == 0,
        max_chars=value_chars(f) if target.name == "string" else None,
        input_chars=value_chars(f),
        observed=_observed(f),
    )


def _strings(r: Reading) -> int:
    return sum(x.count for x in r.forms if x.source != "typed")


def _lossy_alternatives(f: Facts, ctx: Context) -> tuple[Alternative, ...]:
    """Typed targets a string field would get at the price of nulls, with parse_strings, or by
    dropping leading zeros."""
    out = []
    changes: list[tuple[dict[str, object], str]] = [
        (dict(max_null_share=1.0), "max_null_share"),
        (dict(parse_strings="always"), ""),
    ]
    padded = f.strings.get(PADDED, 0) + f.cells.get(PADDED, 0)
    if padded and ctx.opts.leading_zeros == "keep":
        zeros: dict[str, object] = dict(leading_zeros="parse")
        if f.strings.get(PADDED):
            zeros["parse_strings"] = "always"
        changes.append((zeros, "leading_zeros"))
    for change, note in changes:
        alt = read_scalar(f, ctx.opts.replace(**change))
        if alt.target == STRING or alt.target.name == "null":
            continue
        lost = sum(x.count for x in alt.unparsed)
        share = lost / f.values if f.values else 0.0
        if note == "leading_zeros":
            both = ' and parse_strings = "always"' if "parse_strings" in change else ""
            text = f'drops the leading zeros of {count(padded, "value")}; leading_zeros = "parse"{both} chooses it'
        else:
            text = (
                f"would null {count(lost, 'string')} ({share:.1%}) that {plural(lost, 'does', 'do')} not parse; "
                f"max_null_share >= {share:.4g} chooses it"
                if note
                else 'parse_strings = "always" parses these strings'
            )
        if lost and note != "max_null_share":
            continue
        out.append(Alternative(parse_rule_name(alt.target), alt.target.key(), text))
    return tuple({a.target + a.note: a for a in out}.values())


# -- scalar rules ---------------------------------------------------------------------------


def identity(f: Facts, ctx: Context) -> FieldPlan | None:
    """Nothing to cast: every value already has the target type (or nested parts plan themselves)."""
    nested = _nested(f)
    if nested:
        if f.text_values or len(f.kinds) != 1:
            return None
        if nested == {"struct"}:
            children = _children(f, ctx)
            if any(not c.required for c in children) and f.summary.stats.types.get("struct"):
                return None  # fields come and go: merge_struct
            return _struct(
                f, ctx, "identity", children, "keeps each object as a struct", "every object holds the same fields"
            )
        if nested == {"list"}:
            return _list(f, ctx, "identity", "keeps each list", "every value is a list")
        return _map(f, ctx)
    r, effects = ctx.reading(f)
    if any(e.count or not e.exact for e in effects):
        return None
    if any(x.source == "typed" and x.dtype != r.target for x in r.forms):
        return None
    if r.target != STRING and _strings(r):
        return None
    kind = "text" if r.target == STRING else r.target.key()
    why = f"every value is already {kind}" if f.values else "only nulls were seen, so the type is null"
    return _scalar_plan(
        f, ctx, "identity", "keeps every value as it is", why, _lossy_alternatives(f, ctx) if r.target == STRING else ()
    )


def format_as_string(f: Facts, ctx: Context) -> FieldPlan | None:
    """Values of kinds that do not meet: strings stay, every other value becomes its text."""
    if _nested(f):
        return None
    r, _ = ctx.reading(f)
    typed = [x.key for x in r.forms if x.source == "typed"]
    if r.target != STRING or not typed:
        return None
    return _scalar_plan(
        f,
        ctx,
        "format_as_string",
        f"keeps strings and writes {', '.join(typed)} values as their text",
        f"the field holds {describe_inputs(_inputs(f))}",
        _lossy_alternatives(f, ctx),
    )


def _parse(name: str) -> Rule:
    def rule(f: Facts, ctx: Context) -> FieldPlan | None:
        if _nested(f):
            return None
        r, _ = ctx.reading(f)
        if r.target == STRING or r.target.name == "null" or parse_rule_name(r.target) != name:
            return None
        if not r.parsed and not r.unparsed:
            return None
        strings = _strings(r)
        classes = ", ".join(sorted(r.accept)) or "no"
        does = f"parses {classes} strings as {r.target.key()}"
        _, effects = ctx.reading(f)
        if any(e.cause == "null_token" for e in effects):
            does += f"; null tokens ({TOKENS_SHOWN}) become null"
        others = [x.key for x in r.forms if x.source == "typed" and x.dtype != r.target]
        if others:
            does += f"; {', '.join(others)} values are widened"
        why = f"{r.parsed:,} of {count(strings, 'string')} {plural(r.parsed, 'parses', 'parse')} as {r.target.key()}"
        alts: tuple[Alternative, ...] = ()
        if name == "parse_float" and not ctx.opts.prefer_decimal:
            dec = read_scalar(f, ctx.opts.replace(prefer_decimal=True))
            if dec.target.name == "decimal":
                alts = (
                    Alternative("parse_decimal", dec.target.key(), "exact decimals; prefer_decimal = true chooses it"),
                )
        return _scalar_plan(f, ctx, name, does, why, alts)

    rule.__name__ = rule.__qualname__ = name
    rule.__doc__ = f"Strings (JSON, Parquet, CSV cells) parsed as the {name[6:]} target, with null tokens."
    return rule


parse_integer = _parse("parse_integer")
parse_decimal = _parse("parse_decimal")
parse_float = _parse("parse_float")
parse_boolean = _parse("parse_boolean")
parse_date = _parse("parse_date")
parse_timestamp = _parse("parse_timestamp")


def map_null_tokens(f: Facts, ctx: Context) -> FieldPlan | None:
    """Null tokens ('n/a', 'null', '-', ...) and blank strings become null; the rest is kept."""
    if _nested(f):
        return None
    r, effects = ctx.reading(f)
    if not any(e.cause in ("null_token", "empty") and e.count for e in effects) or r.parsed or r.unparsed:
        return None
    return _scalar_plan(
        f,
        ctx,
        "map_null_tokens",
        f"turns null tokens ({TOKENS_SHOWN}) into null and keeps every other value",
        f"the field holds {describe_inputs(_inputs(f))}",
        _lossy_alternatives(f, ctx),
    )


def _widen(name: str, families: tuple[str, ...]) -> Rule:
    def rule(f: Facts, ctx: Context) -> FieldPlan | None:
        if _nested(f):
            return None
        r, effects = ctx.reading(f)
        if r.target.name in ("null", "string") or family(r.target) not in families:
            return None
        kinds = [x.key for x in r.forms if x.source == "typed"]
        alts: tuple[Alternative, ...] = ()
        unsafe = next((e for e in effects if e.cause == "unsafe_int"), None)
        if unsafe is not None:
            alts = _exact_integer_alternatives(kinds, unsafe.count)
        return _scalar_plan(
            f,
            ctx,
            name,
            f"widens {', '.join(kinds)} to {r.target.key()}",
            f"the field holds {describe_inputs(_inputs(f))}; {r.target.key()} holds them all",
            alts,
        )

    rule.__name__ = rule.__qualname__ = name
    rule.__doc__ = f"Typed values of several {families[0]} types, widened to the narrowest type holding all."
    return rule


def _exact_integer_alternatives(kinds: list[str], unsafe: int) -> tuple[Alternative, ...]:
    """What keeps large integers exact instead of float64: int64 while they all fit it; else a
    decimal with room for the longest integer literal (and 18 places), or their digits as text."""
    wide = [k for k in kinds if k == "uint64" or k.startswith("decimal(") and is_int_key(k)]
    digits = max([20, *(int(k[len("decimal(") : k.index(",")]) for k in wide if k != "uint64")])
    places = min(18, 76 - digits)
    decimal = Alternative(
        "widen_numeric",
        f"decimal({digits + places},{places})",
        f"holds every integer up to "
        f"{digits} digits and floats to {places} places; floats are binary fractions, so most "
        "are rounded",
    )
    if not wide:
        return (
            Alternative(
                "widen_numeric",
                "int64",
                f"keeps the {unsafe:,} large integers exact; float values "
                "lose their fraction (the scan does not count how many have one)",
            ),
            decimal,
        )
    return (
        decimal,
        Alternative("keep_as_json_text", "string", f"keeps the {unsafe:,} large integers exactly, as their digits"),
    )


widen_numeric = _widen("widen_numeric", ("numeric",))
widen_temporal = _widen("widen_temporal", ("local-time", "instant"))


# -- nested rules ---------------------------------------------------------------------------


def _children(f: Facts, ctx: Context) -> tuple[FieldPlan, ...]:
    planned = (ctx.plan(ctx.tree[p]) for p in f.children if paths.parent(p)[1] == "field")
    return tuple(sorted((p for p in planned if p is not None), key=lambda p: p.name))


def _struct(f: Facts, ctx: Context, rule: str, children: tuple[FieldPlan, ...], does: str, why: str) -> FieldPlan:
    target = DType("struct", fields=tuple((c.name, c.target) for c in children))
    return FieldPlan(
        path=f.path,
        name=f.name,
        target=target.with_nullable(f.summary.nullable),
        rule=rule,
        does=does,
        why=why,
        inputs=_inputs(f),
        children=children,
        required=f.summary.absent == 0,
        input_chars=json_chars(ctx.tree, f),
        observed=_observed(f),
    )


def merge_struct(f: Facts, ctx: Context) -> FieldPlan | None:
    """Objects whose fields differ: one struct with the union of the fields, absent ones null."""
    if _nested(f) != {"struct"} or len(f.kinds) != 1 or f.text_values:
        return None
    children = _children(f, ctx)
    sometimes = [c.name for c in children if not c.required]
    if not sometimes:
        return None
    return _struct(
        f,
        ctx,
        "merge_struct",
        children,
        "merges the objects into one struct with the union of their fields; a field an object lacks is null there",
        f"{len(sometimes):,} of {count(len(children), 'field')} {plural(len(sometimes), 'appears', 'appear')} "
        "in only some objects "
        f"({', '.join(sometimes[:5])}{', …' if len(sometimes) > 5 else ''})",
    )


def _list(
    f: Facts,
    ctx: Context,
    rule: str,
    does: str,
    why: str,
    item: FieldPlan | None = None,
    effects: tuple[Effect, ...] = (),
    params: dict[str, object] | None = None,
) -> FieldPlan:
    if item is None:
        item = ctx.plan(ctx.tree[paths.element(f.path)]) if paths.element(f.path) in ctx.tree.facts else None
    if item is None:
        item = _null_item(f)
    target = DType("list", item=item.target)
    return FieldPlan(
        path=f.path,
        name=f.name,
        target=target_nullable(target, f.summary.nullable, effects),
        rule=rule,
        does=does,
        why=why,
        inputs=_inputs(f),
        effects=effects,
        params=params or {},
        children=(item,),
        required=f.summary.absent == 0,
        input_chars=json_chars(ctx.tree, f),
        observed=_observed(f),
    )


def _null_item(f: Facts) -> FieldPlan:
    return FieldPlan(
        path=paths.element(f.path),
        name="item",
        target=DType("null"),
        rule="identity",
        does="keeps every value as it is",
        why="no element was ever seen",
    )


def _map(f: Facts, ctx: Context) -> FieldPlan:
    key = ctx.plan(ctx.tree[paths.map_part(f.path, "key")])
    value = ctx.plan(ctx.tree[paths.map_part(f.path, "value")])
    assert key is not None and value is not None
    if key.target.name == "null":  # maps that were always empty: Arrow keys cannot be null-typed
        key = dataclasses.replace(key, target=STRING, why="no key was ever seen; string holds any")
    target = DType("map", fields=(("key", key.target.with_nullable(False)), ("value", value.target)))
    return FieldPlan(
        path=f.path,
        name=f.name,
        target=target.with_nullable(f.summary.nullable),
        rule="identity",
        does="keeps each map",
        why="every value is a map",
        inputs=_inputs(f),
        children=(key, value),
        required=f.summary.absent == 0,
        input_chars=json_chars(ctx.tree, f),
        observed=_observed(f),
    )


def _without(st: FieldStats, drop: set[str]) -> FieldStats:
    """The scalar part of a list path's stats, minus the classes decided at the list level."""
    classes = {c: n for c, n in st.classes.items() if c not in drop}
    types = {k: n for k, n in st.types.items() if k not in NESTED}
    if "string" in types:
        types["string"] -= sum(n for c, n in st.classes.items() if c in drop)
        if types["string"] <= 0:
            del types["string"]
    samples = {
        k: v
        for k, v in st.samples.items()
        if k.kind == "type" and k.name not in NESTED or k.kind == "class" and k.name not in drop
    }
    return dataclasses.replace(st, types=types, classes=classes, samples=samples, nulls=0, items=0)


def wrap_scalar_in_list(f: Facts, ctx: Context) -> FieldPlan | None:
    """Scalars where lists are expected become one-element lists; the lists are kept."""
    nested = _nested(f)
    scalars = [k for k in f.kinds if k not in NESTED]
    if nested != {"list"} or not (scalars or f.text_values):
        return None
    item_path = paths.element(f.path)
    item_facts = ctx.tree.facts.get(item_path) or Facts(item_path, "item", f.summary)
    if _nested(item_facts):
        return None  # elements are lists, structs or maps: a scalar is not one of them
    merged = dataclasses.replace(item_facts, typed=item_facts.typed.merge(_without(f.typed, set())), text=f.text)
    r, _ = ctx.reading(merged)  # the item type decides which scalars are nulls
    typed_drop = {c for c, on in (("null_token", r.tokens["string"] == "null"), ("empty", r.empty == "null")) if on}
    text_drop = {"null_token"} if r.tokens["text"] == "null" else set()
    merged = dataclasses.replace(
        item_facts,
        typed=item_facts.typed.merge(_without(f.typed, typed_drop)),
        text=_without(f.text, text_drop | {"empty"}),
    )
    item = ctx.plan(merged)
    assert item is not None
    effects: list[Effect] = []
    tokens = (f.strings.get("null_token", 0) if "null_token" in typed_drop else 0) + (
        f.cells.get("null_token", 0) if text_drop else 0
    )
    if tokens:
        effects.append(Effect("null", "null_token", tokens, f.samples(class_sample("null_token"))))
    if "empty" in typed_drop and f.strings.get("empty"):
        effects.append(Effect("null", "empty", f.strings["empty"], f.samples(class_sample("empty"), text=False)))
    nulled = sum(e.count for e in effects)
    wrapped = sum(f.kinds[k] for k in scalars) + f.text_values - nulled
    keys = [*(type_sample(k) for k in scalars), *(class_sample(c) for c in f.cells if c not in ("empty", *text_drop))]
    effects.append(Effect("change", "wrapped", wrapped, f.samples(*keys)))
    return _list(
        f,
        ctx,
        "wrap_scalar_in_list",
        "turns each scalar into a one-element list and keeps the lists",
        f"the field holds {describe_inputs(_inputs(f))}; the scalars fit the list's elements",
        item,
        tuple(effects),
        {"tokens": dict(r.tokens), "empty": r.empty},
    )


def keep_as_json_text(f: Facts, ctx: Context) -> FieldPlan:
    """The last resort: kinds that cannot be reconciled; every value becomes its JSON text."""
    inputs = _inputs(f)
    effects: list[Effect] = []
    tokens = f.cells.get("null_token", 0) if ctx.opts.null_tokens != "never" else 0
    if tokens:
        effects.append(Effect("null", "null_token", tokens, f.samples(class_sample("null_token"), text=True)))
    n = f.typed.nonnull + f.text_values - tokens
    keys = [*(type_sample(k) for k in f.kinds), *(class_sample(c) for c in f.cells)]
    effects.append(
        Effect(
            "change",
            "as_json_text",
            n,
            f.samples(*keys),
            True,
            "the last resort: these kinds cannot be reconciled in one type",
        )
    )
    target = target_nullable(STRING, f.summary.nullable, tuple(effects))
    return FieldPlan(
        path=f.path,
        name=f.name,
        target=target,
        rule="keep_as_json_text",
        does="last resort: writes every value as its JSON text (strings quoted)",
        why=f"the field holds {describe_inputs(inputs)}, which no single type holds",
        inputs=inputs,
        effects=tuple(effects),
        params={"tokens": {"string": "keep", "text": "keep" if ctx.opts.null_tokens == "never" else "null"}},
        required=f.summary.absent == 0,
        max_chars=json_chars(ctx.tree, f),
        input_chars=json_chars(ctx.tree, f),
        observed=_observed(f),
    )


REGISTRY: dict[str, Rule] = {
    "identity": identity,
    "merge_struct": merge_struct,
    "wrap_scalar_in_list": wrap_scalar_in_list,
    "format_as_string": format_as_string,
    "parse_integer": parse_integer,
    "parse_decimal": parse_decimal,
    "parse_float": parse_float,
    "parse_boolean": parse_boolean,
    "parse_date": parse_date,
    "parse_timestamp": parse_timestamp,
    "map_null_tokens": map_null_tokens,
    "widen_numeric": widen_numeric,
    "widen_temporal": widen_temporal,
    "keep_as_json_text": keep_as_json_text,
}


def plan_field(f: Facts, ctx: Context) -> FieldPlan:
    """The plan of the first rule in REGISTRY that applies (keep_as_json_text always does)."""
    for rule in REGISTRY.values():
        plan = rule(f, ctx)
        if plan is not None:
            return plan
    raise AssertionError("keep_as_json_text always applies")  # pragma: no cover
