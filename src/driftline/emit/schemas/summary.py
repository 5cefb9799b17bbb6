"""The terminal view of a recommendation: the unified schema, then each field's cast rule.

A rule's line says what it does to how many values, with a few of them and where they
are, e.g. ``pm25: parse_float → float64; 122 strings and 599 CSV cells, 6 would become
null ('n/a' at readings/region=east/day=2026-11-29/part-0000.jsonl.gz row 185, …)``,
then what the rule does and why it was chosen. Every piece of data goes through
safe_text into rich Text objects (never markup).
"""

from __future__ import annotations

import orjson
from rich.console import Console, ConsoleOptions, RenderResult
from rich.measure import Measurement
from rich.table import Table
from rich.text import Text

from driftline.core.stats import Example
from driftline.core.words import count
from driftline.emit.safe import safe_text
from driftline.recommendation.plan import CAUSES, Effect, FieldPlan, Recommendation
from driftline.recommendation.rules import describe_inputs

MAX_RULES_SHOWN = 200

_VERB = {"null": "would become null", "change": "would change"}
_LABEL = {
    "null_token": "null tokens",
    "empty": "blank strings",
    "unparsed": "do not parse",
    "unsafe_int": "integers beyond 2**53",
    "leap_second": "leap seconds",
    "truncated": "fractions cut",
    "rounded": "more than 15 digits",
    "wrapped": "scalars wrapped in a list",
    "as_text": "written as text",
    "as_json_text": "written as JSON text",
    "leading_zeros": "leading zeros dropped",
    "out_of_range": "beyond float64's range",
}


def _value(e: Example) -> str:
    try:
        v = orjson.loads(e.value)
    except orjson.JSONDecodeError:
        return safe_text(e.value, 40)
    return repr(v) if isinstance(v, str) else safe_text(e.value, 40)


def example_text(e: Example) -> str:
    """'n/a' at FILE row R."""
    return f"{safe_text(_value(e), 40)} at {safe_text(e.file, 160)} row {e.row}"


def effect_text(e: Effect, zone: str | None = None) -> str:
    """One effect as a phrase: '6 would become null ('n/a' at … row 185, …)'."""
    label = _LABEL.get(e.cause, e.cause)
    if e.cause == "assumed_zone":
        what = f"{e.count:,} local times read as {zone or 'the target zone'}"
    elif e.cause == "lowercase":
        what = f"{e.count:,} lower-case t/z upper-cased first (same instant)"
    elif e.kind == "note":
        what = f"{e.count:,} {CAUSES.get(e.cause, e.cause)}"
    elif not e.exact:
        what = f"some may {'become null' if e.kind == 'null' else 'change'} ({label}; the scan cannot count them)"
    else:
        what = f"{e.count:,} {_VERB[e.kind]} ({label})"
    if e.examples:
        shown = ", ".join(example_text(x) for x in e.examples[:2])
        what += f" ({shown}{', …' if e.count > 2 else ''})"
    return what


def _inputs_text(plan: FieldPlan) -> str:
    strings, cells = plan.inputs.get("string", 0), plan.inputs.get("text", 0)
    parts = [count(strings, "string")] * bool(strings) + [count(cells, "CSV cell")] * bool(cells)
    return " and ".join(parts) if parts else describe_inputs(plan.inputs)


def rule_line(plan: FieldPlan) -> str:
    """'pm25: parse_float → float64; 122 strings and 599 CSV cells, 6 would become null (…)'."""
    effects = [effect_text(e, plan.target.tz) for e in plan.effects if e.count or not e.exact]
    loss = ", ".join(effects) if effects else "no value nulled or changed"
    return f"{safe_text(plan.path)}: {plan.rule} → {safe_text(plan.target.key(), 80)}; {_inputs_text(plan)}, {loss}"


class _Folding:
    """A cell that may be narrower than its longest word and folds there: a type such as
    'struct<charge_cycles: int64, …>' gives way before the field names do."""

    def __init__(self, text: Text) -> None:
        self.text = text

    def __rich_measure__(self, console: Console, options: ConsoleOptions) -> Measurement:
        return Measurement(min(12, self.text.cell_len), self.text.cell_len)

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        yield self.text


def schema_table(rec: Recommendation, width: int = 120) -> Table:
    """The unified schema, one row per field; width is the console's."""
    table = Table(title="Unified schema", title_justify="left", pad_edge=False)
    plans = list(rec.walk())
    names = ["  " * (p.path.count(".") + p.path.count("[]")) + safe_text(p.path) for p in plans]
    # A field's name is what the reader looks for: it keeps its width (up to 40) and folds past
    # that, never cut, and so does the rule's; the type wraps, and folds, in what is left. On a
    # console too narrow to leave the type 16 columns, every column gives way.
    fixed = [
        min(40, max((len(n) for n in names), default=5)),
        len("nullable"),
        max((len(p.rule) for p in plans), default=4),
    ]
    keep = sum(fixed) + 13 + 16 <= width  # 13: the borders and the padding of four columns
    table.add_column("field", overflow="fold", width=fixed[0] if keep else None)
    table.add_column("type", overflow="fold")
    table.add_column("nullable", width=fixed[1] if keep else None)
    table.add_column("rule", overflow="fold", width=fixed[2] if keep else None)
    for plan, name in zip(plans, names, strict=True):
        table.add_row(
            Text(name),
            _Folding(Text(safe_text(plan.target.key(), 60), overflow="fold")),
            "yes" if plan.nullable else "no",
            Text(plan.rule, style="bold" if plan.rule != "identity" else "dim"),
        )
    return table


def rules_block(rec: Recommendation) -> Text:
    plans = [p for p in rec.walk() if p.rule != "identity"]
    text = Text()
    need = "needs" if len(plans) == 1 else "need"
    text.append(f"Cast rules ({count(len(plans), 'field')} {need} one)\n", style="bold")
    for plan in plans[:MAX_RULES_SHOWN]:
        text.append(rule_line(plan) + "\n")
        text.append(f"    does: {safe_text(plan.does, 240)}\n", style="dim")
        text.append(f"    why:  {safe_text(plan.why, 400)}\n", style="dim")
        for a in plan.alternatives:
            text.append(f"    or:   {a.rule} → {safe_text(a.target)}: {safe_text(a.note, 240)}\n", style="dim")
    if len(plans) > MAX_RULES_SHOWN:
        text.append(f"… {len(plans) - MAX_RULES_SHOWN} more in the rules file (--rules)\n")
    return text


def render(rec: Recommendation, console: Console, title: str | None = None) -> None:
    """Print the recommendation: overview (title: what was read, as typed; else the root), schema
    table, rules, dropped fields."""
    head = Text()
    head.append("driftline schema ", style="bold")
    head.append(safe_text(rec.root if title is None else title, None))
    head.append(
        f"\n{count(rec.rows, 'row')} in {count(rec.files, 'file')} → {count(len(rec.fields), 'top-level field')} "
        f"({rec.options.mode}; {count(len(rec.conflicts()), 'field')} strict mode would refuse)"
    )
    console.print(head)
    console.print()
    console.print(schema_table(rec, console.width))
    console.print()
    console.print(rules_block(rec), end="")
    if rec.dropped:
        console.print()
        for d in rec.dropped:
            console.print(
                Text(
                    f"dropped {safe_text(d.path)}: present in {d.present:,} of {d.container:,} "
                    f"(min_field_share = {rec.options.min_field_share:g})"
                )
            )
