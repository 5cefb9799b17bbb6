"""The HTML report: one self-contained file with the overview, field table, drift timelines,
partition matrices, events and file problems.

Nothing is fetched when the page is viewed: the CSS, the small script and every chart
(inline SVG drawn by emit.svg) are in the file, and a Content-Security-Policy with the
hashes of our one style sheet and one script forbids anything else, so even a field
name that slipped through escaping could not run. All data is escaped (jinja2
autoescape after safe_text, or emit.svg.esc). Large scans are aggregated and capped
(see the MAX_* numbers) and the browser pages the long lists.
"""

from __future__ import annotations

import base64
import hashlib
import re
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from importlib import resources
from typing import Any

import jinja2
from markupsafe import Markup, escape

from driftline.core.marker import remark
from driftline.core.version import __version__
from driftline.core.words import count, plural
from driftline.emit import html_data as hd
from driftline.emit import svg
from driftline.emit.atomic import write_output
from driftline.emit.reach import reach_text, short_reach
from driftline.emit.safe import safe_text
from driftline.emit.typestyle import tint_class, type_css
from driftline.emit.units import human_bytes
from driftline.results.drift import EVENT_KINDS, Event
from driftline.results.levels import LEVELS
from driftline.results.profile import FieldSummary, Profile
from driftline.results.report import limit_notes, partition_types

MAX_TABLE_ROWS = 2_000
MAX_CHARTS = 60
MAX_MATRIX_ROWS = 60
MAX_EVENTS = 1_000
MAX_ISSUES = 1_000
MAX_SKIPPED = 200
CHART_EVENTS_LISTED = 8  # events written out under each chart; the events list has all
# Changes of each level listed at the top of the page (the events list has all): every breaking
# one a screen holds, fewer of the levels that break nothing.
CHANGES_LISTED = {"breaking": 25, "widening": 10, "info": 10}
_KIND_RANK = {
    "type-conflict": 0,
    "type-widened": 0,
    "element-changed": 0,
    "textclass-changed": 0,
    "field-new": 2,
    "nested-new": 2,
}  # the others (nulls, gone) rank 1
PAGE = {"fields": 50, "charts": 6, "events": 50, "issues": 50}


@dataclass(frozen=True)
class FieldRule:
    """What the recommender proposes for one field, as text for the table."""

    type: str
    rule: str
    does: str
    loss: str
    lost: int  # values the rule nulls or changes (for sorting)


def _assets() -> tuple[str, str, str]:
    folder = resources.files("driftline.emit") / "html_assets"
    return tuple((folder / name).read_text(encoding="utf-8") for name in ("report.html.j2", "report.css", "report.js"))  # type: ignore[return-value]


def _sha256(text: str) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii")


def _t(value: object, limit: int | None = 120) -> str:
    return "" if value is None else safe_text(value, limit)


def _env() -> jinja2.Environment:
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters["t"] = _t
    env.filters["num"] = lambda n: f"{n:,}"
    env.filters["path"] = path_markup
    env.filters["paths"] = paths_markup
    return env


SEGMENT_KEPT = 40  # a path's parts up to this long never break inside; longer ones may, rather than overflow


def path_markup(value: object, limit: int | None = 300) -> Markup:
    """A file path as markup that a browser wraps only after a `/` or a `=` (a <wbr> there),
    never inside a folder's value (`day=2026-11-28`, `part-0.jsonl`: each part is kept whole
    by the style sheet's .path .seg); a part longer than SEGMENT_KEPT may break inside
    rather than run out of its box.

    >>> str(path_markup("day=2026-11-28/a<1>.jsonl")).split("<wbr>")
    ['day=', '<span class="seg">2026-11-28/</span>', '<span class="seg">a&lt;1&gt;.jsonl</span>']
    """
    text, parts, start = _t(value, limit), [], 0
    for i, ch in enumerate(text):
        if ch in "/=":
            parts.append(text[start : i + 1])
            start = i + 1
    parts.append(text[start:])
    return Markup("<wbr>").join(_segment(p) for p in parts if p)


_BREAKABLE = re.compile(r"[^A-Za-z0-9_./=]")  # ASCII letters, digits, _ and . give a browser no place to break


def _segment(part: str) -> Markup:
    """One part of a path: held whole by a span when a browser could break it (a hyphen, a
    space, other scripts), plain when it could not (the page stays small) or is too long."""
    if len(part) > SEGMENT_KEPT or not _BREAKABLE.search(part):
        return escape(part)
    return Markup('<span class="seg">{}</span>').format(part)


def paths_markup(value: object, limit: int | None = 300) -> Markup:
    """Prose that names paths (an episode's reach, a partition list): each word holding a `/`
    or a `=` marked as path_markup marks a path, the rest plain text wrapping at its spaces.

    >>> str(paths_markup("1 file, from a/day=2026-11-28 row 3")).split("<wbr>")
    ['1 file, from a/', 'day=', '<span class="seg">2026-11-28</span> row 3']
    """
    words = re.split(r"(\s+)", _t(value, limit))
    return Markup("").join(path_markup(w, None) if ("/" in w or "=" in w) else escape(w) for w in words)


def _where(e: Event) -> str:
    bits = [f"row {e.row}" if e.row is not None else f"batch {e.batch}"]
    if e.line is not None:
        bits.append(f"line {e.line}")
    return ", ".join(bits)


def _parts(parts: Sequence[tuple[str, str]]) -> str:
    return ", ".join(f"{k}={v}" for k, v in parts) or "none"


def _count_text(e: Event) -> str:
    """The episode's reach: the terminal's line, and how many batches."""
    return f"{reach_text(e)} ({count(e.batches, 'batch', 'batches')})"


def _tip(number: int, e: Event) -> str:
    lines = [
        f"#{number} {e.kind} ({e.level}): {safe_text(e.path, 80)}",
        f"{safe_text(e.before or '–', 60)} → {safe_text(e.after or '–', 60)}",
        f"file {safe_text(e.file, 160)}",
        f"partition {safe_text(_parts(e.partitions), 120)}",
        f"{_where(e)}, batch {e.batch}",
    ]
    if e.example is not None:
        lines.append(f"example {safe_text(e.example, 60)}")
    lines.append(_count_text(e))
    return "\n".join(lines)


def field_rules(profile: Profile) -> dict[str, FieldRule] | None:
    """The recommender's type, rule and measured loss per field path; None without the recommender."""
    try:
        from driftline.recommendation import recommend
    except ImportError:  # the report works without it, just without that column
        return None
    rec = recommend(profile)
    out = {p.path: _rule(p) for p in rec.walk()}
    for d in rec.dropped:
        out[d.path] = FieldRule(
            "–",
            "left out",
            "too rare for the schema",
            f"present in {svg.pct(d.present, d.container)} of the places it could be",
            d.present,
        )
    return out


def _rule(plan: Any) -> FieldRule:
    """One FieldPlan as text: what its effects null or change, out of how many values; notes after.

    plan is a driftline.recommendation.plan.FieldPlan (typed Any: the page renders without one).
    """
    values = sum(plan.inputs.values())
    bits, notes, lost = [], [], 0
    for eff in plan.effects:
        if eff.kind == "note":
            notes.append(f"{eff.count:,} {eff.cause}" + (f": {eff.note}" if eff.note else ""))
            continue
        lost += eff.count
        verb = "become null" if eff.kind == "null" else "change"
        share = f" of {values:,} ({svg.pct(eff.count, values)})" if values else ""
        approx = "" if eff.exact else " at least" + (f" ({eff.note})" if eff.note else "")
        bits.append(f"{eff.count:,}{share} {verb} ({eff.cause}){approx}")
    loss = "; ".join(bits + notes) if bits or notes else "no value lost or changed"
    return FieldRule(plan.target.key(), plan.rule, plan.does, loss, lost)


# The one denominator of every share the page writes (svg.share_pct), said where shares are
# shown: the field table, the timelines' legends and the partition matrix.
SHARES_NOTE = (
    "A type's share is of the non-null values (nulls excluded); the null and absent shares are of the rows "
    "(of the parent's values for a nested field)."
)


def _summary_counts(s: FieldSummary) -> hd.Counts:
    return hd.Counts(dict(s.stats.types), s.stats.nulls, s.absent, s.container)


def _types_text(s: FieldSummary) -> str:
    total = s.stats.nonnull
    if not total:
        return "null only" if s.stats.nulls else "no values"
    parts = sorted(s.stats.types.items(), key=lambda kv: (-kv[1], kv[0]))
    if len(parts) == 1:
        return parts[0][0]
    return " · ".join(f"{k} {svg.pct(n, total)}" for k, n in parts[:3]) + (" …" if len(parts) > 3 else "")


def _by_format_text(by_format: Mapping[str, Mapping[str, int]]) -> str:
    """Which format gave which physical types, for a field whose formats differ ('' otherwise):
    the title of its types cell (terminal.formats_block says the same)."""
    if len(by_format) < 2 or len({tuple(types) for types in by_format.values()}) < 2:
        return ""
    return " · ".join(f"{fmt} {', '.join(types)}" for fmt, types in by_format.items())


@dataclass(frozen=True)
class Fact:
    """One item of the one-line strip at the top: a number and what it counts."""

    name: str  # data-fact, for the tests and for styling
    value: str  # shown in bold
    noun: str
    href: str | None = None  # where the item leads (a level's changes)


def _strip(profile: Profile, datasets: Sequence[tuple[str, str | None]]) -> list[Fact]:
    """The scan in one line: files, rows, datasets, size, then the file errors when any (the
    events by level follow in the template, each level's count leading to its changes)."""
    errors = sum(1 for i in profile.issues if i.severity == "error")
    files, sets = len(profile.files), max(1, len(datasets))
    facts = [
        Fact("files", f"{files:,}", plural(files, "file")),
        Fact("rows", f"{profile.rows:,}", plural(profile.rows, "row")),
        Fact("datasets", f"{sets:,}", plural(sets, "dataset")),
        Fact("size", human_bytes(profile.bytes), ""),
    ]
    if errors:
        facts.append(Fact("file-errors", f"{errors:,}", plural(errors, "file error"), "#problems"))
    return facts


def _notes(profile: Profile) -> list[tuple[str, str]]:
    """What the strip leaves out, on a small line under it: formats, partitions, fields, ..."""
    formats = Counter(f.format for f in profile.files)
    parts = partition_types(profile)
    warnings = sum(1 for i in profile.issues if i.severity == "warning")
    notes = [
        ("formats", ", ".join(f"{n:,} {k}" for k, n in sorted(formats.items())) or "none"),
        (
            "partitions",
            "; ".join(f"{k} ({v['type']}, {len(v['values']):,} values)" for k, v in parts.items()) or "none",
        ),
        ("fields", f"{len(profile.fields):,}"),
    ]
    if profile.event_total > len(profile.events):
        notes.append(
            (
                "drift events",
                f"{profile.event_total:,} (the first {len(profile.events):,} followed and listed: "
                "the most a scan holds)",
            )
        )
    notes += [("limit reached", note) for note in limit_notes(profile)]
    notes += [("warnings", f"{warnings:,}"), ("skipped", f"{len(profile.skipped):,}")]
    notes.append(("duration", f"{profile.duration_s:.2f} s"))
    return notes


def _changes(
    profile: Profile, numbers: Mapping[int, int], charted: Mapping[str, str], listed: set[int]
) -> list[dict[str, Any]]:
    """What changed, for the top of the page: per level, breaking first, the first
    CHANGES_LISTED[level] episodes grouped by field (the fields in the order they first drift, as the
    terminal lists them), each with the anchor of its field's timeline and of its event."""
    groups: dict[str, dict[str, list[Event]]] = {level: {} for level in LEVELS}
    for e in profile.events:
        groups[e.level].setdefault(e.path, []).append(e)
    out = []
    for level, by_path in groups.items():
        found = profile.level_counts.get(level, 0)
        if not found:
            continue
        events = [e for fld in by_path.values() for e in fld]
        items = []
        for e in events[: CHANGES_LISTED[level]]:
            n = numbers[id(e)]
            items.append(
                {
                    "n": n,
                    "e": e,
                    "chart": charted.get(e.path),
                    "event": n if n in listed else None,
                    "reach": short_reach(e),
                }
            )
        out.append({"level": level, "found": found, "changes": items, "more": found - len(items)})
    return out


def _field_rows(
    profile: Profile,
    drift: Counter[str],
    charted: Mapping[str, str],
    recs: Mapping[str, FieldRule] | None,
) -> list[dict[str, Any]]:
    rows = []
    for path, s in list(profile.fields.items())[:MAX_TABLE_ROWS]:
        counts = _summary_counts(s)
        order = hd.series_order(counts.series())
        rec = recs.get(path) if recs is not None else None
        rows.append(
            {
                "path": path,
                "bar": Markup(svg.type_bar(counts, order)),
                "types": _types_text(s),
                "by_format": _by_format_text(profile.types_by_format.get(path, {})),
                "ntypes": len(s.stats.types),
                "null": svg.pct(s.stats.nulls, s.container),
                "null_v": s.share(s.stats.nulls),
                "absent": svg.pct(s.absent, s.container),
                "absent_v": s.share(s.absent),
                "drift": drift[path],
                "chart": charted.get(path),
                "rec": rec,
            }
        )
    return rows


def by_level(events: Sequence[Event]) -> list[tuple[int, Event]]:
    """The events numbered as the JSON report lists them (from 1, scan order), breaking ones
    first (LEVELS order), scan order kept within a level: the events list's order."""
    rank = {level: i for i, level in enumerate(LEVELS)}
    return sorted(enumerate(events, 1), key=lambda ne: rank[ne[1].level])  # stable: scan order within a level


def _charts(profile: Profile, numbers: Mapping[int, int], listed: set[int]) -> list[dict[str, Any]]:
    by_path: dict[str, list[Event]] = {}
    for e in profile.events:
        by_path.setdefault(e.path, []).append(e)
    # Fields whose values change type or form come first, then those that start carrying
    # nulls or stop arriving; a field that merely starts later is the least telling.
    ranked = sorted(by_path, key=lambda p: min(_KIND_RANK.get(e.kind, 1) for e in by_path[p]))
    chosen = ranked[:MAX_CHARTS]
    if not chosen:
        return []
    bks = hd.buckets(profile)
    per_bucket = hd.bucket_counts(profile, bks, chosen)
    units = hd.scan_units(profile)
    charts = []
    for i, path in enumerate(chosen):
        counts = [c[path] for c in per_bucket]
        totals: Counter[str] = Counter()
        for c in counts:
            totals.update(c.series())
        order = hd.series_order(dict(totals))
        markers = []
        for e in by_path[path]:
            obs = units[e.seq][2]
            in_batch = (e.row - obs.row_start) if e.row is not None else 0
            n = numbers[id(e)]
            markers.append(svg.Marker(n, e.kind, e.file, e.row, e.seq, in_batch, obs.rows, _tip(n, e), n in listed))
        chart_id = f"chart-{i + 1}"
        charts.append(
            {
                "id": chart_id,
                "path": path,
                "svg": Markup(svg.timeline(chart_id + "-svg", path, bks, counts, order, markers)),
                "events": [(numbers[id(e)], e) for e in by_path[path][:CHART_EVENTS_LISTED]],
                "more_events": max(0, len(by_path[path]) - CHART_EVENTS_LISTED),
                "hidden_markers": max(0, len(markers) - svg.MAX_MARKERS),
                "steps": len(bks),
            }
        )
    return charts


def _cell(c: hd.Counts) -> dict[str, Any]:
    if not c.container:
        return {"text": "·", "notes": "", "title": "no rows here", "cls": "c-none", "sig": None}
    present = sorted(c.types.items(), key=lambda kv: (-kv[1], kv[0]))
    if not present:
        text = "null" if c.nulls else "absent"
        cls = "c-null" if c.nulls else "c-absent"
    else:
        nonnull = sum(c.types.values())
        text = present[0][0] if len(present) == 1 else " · ".join(f"{k} {svg.pct(n, nonnull)}" for k, n in present[:2])
        cls = tint_class(present[0][0])
    notes = []
    if c.nulls and present:
        notes.append(f"null {svg.pct(c.nulls, c.container)}")
    if c.absent and (present or c.nulls):
        notes.append(f"absent {svg.pct(c.absent, c.container)}")
    title = f"{text}; " + ", ".join(notes) if notes else text
    sig = tuple(k for k, _ in present) or (cls,)
    return {"text": text, "notes": ", ".join(notes), "title": title, "cls": cls, "sig": sig}


def _matrices(profile: Profile) -> list[dict[str, Any]]:
    """A matrix per partition key of two or more values: the fields with drift first, by the
    key's values; the columns holding a cell unlike most of its row come first (in value
    order), so the one partition that changed is in view without scrolling, then the others."""
    drifting = list(dict.fromkeys(e.path for e in profile.events))
    wanted = (drifting + [p for p in profile.fields if p not in set(drifting)])[:MAX_MATRIX_ROWS]
    out = []
    for key, info in partition_types(profile).items():
        if len(info["values"]) < 2 or not wanted:
            continue
        columns = hd.partition_columns(info["values"], key=key)
        per_col = hd.partition_counts(profile, key, columns, wanted)
        rows = []
        for path in wanted:
            shown = [_cell(per_col[i][path]) for i in range(len(columns))]
            sigs = Counter(c["sig"] for c in shown if c["sig"] is not None)
            usual = sigs.most_common(1)[0][0] if sigs else None
            for c in shown:
                c["odd"] = c["sig"] is not None and c["sig"] != usual
            rows.append({"path": path, "cells": shown, "odd": sum(c["odd"] for c in shown)})
        odd = [i for i in range(len(columns)) if any(r["cells"][i]["odd"] for r in rows)]
        if len(odd) == len(columns):  # each column differs somewhere: none stands out, keep value order
            odd = []
        order = odd + [i for i in range(len(columns)) if i not in set(odd)]
        last_odd = odd[-1] if odd else None  # the rule between the differing columns and the others
        for r in rows:
            r["cells"] = [r["cells"][i] for i in order]
        out.append(
            {
                "key": key,
                "type": info["type"],
                "columns": [
                    {"label": columns[i].label, "odd": i in set(odd), "last_odd": i == last_odd} for i in order
                ],
                "odd_columns": len(odd),
                "rows": rows,
                "left_out": max(0, len(profile.fields) - len(wanted)),
            }
        )
    return out


def render_html(
    profile: Profile, *, rules: Mapping[str, FieldRule] | bool = True, datasets: Sequence[tuple[str, str | None]] = ()
) -> str:
    r"""The whole report as one HTML document (a str). datasets: for a page of one dataset of a
    root of several, every dataset's name with the address of its page (None for this page's
    own), shown as the page's dataset picker.

    >>> page = render_html(Profile("r", ()))
    >>> head = page.split("</head>")[0]
    >>> page.startswith("<!-- driftline-output: "), "\n<!DOCTYPE html>\n" in head, "<script" in head
    (True, True, False)
    """
    # rules=True asks the recommender (when installed), False leaves the column out,
    # a mapping is shown as given.
    recs: Mapping[str, FieldRule] | None
    if rules is True:
        recs = field_rules(profile)
    elif rules is False:
        recs = None
    else:
        recs = rules
    template, css, js = _assets()
    css += type_css()  # the types' tints, from the one table the charts' patterns come from
    numbers = {id(e): i for i, e in enumerate(profile.events, 1)}
    events = by_level(profile.events)[:MAX_EVENTS]
    listed = {n for n, _ in events}
    charts = _charts(profile, numbers, listed)
    charted = {c["path"]: c["id"] for c in charts}
    drift = Counter(e.path for e in profile.events)
    fields = _field_rows(profile, drift, charted, recs)
    page = (
        _env()
        .from_string(template)
        .render(
            title=f"driftline report: {safe_text(profile.root, 80)}",
            root=profile.root,
            version=__version__,
            # A comment may come before the doctype (HTML Living Standard 13.1, "Writing HTML documents").
            marker=remark(f"an HTML report written by driftline {__version__}; driftline never reads it as data"),
            csp=f"default-src 'none'; style-src '{_sha256(css)}'; script-src '{_sha256(js)}'; img-src data:; "
            "base-uri 'none'; form-action 'none'",
            css=Markup(css),
            js=Markup(js),
            defs=Markup(svg.defs()),
            strip=_strip(profile, datasets),
            notes=_notes(profile),
            changes=_changes(profile, numbers, charted, listed),
            event_total=profile.event_total,
            # no batch to compare: no verdict, rather than a "No drift" that reads as one
            nothing_read=profile.rows == 0,
            fields=fields,
            fields_left_out=max(0, len(profile.fields) - len(fields)),
            with_recs=recs is not None,
            shares_note=SHARES_NOTE,
            charts=charts,
            charts_left_out=max(0, len(drift) - len(charts)),
            matrices=_matrices(profile),
            events=events,
            events_left_out=max(0, len(profile.events) - MAX_EVENTS),
            listed=listed,
            level_counts=profile.level_counts,
            kinds=EVENT_KINDS,
            issues=profile.issues[:MAX_ISSUES],
            issues_left_out=max(0, len(profile.issues) - MAX_ISSUES),
            skipped=profile.skipped[:MAX_SKIPPED],
            skipped_left_out=max(0, len(profile.skipped) - MAX_SKIPPED),
            page=PAGE,
            where=_where,
            parts=_parts,
            count_text=_count_text,
            datasets=datasets,
        )
    )
    return page


def write_html(profile: Profile, target: str, datasets: Sequence[tuple[str, str | None]] = ()) -> None:
    """Render the report and write it atomically to target ('-' for stdout); datasets as for
    render_html."""
    write_output(target, render_html(profile, datasets=datasets))
