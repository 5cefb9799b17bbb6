"""Inline SVG for the HTML report: the palette, fill patterns, type-share bars and drift timelines.

Our own visual language: each type gets a colour AND a fill pattern (solid, stripes,
dots, grid, ...), the same in every report (emit.typestyle's table), nulls are grey dots
and absent values a grey hatch on white, so the charts read without colour and in
greyscale print. Every piece of data passes through
esc() (safe_text, then HTML escaping) before it enters the markup.
"""

from __future__ import annotations

import html
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from driftline.emit.html_data import ABSENT, NULL, Bucket, Counts, bucket_of
from driftline.emit.safe import safe_text
from driftline.emit.typestyle import COLOURS, fill_id, used_styles

NULL_COLOUR, ABSENT_COLOUR = "#767676", "#6e6e6e"
INK, PAPER, MUTED = "#1b2330", "#fbfaf6", "#525a66"


def esc(value: object, limit: int | None = 200) -> str:
    """Data as safe markup text: control and bidi characters made visible, then HTML-escaped.

    >>> esc('<script>alert(1)</script>')
    '&lt;script&gt;alert(1)&lt;/script&gt;'
    """
    return html.escape(safe_text(value, limit), quote=True)


def _marks(pattern: str) -> str:
    # White marks over the colour, on an 8 px tile.
    w = 'stroke="#fff" stroke-width="1.6"'
    return {
        "solid": "",
        "stripes": f'<path d="M-2 2l4-4M0 8l8-8M6 10l4-4" {w}/>',
        "dots": '<circle cx="2" cy="2" r="1.3" fill="#fff"/><circle cx="6" cy="6" r="1.3" fill="#fff"/>',
        "grid": f'<path d="M0 4h8M4 0v8" {w}/>',
        "rows": f'<path d="M0 2h8M0 6h8" {w}/>',
        "columns": f'<path d="M2 0v8M6 0v8" {w}/>',
        "checks": '<path d="M0 0h4v4H0zM4 4h4v4H4z" fill="#fff" fill-opacity=".55"/>',
        "backslash": f'<path d="M-2 6l4 4M0 0l8 8M6 -2l4 4" {w}/>',
    }[pattern]


def defs() -> str:
    """One hidden SVG holding every pattern of the type table; the other SVGs of the page refer to them by id."""
    tiles = []
    for colour, pattern in used_styles():
        tiles.append(
            f'<pattern id="fill-{colour}-{pattern}" width="8" height="8" patternUnits="userSpaceOnUse">'
            f'<rect width="8" height="8" fill="{COLOURS[colour].fill}"/>{_marks(pattern)}</pattern>'
        )
    tiles.append(
        f'<pattern id="fill-null" width="6" height="6" patternUnits="userSpaceOnUse">'
        f'<rect width="6" height="6" fill="#d9d9d9"/><circle cx="3" cy="3" r="1.4" fill="{NULL_COLOUR}"/></pattern>'
    )
    tiles.append(
        f'<pattern id="fill-absent" width="6" height="6" patternUnits="userSpaceOnUse">'
        f'<rect width="6" height="6" fill="#fff"/>'
        f'<path d="M0 6l6-6M-1 1l2-2M5 7l2-2" stroke="{ABSENT_COLOUR}" stroke-width="1"/></pattern>'
    )
    return (
        '<svg class="defs" width="0" height="0" aria-hidden="true" focusable="false"><defs>'
        + "".join(tiles)
        + "</defs></svg>"
    )


def pct(part: int, whole: int) -> str:
    """A share as short text.

    >>> pct(1, 3), pct(0, 3), pct(1, 10_000)
    ('33.3%', '0%', '<0.1%')
    """
    if not whole or not part:
        return "0%"
    share = 100 * part / whole
    return "<0.1%" if share < 0.1 else f"{share:.1f}%".replace(".0%", "%")


def share_pct(key: str, n: int, nonnull: int, container: int) -> str:
    """A series' share on the report's one denominator: a type's share is of the non-null
    values, null and absent are shares of the container (rows, or the parent's values), as the
    field table and the terminal give them.

    >>> share_pct("list", 871, 981, 1000), share_pct("null", 19, 981, 1000)
    ('88.8%', '1.9%')
    """
    return pct(n, container if key in (NULL, ABSENT) else nonnull)


def share_text(series: Mapping[str, int], order: Sequence[str], container: int) -> list[str]:
    """'key share' for each series in order that holds any (share_pct)."""
    nonnull = sum(n for k, n in series.items() if k not in (NULL, ABSENT))
    return [f"{k} {share_pct(k, series[k], nonnull, container)}" for k in order if series.get(k)]


def type_bar(counts: Counts, order: Sequence[str], width: int = 120) -> str:
    """A small stacked bar of one field's places (types, null, absent: each drawn as its share of
    the container) with a text alternative that gives the shares on the one denominator."""
    total = counts.container or 1
    parts, x = [], 0.0
    series = counts.series()
    label = ", ".join(share_text(series, order, counts.container))
    for key in order:
        n = series.get(key, 0)
        if not n:
            continue
        w = width * n / total
        parts.append(f'<rect x="{x:.1f}" width="{max(w, 0.8):.1f}" height="12" fill="url(#{fill_id(key)})"/>')
        x += w
    return (
        f'<svg class="bar" viewBox="0 0 {width} 12" width="{width}" height="12" role="img" aria-label="{esc(label)}">'
        f'<rect width="{width}" height="12" fill="#fff" stroke="#8d929a" stroke-width="1"/>{"".join(parts)}</svg>'
    )


# -- timeline ------------------------------------------------------------------------------
W, LEFT, RIGHT = 960, 46, 12
LANE_TOP, LANE_H, LANES = 4, 18, 2
PLOT_TOP = LANE_TOP + LANE_H * LANES + 4
PLOT_H = 120
MAX_MARKERS = 40  # per chart; the events list holds the rest
MAX_TICKS = 16


@dataclass(frozen=True)
class Marker:
    """A drift event drawn on a timeline: its number in the events list and its tooltip text."""

    number: int
    kind: str
    file: str
    row: int | None
    seq: int
    row_in_batch: int
    batch_rows: int
    tip: str
    listed: bool = True  # whether the events list holds it (links to #ev-<number>)


def _step_band(xs: Sequence[float], lower: Sequence[float], upper: Sequence[float]) -> str:
    # One path per series: along the upper edge step by step, then back along the lower one.
    d = [f"M{xs[0]:.1f} {upper[0]:.1f}"]
    for i in range(len(upper)):
        if i:
            d.append(f"V{upper[i]:.1f}")
        d.append(f"H{xs[i + 1]:.1f}")
    for i in range(len(lower) - 1, -1, -1):
        d.append(f"V{lower[i]:.1f}")
        d.append(f"H{xs[i]:.1f}")
    return "".join(d) + "Z"


def timeline(
    chart_id: str,
    path: str,
    bks: Sequence[Bucket],
    counts: Sequence[Counts],
    order: Sequence[str],
    markers: Sequence[Marker],
) -> str:
    """A stacked step chart of a field's shares over the scan-order buckets, with event markers."""
    n = len(bks)
    plot_w = W - LEFT - RIGHT
    xs = [LEFT + plot_w * i / n for i in range(n + 1)]
    bottom = PLOT_TOP + PLOT_H
    label = f"Share of each type of {safe_text(path)} over {n} steps in scan order, {len(markers)} drift events"
    out = [
        f'<svg class="timeline" id="{chart_id}" viewBox="0 0 {W} {bottom + 64}" role="group" '
        f'aria-label="{esc(label)}" '
        f'data-path="{esc(path, None)}" data-series="{len(order)}" data-markers="{len(markers)}">'
    ]
    # Grid: 0 / 50 / 100 % and the frame.
    grid = "".join(f"M{LEFT} {PLOT_TOP + PLOT_H * f:.1f}H{W - RIGHT}" for f in (0, 0.5, 1))
    out.append(f'<path class="grid" d="{grid}" stroke="#c9ccd1" stroke-width="1" fill="none"/>')
    out.append(
        f'<g class="ylab" font-size="11" fill="{MUTED}" text-anchor="end">'
        + "".join(f'<text x="{LEFT - 6}" y="{PLOT_TOP + PLOT_H * (1 - f) + 4:.1f}">{f:.0%}</text>' for f in (0, 0.5, 1))
        + "</g>"
    )
    # Series, bottom up.
    lower = [0.0] * n
    for key in order:
        upper = [lower[i] + counts[i].share(counts[i].series().get(key, 0)) for i in range(n)]
        ys_lo = [bottom - PLOT_H * v for v in lower]
        ys_hi = [bottom - PLOT_H * min(v, 1.0) for v in upper]
        out.append(
            f'<path class="series" data-series="{esc(key, None)}" d="{_step_band(xs, ys_lo, ys_hi)}" '
            f'fill="url(#{fill_id(key)})" stroke="#fff" stroke-width=".6"><title>{esc(key)}</title></path>'
        )
        lower = upper
    # Steps where nothing could hold the field (its parent absent): a labelled gap.
    empty = [i for i in range(n) if not counts[i].container]
    if empty:
        d = "".join(f"M{xs[i]:.1f} {PLOT_TOP}h{xs[i + 1] - xs[i]:.1f}v{PLOT_H}h{xs[i] - xs[i + 1]:.1f}Z" for i in empty)
        out.append(
            f'<path class="nocontainer" d="{d}" fill="url(#fill-absent)" fill-opacity=".5">'
            "<title>no parent value here</title></path>"
        )
    out.append(
        f'<rect x="{LEFT}" y="{PLOT_TOP}" width="{plot_w}" height="{PLOT_H}" fill="none" '
        f'stroke="{INK}" stroke-width="1"/>'
    )
    out.append(_axis(bks, xs, bottom))
    out.append(_legend(order, counts, bottom + 46))
    out.append(_markers(bks, xs, markers, bottom))
    out.append("</svg>")
    return "".join(out)


def _axis(bks: Sequence[Bucket], xs: Sequence[float], bottom: float) -> str:
    n = len(bks)
    # Thin the tick labels so they never overlap: about 6 px per character at 10 px.
    widest = max((len(safe_text(b.label, 18)) for b in bks), default=1) * 6 + 8
    step = max(1, -(-n // MAX_TICKS), -(-int(widest * n) // int(xs[-1] - xs[0])))
    ticks = "".join(
        f'<text x="{(xs[i] + xs[i + 1]) / 2:.1f}" y="{bottom + 14}">{esc(bks[i].label, 18)}</text>'
        for i in range(0, n, step)
    )
    # Group boundaries (a region, a folder): one rule each, labelled when there is room.
    runs: list[tuple[int, int, str]] = []
    for i, b in enumerate(bks):
        if runs and runs[-1][2] == b.group:
            runs[-1] = (runs[-1][0], i + 1, b.group)
        else:
            runs.append((i, i + 1, b.group))
    # Leading folders every group shares say nothing: 'events/region=r01' shows as 'region=r01'.
    common = _common_folders([g for _, _, g in runs])
    runs = [(a, b, g[common:] or g) for a, b, g in runs]
    # ... and so does one partition key over all of them: 'region=r01' shows as 'r01'
    # after the first group, which keeps 'region=r00' to say what the values are.
    keys = {g.split("=", 1)[0] if "=" in g and "/" not in g else None for _, _, g in runs}
    if len(runs) > 1 and len(keys) == 1 and None not in keys:
        runs = runs[:1] + [(a, b, g.split("=", 1)[1]) for a, b, g in runs[1:]]
    rules = "".join(f"M{xs[a]:.1f} {PLOT_TOP}V{bottom + 32}" for a, _, _ in runs[1:])
    labels = "".join(
        f'<text x="{xs[a] + 4:.1f}" y="{bottom + 30}">{esc(g, max(4, int((xs[b] - xs[a]) / 6.5)))}</text>'
        for a, b, g in runs
        if xs[b] - xs[a] >= 40 and g != "."  # "." is the scanned folder itself: nothing to say
    )
    return (
        f'<g class="xlab" font-size="10" fill="{MUTED}" text-anchor="middle">{ticks}</g>'
        f'<path class="groups" d="{rules}" stroke="{INK}" stroke-width="1.2" stroke-dasharray="3 2" fill="none"/>'
        f'<g class="glab" font-size="11" fill="{INK}" font-weight="600">{labels}</g>'
    )


def _common_folders(groups: Sequence[str]) -> int:
    """Length of the leading folders all groups share (with the slash).

    >>> _common_folders(["events/region=a", "events/region=b"]), _common_folders(["a/x", "b"])
    (7, 0)
    """
    if len(set(groups)) < 2:
        return 0
    first, n = groups[0].split("/"), 0
    for i in range(len(first) - 1):
        if all(g.split("/")[: i + 1] == first[: i + 1] and g.count("/") > i for g in groups):
            n += len(first[i]) + 1
        else:
            break
    return n


def _legend(order: Sequence[str], counts: Sequence[Counts], y: float) -> str:
    totals: dict[str, int] = {}
    for c in counts:
        for k, n in c.series().items():
            totals[k] = totals.get(k, 0) + n
    nonnull = sum(n for k, n in totals.items() if k not in (NULL, ABSENT))
    container = sum(c.container for c in counts)
    x, parts = float(LEFT), []
    for key in order:
        text = f"{safe_text(key, 40)} {share_pct(key, totals.get(key, 0), nonnull, container)}"
        parts.append(
            f'<g class="key"><rect x="{x:.1f}" y="{y}" width="14" height="12" fill="url(#{fill_id(key)})" '
            f'stroke="{INK}" stroke-width=".8"/>'
            f'<text x="{x + 19:.1f}" y="{y + 10}">{esc(text, None)}</text></g>'
        )
        x += 34 + 6.6 * len(text)
    return f'<g class="legend" font-size="12" fill="{INK}">{"".join(parts)}</g>'


def _markers(bks: Sequence[Bucket], xs: Sequence[float], markers: Sequence[Marker], bottom: float) -> str:
    out, lane_end = [], [-1e9] * LANES
    for m in markers[:MAX_MARKERS]:
        b = bucket_of(bks, m.seq)
        x = xs[b.index] + (xs[b.index + 1] - xs[b.index]) * b.position(m.seq, m.row_in_batch, m.batch_rows)
        lane = next((i for i in range(LANES) if x - lane_end[i] >= 26), min(range(LANES), key=lambda i: lane_end[i]))
        lane_end[lane] = x
        y = LANE_TOP + lane * LANE_H
        label = str(m.number)
        half = 5 + 3.2 * len(label)
        row = "" if m.row is None else m.row
        # Flags of events beyond the events list link nowhere but stay reachable with Tab.
        link = f'href="#ev-{m.number}"' if m.listed else 'tabindex="0"'
        # The accessible name is also the tooltip's text (the script shows it on hover and focus).
        tip = "&#10;".join(esc(line, None) for line in m.tip.split("\n"))
        flag = f"M{x - half:.1f} {y}h{2 * half:.1f}v12h{-half + 4:.1f}l-4 4l-4 -4h{-half + 4:.1f}Z"
        out.append(
            f'<a class="mk" {link} data-kind="{esc(m.kind, None)}" data-file="{esc(m.file, None)}" '
            f'data-row="{row}" aria-label="{tip}">'
            f'<path class="rule" d="M{x:.1f} {y + 14}V{bottom}"/><path class="flag" d="{flag}"/>'
            f'<text x="{x:.1f}" y="{y + 10}">{label}</text></a>'
        )
    # Their strokes and fills are in the style sheet (report.css, "svg .mk"): one rule, not one per flag.
    return '<g class="markers">' + "".join(out) + "</g>"
