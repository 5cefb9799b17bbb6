"""The terminal summary of a scan: overview, fields, drift events, file problems.

Every piece of data goes through safe_text and into rich Text objects (never markup).
"""

from __future__ import annotations

from collections import Counter

from rich.console import Console
from rich.table import Table
from rich.text import Text

from driftline.drift import Event
from driftline.emit.safe import safe_text
from driftline.emit.units import human_bytes
from driftline.profile import FieldSummary, Profile
from driftline.report import limit_notes, partition_types

MAX_EVENTS_SHOWN = 200
MAX_ISSUES_SHOWN = 50


def _pct(part: int, whole: int) -> str:
    if whole == 0 or part == 0:
        return "–"
    share = 100 * part / whole
    return "<0.1%" if share < 0.1 else f"{share:.1f}%"


def _types_cell(s: FieldSummary) -> Text:
    total = s.stats.nonnull
    if not total:
        return Text("unknown (no values)" if not s.stats.nulls else "null only", style="dim")
    parts = sorted(s.stats.types.items(), key=lambda kv: (-kv[1], kv[0]))
    text = Text()
    for i, (key, n) in enumerate(parts):
        if i:
            text.append(" · ")
        text.append(safe_text(key), style="bold" if i == 0 else "yellow")
        if len(parts) > 1:
            text.append(f" {_pct(n, total)}")
    return text


def _classes_cell(s: FieldSummary) -> Text:
    classes = s.stats.classes
    if not classes:
        return Text("")
    total = sum(classes.values())
    top = sorted(classes.items(), key=lambda kv: (-kv[1], kv[0]))[:3]
    return Text(", ".join(f"{c} {_pct(n, total)}" for c, n in top) + (" …" if len(classes) > 3 else ""))


def overview(profile: Profile) -> Text:
    formats = Counter(f.format for f in profile.files)
    errors = sum(1 for i in profile.issues if i.severity == "error")
    text = Text()
    text.append("driftline scan ", style="bold")
    text.append(safe_text(profile.root, None))
    text.append("\n")
    text.append(
        f"{len(profile.files)} files ({', '.join(f'{n} {k}' for k, n in sorted(formats.items()))}), "
        f"{profile.rows:,} rows, {human_bytes(profile.bytes)}, {len(profile.fields)} fields, "
        f"{len(profile.skipped)} skipped, {errors} file errors, {profile.duration_s:.2f} s"
    )
    parts = partition_types(profile)
    if parts:
        text.append("\npartitions: ")
        text.append(", ".join(f"{safe_text(k)} ({v['type']}, {len(v['values'])} values)" for k, v in parts.items()))
    return text


def fields_table(profile: Profile) -> Table:
    drifting = Counter(e.path for e in profile.events)
    table = Table(title="Fields", title_justify="left", show_lines=False, pad_edge=False)
    table.add_column("field")
    table.add_column("types (share of values)")
    table.add_column("null", justify="right")
    table.add_column("absent", justify="right")
    table.add_column("string content")
    table.add_column("drift", justify="right")
    for path, s in profile.fields.items():
        table.add_row(
            Text(safe_text(path)),
            _types_cell(s),
            _pct(s.stats.nulls, s.container),
            _pct(s.absent, s.container),
            _classes_cell(s),
            str(drifting[path]) if drifting[path] else "",
        )
    return table


def _where(e: Event) -> str:
    where = e.file
    if e.row is not None:
        where += f" row {e.row}"
    if e.line is not None:
        where += f" (line {e.line})"
    return where


def events_block(events: tuple[Event, ...]) -> Text:
    """Drift events as a numbered list: what changed on one line, where and an example on the next."""
    text = Text()
    text.append(f"Drift events, in scan order ({len(events)})\n", style="bold")
    width = len(str(min(len(events), MAX_EVENTS_SHOWN)))
    for i, e in enumerate(events[:MAX_EVENTS_SHOWN], 1):
        text.append(f"{i:>{width}}  ")
        text.append(f"{e.kind:<18}", style="bold")
        text.append(safe_text(e.path))
        if e.before or e.after:
            text.append(f": {safe_text(e.before or '–')} → {safe_text(e.after or '–')}")
        text.append("\n" + " " * (width + 2) + "at " + safe_text(_where(e), 200))
        if e.example:
            text.append(f", e.g. {safe_text(e.example, 40)}")
        unit = "rows from here on" if e.kind in ("field-gone", "nested-gone") else "values in that batch"
        text.append(f" ({e.count:,} {unit})\n")
    return text


def issues_block(profile: Profile) -> Text:
    """File problems as a list: severity and problem on one line, the place on the next.

    A list rather than a table, so that a long file path is never cut short.
    """
    issues = profile.issues
    text = Text()
    text.append(f"File problems ({len(issues)})\n", style="bold")
    for i in issues[:MAX_ISSUES_SHOWN]:
        text.append(f"{i.severity:<8} ", style="red" if i.severity == "error" else "yellow")
        text.append(safe_text(i.message, 200))
        text.append("\n         at " + safe_text(i.where(), 240) + "\n")
    return text


def render(profile: Profile, console: Console) -> None:
    console.print(overview(profile))
    console.print()
    console.print(fields_table(profile))
    console.print()
    if profile.events:
        console.print(events_block(profile.events), end="")
        if profile.event_total > len(profile.events):
            console.print(f"… {profile.event_total - len(profile.events):,} more events counted, not listed "
                          "(--max-events)")
        if len(profile.events) > MAX_EVENTS_SHOWN:
            console.print(f"… {len(profile.events) - MAX_EVENTS_SHOWN} more events in the JSON report (--json)")
    else:
        console.print("No drift: every batch shows the same fields and types.")
    notes = limit_notes(profile)
    if notes:
        console.print()
        console.print(Text("Limits reached\n", style="bold") + Text("".join(f"warning  {n}\n" for n in notes)), end="")
    if profile.issues:
        console.print()
        console.print(issues_block(profile), end="")
        if len(profile.issues) > MAX_ISSUES_SHOWN:
            console.print(f"… {len(profile.issues) - MAX_ISSUES_SHOWN} more in the JSON report (--json)")
