"""The terminal summary of a scan: overview, fields, drift events, file problems.

Every piece of data goes through safe_text and into rich Text objects (never markup).
"""

from __future__ import annotations

import textwrap
from collections import Counter

from rich import box
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table
from rich.text import Text

from driftline.core.options import DEFAULT_MAX_EVENTS
from driftline.core.words import count
from driftline.emit.reach import reach_text, short_reach
from driftline.emit.safe import safe_text
from driftline.emit.units import human_bytes
from driftline.results.drift import Event
from driftline.results.levels import LEVELS
from driftline.results.profile import FieldSummary, Profile
from driftline.results.report import limit_notes, partition_types
from driftline.results.shapes import Discriminator

MAX_ISSUES_SHOWN = 50
MAX_ENCODINGS_SHOWN = 10
MAX_SHAPES_SHOWN = 12  # values of a discriminator, one line each
MAX_SHAPE_FIELDS_SHOWN = 6  # fields named on a value's line


def _pct(part: int, whole: int) -> str:
    if whole == 0 or part == 0:
        return "–"
    share = 100 * part / whole
    return "<0.1%" if share < 0.1 else f"{share:.1f}%"


def _types_cell(s: FieldSummary, budget: int | None = None) -> Text:
    """The types with their shares, most common first; in the compact table (budget: the
    characters the column may take) as many as fit on one line, then how many more."""
    total = s.stats.nonnull
    if not total:
        return Text("unknown (no values)" if not s.stats.nulls else "null only", style="dim")
    parts = sorted(s.stats.types.items(), key=lambda kv: (-kv[1], kv[0]))
    words = [safe_text(key) + (f" {_pct(n, total)}" if len(parts) > 1 else "") for key, n in parts]
    shown = len(words)
    if budget is not None:  # the first type always; each next one while it and the "+N" still fit
        shown = 1
        while shown < len(words):
            more = len(words) - shown - 1
            need = cell_len(" · ".join(words[: shown + 1])) + (len(f" +{more}") if more else 0)
            if need > budget:
                break
            shown += 1
    text = Text()
    for i, word in enumerate(words[:shown]):
        if i:
            text.append(" · ")
        key, _, share = word.rpartition(" ") if len(parts) > 1 else (word, "", "")
        text.append(key, style="bold" if i == 0 else "yellow")
        if share:
            text.append(f" {share}")
    if shown < len(words):
        text.append(f" +{len(words) - shown}", style="dim")
    return text


SOURCE_LABELS = {"strings": "strings", "cells": "CSV cells"}


def _classes_cell(by_source: dict[str, dict[str, int]]) -> Text:
    """The content classes of a field's strings and of its CSV cells, apart, each as shares of
    its own count (Profile.classes_by_source): 'CSV cells: integer 98.0%, empty 2.0%'."""
    lines = []
    for source, classes in by_source.items():
        total = sum(classes.values())
        top = list(classes.items())[:3]
        more = " …" if len(classes) > 3 else ""
        lines.append(f"{SOURCE_LABELS[source]}: " + ", ".join(f"{c} {_pct(n, total)}" for c, n in top) + more)
    return Text("\n".join(lines))


def overview(profile: Profile, title: str | None = None) -> Text:
    """The first lines: what was scanned (title, else the profile's root folder), the counts, the
    drift by level, what was skipped for its extension, the partitions and encodings."""
    formats = Counter(f.format for f in profile.files)
    errors = profile.error_count
    # A file may hold several errors: say over how many files, so that the count agrees with
    # "every one of the N files failed" and with the problems listed.
    spread = f" in {count(profile.failed_files, 'file')}" if errors != profile.failed_files else ""
    text = Text()
    text.append("driftline scan ", style="bold")
    text.append(safe_text(profile.root if title is None else title, None))
    text.append("\n")
    text.append(
        f"{count(len(profile.files), 'file')} ({', '.join(f'{n} {k}' for k, n in sorted(formats.items()))}), "
        f"{count(profile.rows, 'row')}, {human_bytes(profile.bytes)}, {count(len(profile.fields), 'field')}, "
        f"{len(profile.skipped):,} skipped, {count(errors, 'file error')}{spread}, {profile.duration_s:.2f} s"
    )
    if profile.event_total:  # on the first screen, before the field table
        text.append(f"\ndrift: {count(profile.event_total, 'event')}, ")
        text.append(levels_line(profile.level_counts))
    other = [s.rel for s in profile.skipped if s.reason == "other-extension"]
    if other:  # skipped unopened for their extension alone: say so, they may be data
        names = ", ".join(safe_text(r, 60) for r in other[:3])
        more = f" and {len(other) - 3:,} more" if len(other) > 3 else ""
        text.append(f"\nskipped for their extension: {names}{more} (--sniff-unknown reads them)")
    parts = partition_types(profile)
    if parts:
        text.append("\npartitions: ")
        text.append(
            ", ".join(f"{safe_text(k)} ({v['type']}, {count(len(v['values']), 'value')})" for k, v in parts.items())
        )
    encodings = encodings_line(profile)
    if encodings:
        text.append("\n" + encodings)
    return text


MAX_DIALECT_FILES_SHOWN = 3


def dialects_block(profile: Profile, width: int | None = None) -> Text:
    """The CSV dialects found, one line per distinct dialect with its files (a few named),
    wrapped to width with its continuation lines indented."""
    groups: dict[str, list[tuple[str, float, str]]] = {}
    for f in profile.files:
        if f.dialect is not None:
            groups.setdefault(f.dialect.shape(), []).append((f.rel, f.dialect.confidence, f.dialect.certainty()))
    text = Text(no_wrap=True, overflow="ignore")
    for shape, files in groups.items():
        low, high = min(c for _, c, _ in files), max(c for _, c, _ in files)
        how = files[0][2] if len({h for _, _, h in files}) == 1 else f"confidence {low:.2f}–{high:.2f}"
        body = f"{safe_text(shape, None)} ({how}): " + (f"{len(files):,} files, e.g. " if len(files) > 1 else "")
        body += ", ".join(safe_text(rel, 80) for rel, _, _ in files[:MAX_DIALECT_FILES_SHOWN])
        lines = hanging("dialect: ", body, width)
        text.append("dialect: ", style="bold")
        text.append(lines[0][len("dialect: ") :] + "\n")
        for line in lines[1:]:
            text.append(line + "\n")
    return text


def encodings_line(profile: Profile) -> str:
    """The text files not read as UTF-8, each with its encoding and how it was found; '' when
    every text file was UTF-8."""
    text_files = [f for f in profile.files if f.encoding is not None]
    other = [f for f in text_files if not f.encoding.is_utf8]  # type: ignore[union-attr]
    if not other:
        return ""
    parts = [f"{safe_text(f.rel)} {f.encoding.describe()}" for f in other[:MAX_ENCODINGS_SHOWN]]  # type: ignore[union-attr]
    if len(other) > MAX_ENCODINGS_SHOWN:
        parts.append(f"… {len(other) - MAX_ENCODINGS_SHOWN} more in the JSON report")
    utf8 = len(text_files) - len(other)
    return "text encodings: " + (f"{count(utf8, 'file')} utf-8; " if utf8 else "") + "; ".join(parts)


def shapes_block(found: Discriminator) -> Text:
    """The discriminator in one line, then one line per value (at most MAX_SHAPES_SHOWN) with
    its rows and the fields of its own (those not every value holds).

    >>> from driftline.results.shapes import Shape
    >>> d = Discriminator("partition", "event", (Shape("push", 5, ("id", "ref")), Shape("pull", 2, ("id", "pr"))),
    ...                   ("pr", "ref"), ("id",))
    >>> print(shapes_block(d).plain, end="")
    shapes: partition key event explains which fields the records hold (2 values, 1 field shared, 2 explained)
      event=push  5 rows: ref
      event=pull  2 rows: pr
    """
    what = "partition key" if found.source == "partition" else "field"
    text = Text()
    text.append("shapes: ", style="bold")
    text.append(f"{what} {safe_text(found.name)} explains which fields the records hold (")
    shared = len(found.shared)
    text.append(f"{count(len(found.shapes), 'value')}, {count(shared, 'field')} shared, ")
    text.append(f"{len(found.explained):,} explained)\n")
    labels = [f"{safe_text(found.name)}={safe_text(s.value, 40)}" for s in found.shapes[:MAX_SHAPES_SHOWN]]
    width = max(map(len, labels), default=0)
    rows_width = max((len(f"{s.rows:,}") for s in found.shapes[:MAX_SHAPES_SHOWN]), default=0)
    for label, shape in zip(labels, found.shapes, strict=False):
        own = found.own(shape)
        names = ", ".join(safe_text(p, 60) for p in own[:MAX_SHAPE_FIELDS_SHOWN]) or "no fields of its own"
        more = f" and {len(own) - MAX_SHAPE_FIELDS_SHOWN:,} more" if len(own) > MAX_SHAPE_FIELDS_SHOWN else ""
        optional = f"; {len(shape.optional):,} optional" if shape.optional else ""
        text.append(f"  {label:<{width}}  {shape.rows:>{rows_width},} rows: {names}{more}{optional}\n")
    if len(found.shapes) > MAX_SHAPES_SHOWN:
        text.append(f"  … {count(len(found.shapes) - MAX_SHAPES_SHOWN, 'more value')} in the JSON report (--json)\n")
    return text


# The denominators of the field table's shares, said on a line under it (the HTML and the report's
# JSON Schema say the same): a type's share is of the non-null values, so that a field's
# types add up to 100% however many nulls it holds.
SHARES_NOTE = "types: % of non-null values; null, absent: % of rows or of the parent's values"

# Below this width the field table drops its string content column (--full-table keeps it).
FULL_TABLE_WIDTH = 120


_NARROW_COLUMNS = 26  # the compact table's null, absent and drift columns with every column's padding


def fields_table(profile: Profile, width: int | None = None) -> Table:
    """One row per field: types, null and absent shares, string content, drift events. Under
    FULL_TABLE_WIDTH columns (width given) the string content column is left out and the
    borders are light, so that a row stays one line; a field path is never cut."""
    drifting = Counter(e.path for e in profile.events)
    compact = width is not None and width < FULL_TABLE_WIDTH
    paths = [safe_text(p) for p in profile.fields]
    table = Table(
        title="Fields" + (" (string content: --full-table)" if compact else ""),
        title_justify="left",
        show_lines=False,
        pad_edge=False,
        box=box.SIMPLE_HEAD if compact else box.HEAVY_HEAD,
    )
    widest = max(map(cell_len, paths), default=5)
    table.add_column("field", no_wrap=True, min_width=widest)
    table.add_column("types (share of non-null)")
    table.add_column("null", justify="right", no_wrap=True)
    table.add_column("absent", justify="right", no_wrap=True)
    if not compact:
        table.add_column("string content")
    table.add_column("drift", justify="right", no_wrap=True)
    by_source = profile.classes_by_source
    # What the other columns leave the types in the compact table: the field, then null,
    # absent and drift (each with its padding), so that a row stays one line.
    budget = max(12, width - widest - _NARROW_COLUMNS) if compact and width is not None else None
    for path, (path_key, s) in zip(paths, profile.fields.items(), strict=True):
        cells: list[Text | str] = [
            Text(path),
            _types_cell(s, budget),
            _pct(s.stats.nulls, s.container),
            _pct(s.absent, s.container),
        ]
        if not compact:
            cells.append(_classes_cell(by_source.get(path_key, {})))
        cells.append(str(drifting[path]) if drifting[path] else "")
        table.add_row(*cells)
    return table


MAX_FORMAT_FIELDS_SHOWN = 8


def formats_block(profile: Profile) -> Text:
    """The fields whose file formats gave them different physical types, each with the types per
    format (a CSV cell's is the type its text reads as); empty when no field differs. Drift
    compares one logical type across formats (docs/drift.md): this is what each format held."""
    differ = {
        path: by
        for path, by in profile.types_by_format.items()
        if len(by) > 1 and len({tuple(types) for types in by.values()}) > 1
    }
    text = Text()
    if not differ:
        return text
    text.append("types by format", style="bold")
    text.append(" (fields whose formats gave other physical types; drift compares one logical type):\n")
    for path, by in list(differ.items())[:MAX_FORMAT_FIELDS_SHOWN]:
        text.append("  " + safe_text(path, 60) + ": ")
        text.append(" · ".join(f"{fmt} {', '.join(types)}" for fmt, types in by.items()) + "\n")
    if len(differ) > MAX_FORMAT_FIELDS_SHOWN:
        text.append(f"  … {len(differ) - MAX_FORMAT_FIELDS_SHOWN} more in the JSON report (fields.*.formats)\n")
    return text


def levels_line(counts: dict[str, int]) -> str:
    """How many drift events of each level, most urgent first: '2 breaking, 1 widening, 0 info'."""
    return ", ".join(f"{n:,} {level}" for level, n in counts.items())


def by_level(events: tuple[Event, ...]) -> list[tuple[str, list[Event]]]:
    """The events grouped by level, breaking first (LEVELS order); within a level grouped by
    field, the fields in the order they first drift, each field's events in scan order."""
    groups: dict[str, dict[str, list[Event]]] = {level: {} for level in LEVELS}
    for e in events:
        groups[e.level].setdefault(e.path, []).append(e)
    return [(level, [e for fld in by_path.values() for e in fld]) for level, by_path in groups.items() if by_path]


def hanging(head: str, body: str, width: int | None) -> list[str]:
    """head then body on one line, or body wrapped to width with its continuation lines
    indented under the body's start (never back at column 0); width None: one line.

    >>> hanging(" 1  kind ", "alpha beta gamma delta epsilon zeta eta theta", 40)
    [' 1  kind alpha beta gamma delta epsilon', '         zeta eta theta']
    """
    if width is None or cell_len(head) + cell_len(body) <= width:
        return [head + body]
    room = max(width - cell_len(head), 20)
    lines = textwrap.wrap(body, room, break_long_words=False, break_on_hyphens=False) or [""]
    return [head + lines[0]] + [" " * cell_len(head) + line for line in lines[1:]]


def events_block(
    events: tuple[Event, ...],
    counts: dict[str, int] | None = None,
    limit: int = DEFAULT_MAX_EVENTS,
    width: int | None = None,
    detail: bool = False,
    heading: bool = True,
) -> Text:
    """Drift events grouped by level, breaking first, then by field, numbered, one line per
    episode when it fits width, numbered as the JSON report lists them (scan order): kind, field,
    before → after and a short reach (detail: the
    full reach with positions and an example, as --events-detail shows); a longer line wraps
    indented. The first `limit` of them in that order (--max-events). counts (every event of
    each level, listed or not) make the heading (left out with heading=False, when the overview
    just above counts them); without them the listed events are counted."""
    total = counts or {level: sum(1 for e in events if e.level == level) for level in LEVELS}
    text = Text(no_wrap=True, overflow="ignore")
    if heading:
        text.append(f"Drift events ({sum(total.values()):,}): {levels_line(total)}\n", style="bold")
    # Each event keeps its number in the JSON report's list (scan order), as the HTML shows it.
    numbers = {id(e): n for n, e in enumerate(events, 1)}
    number = len(str(len(events)))
    kind = max((len(e.kind) for e in events), default=0)
    i = 0
    for level, group in by_level(events):
        if i >= limit:
            break
        text.append(f"{level} ({total.get(level, len(group)):,}), by field\n", style="bold")
        for e in group[: limit - i]:
            i += 1
            body = safe_text(e.path)
            if e.before or e.after:
                body += f": {safe_text(e.before or '–')} → {safe_text(e.after or '–')}"
            if detail:
                body += ", " + reach_text(e) + (f"; e.g. {safe_text(e.example, 40)}" if e.example else "")
            else:
                body += "; " + short_reach(e)
            lines = hanging(f"{numbers[id(e)]:>{number}}  {e.kind:<{kind}} ", body, width)
            text.append(lines[0][: number + 2])
            text.append(e.kind, style="bold")
            text.append(lines[0][number + 2 + len(e.kind) :] + "\n")
            for line in lines[1:]:
                text.append(line + "\n")
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


def render(
    profile: Profile,
    console: Console,
    max_events: int = DEFAULT_MAX_EVENTS,
    *,
    events_detail: bool = False,
    full_table: bool = False,
    title: str | None = None,
) -> None:
    """The terminal summary: the overview and the drift first (the breaking changes on the
    first screen), then the CSV dialects and shapes, then the fields. max_events bounds the
    events listed (the others are counted, and the JSON report holds them all); events_detail
    gives each event's positions and example; full_table every column of the field table at
    any width; title names what was scanned when it is not the root folder (a file named alone)."""
    console.print(overview(profile, title))
    console.print()
    if profile.events:
        console.print(
            events_block(profile.events, profile.level_counts, max_events, console.width, events_detail, heading=False),
            end="",
            no_wrap=True,
            overflow="ignore",
            crop=False,
        )
        left_out = len(profile.events) - max_events
        if left_out > 0:
            console.print(
                f"… {left_out:,} more events not listed here (--max-events {max_events:,}); "
                "the JSON report (--json) lists them all"
            )
    elif profile.rows == 0:  # no batch to compare: no verdict, rather than a "No drift" that reads as one
        console.print("Nothing to compare: no file gave a row.")
    else:
        console.print("No drift: every batch shows the same fields and types.")
    if any(f.dialect is not None for f in profile.files) or profile.shapes is not None:
        console.print()
    if any(f.dialect is not None for f in profile.files):
        console.print(dialects_block(profile, console.width), end="", no_wrap=True, overflow="ignore", crop=False)
    if profile.shapes is not None:
        console.print(shapes_block(profile.shapes), end="", no_wrap=True, overflow="ignore", crop=False)
    if profile.fields:
        console.print()
        console.print(fields_table(profile, None if full_table else console.width))
        console.print(Text(SHARES_NOTE, style="dim"))
    if formats := formats_block(profile):
        console.print()
        console.print(formats)
    notes = limit_notes(profile)
    if notes:
        console.print()
        console.print(Text("Limits reached\n", style="bold") + Text("".join(f"warning  {n}\n" for n in notes)), end="")
    if profile.issues:
        console.print()
        console.print(issues_block(profile), end="")
        if len(profile.issues) > MAX_ISSUES_SHOWN:
            console.print(f"… {len(profile.issues) - MAX_ISSUES_SHOWN} more in the JSON report (--json)")
