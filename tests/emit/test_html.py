"""emit/html: the HTML report's content, without a browser.

The page is read back with the standard library's HTML parser (html.parser), not with
anything of ours, so what is checked is what a browser would build from the bytes.
"""

from __future__ import annotations

import base64
import hashlib
import html
import importlib.util
import json
import re
import sys
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

import driftline
from _synthetic import big_profile
from conftest import ROOT
from driftline.cli import app
from driftline.emit import html as html_report
from driftline.emit import html_data as hd
from driftline.emit import svg, typestyle

SCRIPT_NAME = "<script>alert(1)</script>"
IMG_VALUE = "<img src=x onerror=alert(2)>"


class Page(HTMLParser):
    """Every start tag with its attributes, the text, and the text of <script>/<style>/<title>."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str]]] = []
        self.text: list[str] = []
        self.raw: dict[str, list[str]] = {"script": [], "style": []}
        self.stack: list[tuple[str, dict[str, str]]] = []
        self.markers: list[dict[str, str]] = []  # each event flag, with the chart it is in
        self.series: dict[str, list[str]] = {}
        self._in: str | None = None
        self.feed(text)
        self.close()

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        self.tags.append((tag, a))
        if tag in self.raw:
            self._in = tag
        chart = next((x for t, x in reversed(self.stack) if t == "svg" and "timeline" in x.get("class", "")), None)
        if chart is not None and tag == "a" and "mk" in a.get("class", ""):
            self.markers.append({**a, "chart": chart["data-path"]})
        if chart is not None and tag == "path" and a.get("class") == "series":
            self.series.setdefault(chart["data-path"], []).append(a["data-series"])
        if tag not in ("meta", "link", "input", "br", "rect", "circle", "path") or tag == "path":
            self.stack.append((tag, a))

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.handle_starttag(tag, attrs)
        if self.stack and self.stack[-1][0] == tag:
            self.stack.pop()

    def handle_endtag(self, tag: str) -> None:
        self._in = None
        while self.stack:
            t, _ = self.stack.pop()
            if t == tag:
                break

    def handle_data(self, data: str) -> None:
        if self._in:
            self.raw[self._in].append(data)
        else:
            self.text.append(data)

    def count(self, tag: str, cls: str | None = None) -> int:
        return sum(1 for t, a in self.tags if t == tag and (cls is None or cls in a.get("class", "").split()))


def _load_make_demo() -> Any:
    spec = importlib.util.spec_from_file_location("make_demo", ROOT / "scripts" / "make_demo.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    root = tmp_path_factory.mktemp("demo")
    _load_make_demo().build(root)
    profile = driftline.scan(root / "landing")
    page = html_report.render_html(profile)
    manifest = json.loads((root / "manifest.json").read_text(encoding="utf-8"))
    return {"root": root, "profile": profile, "page": page, "parsed": Page(page), "manifest": manifest}


def _hostile(tmp: Path) -> Path:
    d = tmp / "hostile"
    d.mkdir()
    # Same field as a number, then as a string holding markup: a type conflict, so it gets a chart.
    (d / "a.jsonl").write_text(json.dumps({SCRIPT_NAME: 5, "ok": 1}) + "\n", encoding="utf-8")
    (d / 'b "q" <b>.jsonl').write_text(
        json.dumps({SCRIPT_NAME: IMG_VALUE, "ok": 2, "rtl\u202eevil": 3}) + "\n", encoding="utf-8"
    )
    return d


# -- escaping --------------------------------------------------------------------------------


def test_field_names_and_values_are_text_not_markup(tmp_path: Path) -> None:
    profile = driftline.scan(_hostile(tmp_path))
    page = html_report.render_html(profile)
    parsed = Page(page)
    # The data made no element and no event-handler attribute of its own.
    assert parsed.count("script") == 1
    assert parsed.count("img") == 0 and parsed.count("b") > 0
    assert not [k for _, a in parsed.tags for k in a if k.startswith("on")]
    text = "".join(parsed.text)
    # Shown as text: in the field table, the chart caption and the events list.
    assert text.count(SCRIPT_NAME) >= 3
    assert json.dumps(IMG_VALUE) in text  # the event's example value, as JSON text
    assert 'b "q" <b>.jsonl' in text
    # The conflict's chart first, then the field that only starts later; flags name the file.
    assert [(m["chart"], m["data-kind"]) for m in parsed.markers] == [
        (SCRIPT_NAME, "type-conflict"),
        ("rtl\\u202eevil", "field-new"),
    ]
    assert {m["data-file"] for m in parsed.markers} == {'b "q" <b>.jsonl'}
    # source: Unicode UAX #9 explicit directional overrides (U+202E RLO); never reaches the page raw
    assert "\u202e" not in page and "rtl\\u202eevil" in text


def test_content_security_policy_pins_our_style_and_script(demo: dict[str, Any]) -> None:
    parsed: Page = demo["parsed"]
    csp = next(a["content"] for t, a in parsed.tags if t == "meta" and a.get("http-equiv") == "Content-Security-Policy")
    # source: W3C Content Security Policy Level 3, hash-source = "'sha256-" base64 digest "'"
    # of the element's text, and default-src 'none' forbids every other fetch.
    for kind in ("style", "script"):
        (body,) = parsed.raw[kind]
        digest = base64.b64encode(hashlib.sha256(body.encode("utf-8")).digest()).decode()
        assert f"{kind}-src 'sha256-{digest}'" in csp
    assert csp.startswith("default-src 'none';")


def test_nothing_is_loaded_from_elsewhere(demo: dict[str, Any]) -> None:
    parsed: Page = demo["parsed"]
    refs = [(t, k, v) for t, a in parsed.tags for k, v in a.items() if k in ("src", "href", "xlink:href", "action")]
    assert refs and all(v.startswith("#") or v == "data:," for _, _, v in refs), refs
    style = "".join(parsed.raw["style"])
    assert "@import" not in style and "@font-face" not in style and "url(" not in style
    assert not re.search(r"url\((?!#)", demo["page"])  # SVG fills point at our own patterns only


# -- the demo -----------------------------------------------------------------------------------


def test_demo_report_is_small_and_shows_every_injected_change(demo: dict[str, Any]) -> None:
    page, parsed, profile = demo["page"], demo["parsed"], demo["profile"]
    assert len(page.encode("utf-8")) < 2_000_000  # the issue: the demo report stays under 2 MB
    # One chart per field with drift (the demo has fewer than MAX_CHARTS), one flag per event.
    drifting = {e.path for e in profile.events}
    assert parsed.count("svg", "timeline") == len(drifting) <= html_report.MAX_CHARTS
    assert len(parsed.markers) == len(profile.events)
    for change in demo["manifest"]["changes"]:
        if change["field"] is None:
            continue
        flags = [m for m in parsed.markers if m["chart"] == change["field"] and m["data-kind"] == change["change"]]
        assert any(m["data-file"] == change["file"] and m["data-row"] == str(change["row"]) for m in flags), change


def test_demo_file_errors_are_listed_with_their_line(demo: dict[str, Any]) -> None:
    text = "".join(demo["parsed"].text)  # a path is cut by <wbr> elements: its pieces join back
    for change in demo["manifest"]["changes"]:
        if change["change"] == "malformed-line":
            row = re.search(re.escape(change["file"]) + r"\s+(\d+)", text)
            assert row is not None and int(row.group(1)) == change["line"]


def _strip(page: str) -> dict[str, str]:
    """The one-line strip at the top: each fact's bold value by its name, each level's count."""
    facts = dict(re.findall(r'<span class="fact" data-fact="([^"]+)">(?:<a [^>]*>)?<b>([^<]+)</b>', page))
    levels = dict(re.findall(r'data-level-count="([a-z]+)" href="#changes-[a-z]+"><b>([^<]+)</b>', page))
    return {**facts, **{f"level {k}": v for k, v in levels.items()}}


def test_demo_overview_counts_match_the_manifest(demo: dict[str, Any]) -> None:
    parsed: Page = demo["parsed"]
    manifest = demo["manifest"]
    facts = _strip(demo["page"])
    assert facts["files"] == f"{len(manifest['files']):,}"
    assert facts["rows"] == f"{sum(f['rows'] for f in manifest['files']):,}"
    assert facts["datasets"] == "1"
    errors = [c for c in manifest["changes"] if c["change"] == "malformed-line"]
    assert facts["file-errors"] == f"{len(errors):,}" and len(errors) > 0
    assert f'<span data-note="skipped">skipped: {len(manifest["skipped"])}</span>' in demo["page"]
    # the version is in the footer, not among the facts at the top
    assert "version" not in facts and f'<span id="version">driftline {driftline.__version__}</span>' in demo["page"]
    assert parsed.count("tr") >= len(demo["profile"].fields)


def test_timeline_series_are_the_fields_types_nulls_and_absent(demo: dict[str, Any]) -> None:
    profile, parsed = demo["profile"], demo["parsed"]
    for path, series in parsed.series.items():
        s = profile.fields[path]
        expected = set(s.stats.types) | ({"null"} if s.stats.nulls else set()) | ({"absent"} if s.absent else set())
        assert set(series) == expected and len(series) == len(expected), path


class EventRows(HTMLParser):
    """The events list read back: each row's id and the text of each of its cells, by class."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.rows: list[tuple[str, dict[str, str]]] = []
        self._in_row = False
        self._cell: str | None = None
        self.feed(text)
        self.close()

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if tag == "tr":
            self._in_row = a.get("id", "").startswith("ev-")
            if self._in_row:
                self.rows.append((a["id"], {"data-level": a.get("data-level", "")}))
        elif tag == "td" and self._in_row:
            self._cell = a.get("class", "") or f"col{len(self.rows[-1][1])}"
            self.rows[-1][1][self._cell] = ""

    def handle_endtag(self, tag: str) -> None:
        if tag == "td":
            self._cell = None
        elif tag == "tr":
            self._in_row = False

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self.rows[-1][1][self._cell] += data


def test_event_levels_are_the_json_reports_breaking_first(demo: dict[str, Any]) -> None:
    from driftline.results.report import to_dict

    report = json.loads(json.dumps(to_dict(demo["profile"])))  # the JSON report as a reader gets it
    levels = [e["level"] for e in report["events"]]
    rows = EventRows(demo["page"]).rows
    # every event once, its level cell (and data-level) the JSON report's level of the same number
    assert sorted(int(i.removeprefix("ev-")) for i, _ in rows) == list(range(1, len(levels) + 1))
    for row_id, cells in rows:
        n = int(row_id.removeprefix("ev-"))
        assert cells["level"].strip() == cells["data-level"] == levels[n - 1], row_id
        assert cells["n"].strip() == str(n) and cells["kind"].strip() == report["events"][n - 1]["kind"]
    # breaking first, then widening, then info; scan order (the report's order) within a level
    order = ["breaking", "widening", "info"]  # source: docs/drift.md, "Levels"
    expected = sorted(range(1, len(levels) + 1), key=lambda n: (order.index(levels[n - 1]), n))
    assert [int(i.removeprefix("ev-")) for i, _ in rows] == expected
    assert levels[expected[0] - 1] == "breaking" and set(levels) == {"breaking", "widening"}  # the demo has both
    # the counts per level at the top: in the strip, as the JSON report's levels count them
    facts = _strip(demo["page"])
    assert [facts[f"level {lv}"] for lv in order] == [f"{levels.count(lv):,}" for lv in order]
    assert facts["events"] == f"{report['summary']['events']:,}"


# -- scale ---------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def big() -> dict[str, Any]:
    profile = big_profile(n_files=10_000, n_fields=500)
    page = html_report.render_html(profile)
    return {"profile": profile, "page": page, "parsed": Page(page)}


def test_500_fields_by_10000_files_stays_bounded(big: dict[str, Any]) -> None:
    page, parsed, profile = big["page"], big["parsed"], big["profile"]
    assert len(profile.files) == 10_000 and len(profile.fields) == 500
    assert len(page.encode("utf-8")) < 5_000_000
    # SVGs: the pattern sheet, one type bar per field, MAX_CHARTS timelines; nothing per file.
    assert parsed.count("svg") == 1 + 500 + html_report.MAX_CHARTS
    assert parsed.count("svg", "timeline") == html_report.MAX_CHARTS
    svg_tags = {"svg", "path", "rect", "text", "g", "a", "title", "circle", "pattern", "defs"}
    assert sum(1 for t, _ in parsed.tags if t in svg_tags) < 25_000
    assert len(parsed.markers) <= html_report.MAX_CHARTS * svg.MAX_MARKERS
    assert f"in {hd.MAX_BUCKETS} steps" in page
    # Tables: every field, the first MAX_EVENTS events (the rest counted), paged in the browser.
    assert sum(1 for t, a in parsed.tags if t == "tr" and "data-name" in a) == 500
    assert sum(1 for t, a in parsed.tags if t == "tr" and a.get("id", "").startswith("ev-")) == html_report.MAX_EVENTS
    assert f"{len(profile.events) - html_report.MAX_EVENTS:,} more events" in page
    # the listed ones are the first MAX_EVENTS breaking first (scan order within a level)
    listed = [int(i.removeprefix("ev-")) for i, _ in EventRows(page).rows]
    assert listed == [n for n, _ in html_report.by_level(profile.events)][: html_report.MAX_EVENTS]
    rank = {"breaking": 0, "widening": 1, "info": 2}  # source: docs/drift.md, "Levels"
    assert [rank[profile.events[n - 1].level] for n in listed] == sorted(
        rank[profile.events[n - 1].level] for n in listed
    )
    assert 'data-page-size="50"' in page
    # Partition matrices: 20 regions as they are, 500 days folded into MAX_COLUMNS runs.
    assert re.search(r"\(string, 20 columns[,)]", page) and re.search(rf"\(date32, {hd.MAX_COLUMNS} columns[,)]", page)


def test_big_profile_charts_the_type_conflicts_first(big: dict[str, Any]) -> None:
    # Every fifth field turns into a string half way: 100 conflicts, more than MAX_CHARTS,
    # so every chart is one of them (every field also has field-new / field-gone events).
    charted = {m["chart"] for m in big["parsed"].markers} | set(big["parsed"].series)
    assert len(charted) == html_report.MAX_CHARTS
    assert all(int(p[1:]) % 5 == 0 for p in charted)


# -- colour and contrast ---------------------------------------------------------------------------


def _luminance(hex_colour: str) -> float:
    # source: WCAG 2.1, definition of "relative luminance" (sRGB, 0.03928 threshold as published)
    def chan(c: int) -> float:
        s = c / 255
        return s / 12.92 if s <= 0.03928 else ((s + 0.055) / 1.055) ** 2.4

    r, g, b = (int(hex_colour[i : i + 2], 16) for i in (1, 3, 5))
    return 0.2126 * chan(r) + 0.7152 * chan(g) + 0.0722 * chan(b)


def _contrast(a: str, b: str) -> float:
    # source: WCAG 2.1, definition of "contrast ratio": (L1 + 0.05) / (L2 + 0.05)
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_contrast_formula_against_published_values() -> None:
    # source: WCAG 2.1 "contrast ratio" note: ratios range from 1 to 21 (black on white is 21:1)
    assert round(_contrast("#000000", "#ffffff"), 2) == 21.0
    # common practice (from memory): #767676 is the lightest grey with 4.5:1 on white (4.54:1)
    assert round(_contrast("#767676", "#ffffff"), 2) == 4.54


def test_palette_contrast_meets_wcag() -> None:
    css = (Path(html_report.__file__).parent / "html_assets" / "report.css").read_text(encoding="utf-8")
    var = dict(re.findall(r"--([a-z0-9]+): (#[0-9a-f]{6})", css))
    # source: WCAG 2.1 SC 1.4.3 (text 4.5:1) and SC 1.4.11 (graphical objects 3:1)
    for name, colour in typestyle.COLOURS.items():
        assert _contrast(colour.fill, "#ffffff") >= 3.0, name
        assert _contrast(svg.INK, colour.tint) >= 4.5, name  # matrix cells: ink text on each tint
    flag = re.search(r"svg \.mk \.flag \{ fill: (#[0-9a-f]{6})", css).group(1)  # type: ignore[union-attr]
    for fg, bg in [
        (svg.INK, svg.PAPER),
        (svg.MUTED, svg.PAPER),
        (svg.MUTED, "#ffffff"),
        ("#ffffff", flag),
        (var["accent"], "#ffffff"),
        (var["odd"], "#ffffff"),
        ("#ffffff", var["odd"]),  # the breaking count's badge
        ("#ffffff", var["accent"]),  # the widening one's
        ("#ffffff", var["muted"]),  # the info one's
        (svg.ABSENT_COLOUR, "#ffffff"),
    ]:
        assert _contrast(fg, bg) >= 4.5, (fg, bg)
    assert _contrast(var["focus"], "#ffffff") >= 3.0  # the focus ring
    # Readable without colour: the eight most common types differ in pattern as well as colour,
    # and no two types share both; null and absent have their own.
    styles = list(typestyle.TYPE_STYLES.values())
    assert len(set(styles)) == len(styles)
    common = [typestyle.TYPE_STYLES[k] for k in ("int64", "float64", "string", "bool", "timestamp", "timestamp-tz")]
    common += [typestyle.TYPE_STYLES[k] for k in ("list", "struct")]
    assert len({p for _, p in common}) == len({c for c, _ in common}) == 8
    sheet = svg.defs()
    assert sheet.count("<pattern") == len(set(styles)) + 2 and 'id="fill-null"' in sheet and 'id="fill-absent"' in sheet


def test_every_lattice_type_has_a_style() -> None:
    from driftline.core.lattice import NAMES

    # the table covers every type name driftline knows (null is a series of its own)
    assert {typestyle.type_name(n) for n in NAMES if n != "null"} == set(typestyle.TYPE_STYLES) - {"timestamp-tz"}
    assert typestyle.type_name("timestamp[ns, Europe/Paris]") == "timestamp-tz"
    assert typestyle.type_name("some-future-type") == "unknown"


def _type_fills(page: str) -> dict[str, set[str]]:
    """Each series' fills as the page draws them: timeline bands (data-series) and legend keys."""
    out: dict[str, set[str]] = {}
    for key, fill in re.findall(r'<path class="series" data-series="([^"]+)" d="[^"]*" fill="url\(#([^)]+)\)"', page):
        out.setdefault(html.unescape(key), set()).add(fill)
    return out


def test_a_type_has_one_colour_and_pattern_in_every_report(tmp_path: Path) -> None:
    # Two scans whose type sets differ (and whose most common type differs): int64 is the
    # rarer of two types in one and the most common of three in the other.
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    rows_a = [{"n": "x"}] * 30 + [{"n": 1}] * 3  # string, then int64
    rows_b = [{"n": 1}] * 30 + [{"n": 1.5}] * 5 + [{"n": True}] * 2  # int64, float64, bool
    (a / "a.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows_a), encoding="utf-8")
    (b / "b.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows_b), encoding="utf-8")
    page_a = html_report.render_html(driftline.scan(a, batch_rows=10), rules=False)
    page_b = html_report.render_html(driftline.scan(b, batch_rows=10), rules=False)
    fills_a, fills_b = _type_fills(page_a), _type_fills(page_b)
    assert set(fills_a) == {"string", "int64"} and set(fills_b) == {"int64", "float64", "bool"}
    assert fills_a["int64"] == fills_b["int64"] == {"fill-moss-dots"}  # the table's int64, in both
    assert fills_a["string"] == {"fill-ember-stripes"} and fills_b["bool"] == {"fill-iris-grid"}
    # the pattern those ids name is the same drawing in both pages: moss's colour with dots
    tile = re.search(r'<pattern id="fill-moss-dots".*?</pattern>', page_a).group(0)  # type: ignore[union-attr]
    assert tile in page_b and typestyle.COLOURS["moss"].fill in tile and "<circle" in tile
    # the legend and the type bars use the same ids
    for page in (page_a, page_b):
        assert 'fill="url(#fill-moss-dots)" stroke="#1b2330"' in page  # a legend key
        assert re.search(r'<svg class="bar".*?fill="url\(#fill-moss-dots\)"', page)
    # and the matrix tint of a type (the style sheet's rule) is its colour's tint, from the same table
    for page in (page_a, page_b):
        assert f".c-moss {{ background: {typestyle.COLOURS['moss'].tint}; }}" in page


def test_print_stylesheet_shows_every_page() -> None:
    css = (Path(html_report.__file__).parent / "html_assets" / "report.css").read_text(encoding="utf-8")
    printing = css[css.index("@media print") :]
    assert ".off-page { display: revert; }" in printing and ".controls, .pager" in printing


# -- aggregation cross-checked against the profile's own views ----------------------------------------


def test_group_counts_agree_with_profile_fields(demo: dict[str, Any]) -> None:
    profile = demo["profile"]
    (whole,) = hd.group_counts([list(profile.observations())], profile.fields)
    for path, s in profile.fields.items():
        c = whole[path]
        assert (c.types, c.nulls, c.absent, c.container) == (s.stats.types, s.stats.nulls, s.absent, s.container), path


def test_partition_counts_agree_with_by_partition(demo: dict[str, Any]) -> None:
    profile = demo["profile"]
    for key, info in driftline.results.report.partition_types(profile).items():
        columns = hd.partition_columns(info["values"], key=key)
        per_col = hd.partition_counts(profile, key, columns, profile.fields)
        ref = profile.by_partition(key)
        for col, counts in zip(columns, per_col, strict=True):
            (value,) = col.values
            for path, c in counts.items():
                s = ref[value].get(path)
                if s is None:  # never seen there: everything absent (or no parent to hold it)
                    assert c.types == {} and c.nulls == 0
                else:
                    want = (s.stats.types, s.stats.nulls, s.absent, s.container)
                    assert (c.types, c.nulls, c.absent, c.container) == want, (key, value, path)


def test_buckets_per_batch_per_file_and_runs(demo: dict[str, Any]) -> None:
    profile = demo["profile"]
    batches = sum(len(f.observations) for f in profile.files)
    files = [f for f in profile.files if f.observations]
    per_batch = hd.buckets(profile, max_buckets=batches)
    assert [b.stop - b.start for b in per_batch] == [1] * batches
    if batches > len(files):
        per_file = hd.buckets(profile, max_buckets=len(files))
        assert [b.first_file for b in per_file] == [f.rel for f in files]
    runs = hd.buckets(profile, max_buckets=3)
    assert len(runs) == 3 and runs[0].start == 0 and runs[-1].stop == batches
    assert all(a.stop == b.start for a, b in zip(runs, runs[1:], strict=False))
    assert sum(b.rows for b in runs) == profile.rows
    for seq in range(batches):
        b = hd.bucket_of(runs, seq)
        assert b.start <= seq < b.stop


def test_file_group_and_columns() -> None:
    parts = [("region", "east"), ("day", "2026-11-27")]
    assert hd.file_group("readings/region=east/day=2026-11-27/part-0.jsonl", parts) == "readings/region=east"
    assert hd.file_group("rollups/day=2026-11-29/x.parquet", [("day", "2026-11-29")]) == "rollups"
    assert hd.file_group("flat/a.jsonl", []) == "flat"
    cols = hd.partition_columns([f"{d:03d}" for d in range(100)], max_columns=40)
    assert len(cols) == 40 and sum(len(c.values) for c in cols) == 100 and cols[0].label == "000 … 001"


# -- the CLI -----------------------------------------------------------------------------------------


def test_cli_scan_writes_the_html_report(tmp_path: Path) -> None:
    d = _hostile(tmp_path)
    out = tmp_path / "report.html"
    res = CliRunner().invoke(app, ["scan", str(d), "--html", str(out), "--jobs", "1"])
    assert res.exit_code == 0, res.output
    assert f"HTML report written to {out}" in " ".join(res.output.split())
    # source: HTML Living Standard 13.1 — comments may precede the DOCTYPE; the first is driftline's mark
    marked = "<!-- driftline-output: an HTML report written by driftline "
    page = out.read_text(encoding="utf-8")
    assert page.startswith(marked) and page.splitlines()[1] == "<!DOCTYPE html>"
    res = CliRunner().invoke(app, ["scan", str(d), "--html", "-", "--quiet", "--jobs", "1"])
    assert res.exit_code == 0 and res.stdout.startswith(marked) and res.stdout.rstrip().endswith("</html>")
    res = CliRunner().invoke(app, ["scan", str(d), "--html", "-", "--json", "-", "--jobs", "1"])
    assert res.exit_code == 2 and "--json and --html both write to standard output" in res.output


# -- the recommender's column ----------------------------------------------------------------------


def test_recommended_rule_and_measured_loss_are_shown(demo: dict[str, Any]) -> None:
    import gzip

    # Count the demo's JSON "n/a" strings in pm25 ourselves (the manifest: "a few as "n/a"").
    n_a = 0
    for path in sorted((demo["root"] / "landing").rglob("*.jsonl.gz")):
        with gzip.open(path, "rt", encoding="utf-8") as fh:
            for line in fh:
                try:
                    n_a += json.loads(line).get("pm25") == "n/a"
                except json.JSONDecodeError:
                    continue
    assert n_a > 0
    row = re.search(r'<tr data-item data-name="pm25".*?</tr>', demo["page"], re.S)
    assert row is not None
    cell = Page(row.group(0))
    text = " ".join(" ".join(cell.text).split())
    assert "float64" in text and "parse_float" in text
    assert re.search(rf"\b{n_a} of [\d,]+ \([\d.<]+%\) become null \(null_token\)", text), text


def test_report_works_without_the_recommender(demo: dict[str, Any], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "driftline.recommendation", None)  # import now raises ImportError
    page = html_report.render_html(demo["profile"])
    assert "recommended type, cast rule, loss" not in page
    assert "appear here once driftline's recommender is installed" in page
    assert html_report.field_rules(demo["profile"]) is None


def test_types_cell_says_which_format_gave_which_type(demo_profile) -> None:
    # demo/make_demo.py: ts is an RFC 3339 string in the feed (JSON Lines), a local date-time
    # cell in the west CSV (read as timestamp[us]) and a native timestamp[us, UTC] in the
    # nightly Parquet; station_id is a string in every format, so its cell has no such title.
    page = html_report.render_html(demo_profile)
    titles = re.findall(r'title="by format: ([^"]*)"', page)
    assert "csv timestamp[us] · jsonl string · parquet timestamp[us, UTC]" in titles
    assert len(titles) == 4  # pm10, pm25, tags, ts: the fields whose formats differ


# -- the first screen: what changed ------------------------------------------------------------------


class Changes(HTMLParser):
    """The 'What changed' list read back: per level, each item's event number, its text and its links."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.levels: list[str] = []
        self.items: list[dict[str, Any]] = []
        self._ul: str | None = None
        self._li: dict[str, Any] | None = None
        self.feed(text)
        self.close()

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if tag == "ul" and "changes" in a.get("class", "").split():
            self._ul = a["data-level"]
            self.levels.append(self._ul)
        elif tag == "li" and self._ul and "data-event" in a:
            self._li = {"level": self._ul, "n": int(a["data-event"]), "text": "", "links": []}
            self.items.append(self._li)
        elif tag == "a" and self._li is not None:
            self._li["links"].append(a["href"])

    def handle_endtag(self, tag: str) -> None:
        if tag == "li":
            self._li = None
        elif tag == "ul":
            self._ul = None

    def handle_data(self, data: str) -> None:
        if self._li is not None:
            self._li["text"] += data


def test_what_changed_comes_first_by_level_with_links(demo: dict[str, Any]) -> None:
    from driftline.emit.reach import short_reach
    from driftline.results.report import to_dict

    page = demo["page"]
    report = json.loads(json.dumps(to_dict(demo["profile"])))
    events = report["events"]
    # the list comes before every other section: right after the strip
    assert page.index('id="changes"') < page.index('id="fields"') < page.index('id="timelines"')
    changes = Changes(page)
    order = ["breaking", "widening", "info"]  # source: docs/drift.md, "Levels"
    assert changes.levels == [lv for lv in order if any(e["level"] == lv for e in events)]
    listed = changes.items
    per_level = {lv: [i for i in listed if i["level"] == lv] for lv in order}
    for lv, items in per_level.items():
        found = [n for n, e in enumerate(events, 1) if e["level"] == lv]
        assert len(items) == min(len(found), html_report.CHANGES_LISTED[lv]), lv
        # each level's items are its events (the JSON report's numbers), grouped by field as the terminal does
        fields = list(dict.fromkeys(events[n - 1]["path"] for n in found))
        grouped = [n for f in fields for n in found if events[n - 1]["path"] == f]
        assert [i["n"] for i in items] == grouped[: html_report.CHANGES_LISTED[lv]], lv
        more = len(found) - len(items)
        assert (f"… {more} more {lv} change" in page) == (more > 0)
    charts = dict(re.findall(r'<figure class="chart" id="(chart-\d+)" data-item>\s*<figcaption><code>([^<]*)', page))
    chart_of = {html.unescape(p): c for c, p in charts.items()}
    profile_events = demo["profile"].events
    for item in listed:
        e = events[item["n"] - 1]
        text = " ".join(item["text"].split())
        # one line: its number, field, kind, from → to and short reach
        before, after = e["before"] or "–", e["after"] or "–"
        assert text.startswith(f"#{item['n']} {e['path']} {e['kind']} {before} → {after} "), text
        assert text.endswith(short_reach(profile_events[item["n"] - 1])), text
        # it links to its field's timeline and to its row of the events list, both on the page
        assert item["links"] == [f"#ev-{item['n']}", f"#{chart_of[e['path']]}"]
        assert f'<tr id="ev-{item["n"]}"' in page
    # the demo's first change is breaking, and the strip's level counts lead to their lists
    assert listed[0]["level"] == "breaking"
    assert 'href="#changes-breaking"' in page and 'id="changes-breaking"' in page


def test_a_scan_without_drift_says_so_at_the_top(tmp_path: Path) -> None:
    (tmp_path / "a.jsonl").write_text('{"a": 1}\n{"a": 2}\n', encoding="utf-8")
    page = html_report.render_html(driftline.scan(tmp_path), rules=False)
    assert Changes(page).items == []
    top = page[page.index('id="changes"') : page.index('id="fields"')]
    assert "No drift: every batch shows the same fields and types." in top
    assert _strip(page) == {"files": "1", "rows": "2", "datasets": "1", "size": "18 B", "events": "0"}


def test_the_strip_counts_datasets_of_a_report_set(demo: dict[str, Any]) -> None:
    page = html_report.render_html(demo["profile"], rules=False, datasets=[("a", None), ("b", "p.b.html")])
    assert _strip(page)["datasets"] == "2"


# -- paths ---------------------------------------------------------------------------------------------


def test_paths_break_only_after_slash_and_equals() -> None:
    markup = str(html_report.path_markup("readings/region=east/day=2026-11-28/part-0.jsonl.gz"))
    # source: HTML Living Standard, the wbr element: a line break opportunity
    pieces = markup.split("<wbr>")
    assert [Page(p).text for p in pieces] == [
        ["readings/"],
        ["region="],
        ["east/"],
        ["day="],
        ["2026-11-28/"],
        ["part-0.jsonl.gz"],
    ]
    # a part a browser could break (at its hyphen) is kept whole (.path .seg: nowrap); the others need nothing
    assert [p.startswith('<span class="seg">') for p in pieces] == [False, False, False, False, True, True]
    # markup in a name stays text; a part past SEGMENT_KEPT may break rather than overflow
    long = "x" * (html_report.SEGMENT_KEPT + 1)
    assert str(html_report.path_markup(f"a<b>/{long}-x")) == f'<span class="seg">a&lt;b&gt;/</span><wbr>{long}-x'
    css = (Path(html_report.__file__).parent / "html_assets" / "report.css").read_text(encoding="utf-8")
    assert ".path .seg, .paths .seg { white-space: nowrap; }" in css


def test_demo_paths_are_marked_to_wrap_at_slash_and_equals(demo: dict[str, Any]) -> None:
    page = demo["page"]
    for issue in demo["profile"].issues:
        assert f'<code class="path">{html_report.path_markup(issue.file)}</code>' in page
    first = demo["profile"].events[0]
    assert (
        f'<td class="where" data-label="begins at"><code class="path">{html_report.path_markup(first.file)}</code>'
        in page
    )


# -- the partition matrix ----------------------------------------------------------------------------------


def test_matrix_of_120_partition_values_puts_the_changed_column_first(tmp_path: Path) -> None:
    from _synthetic import partition_landing

    page = html_report.render_html(driftline.scan(partition_landing(tmp_path / "landing")), rules=False)
    table = re.search(r'<table class="matrix" data-key="station">.*?</table>', page, re.S)
    assert table is not None
    heads = re.findall(r'<th scope="col" class="([^"]*)" data-value="([^"]+)">', table.group(0))
    # every value its own column (no runs folded together), the changed one first and marked
    assert [v for _, v in heads] == ["s077"] + [f"s{i:03d}" for i in range(120) if i != 77]
    assert heads[0][0].split() == ["odd", "last-odd"] and all(c == "" for c, _ in heads[1:])
    rows = dict(
        re.findall(r'<th scope="row" class="fieldcol"><code>([^<]+)</code></th>\s*(.*?)\s*</tr>', table.group(0))
    )
    temp = re.findall(r'<td class="([^"]*)"[^>]*>(.*?)</td>', rows["temperature_celsius"])
    assert temp[0] == ("c-ember odd last-odd", '<span class="oddmark" aria-label="differs">◆</span> string')
    assert {t for t in temp[1:]} == {("c-tide", "float64")}
    assert "(string, 120 columns, 1 differing first)" in page


def test_matrix_where_no_partition_differs_keeps_the_value_order(tmp_path: Path) -> None:
    from _synthetic import partition_landing

    page = html_report.render_html(driftline.scan(partition_landing(tmp_path / "landing", 5, odd=-1)), rules=False)
    heads = re.findall(r'<th scope="col" class="([^"]*)" data-value="([^"]+)">', page)
    assert heads == [("", f"s{i:03d}") for i in range(5)]
    body = page[page.index('<section id="partitions"') : page.index('<section id="events"')]
    assert "(string, 5 columns)" in body and "last-odd" not in body and " odd" not in body and "◆ <" not in body


def test_matrix_where_every_column_differs_somewhere_keeps_the_value_order(demo: dict[str, Any]) -> None:
    # the demo's regions: each holds a cell unlike its row (west's new fields, east's tags, ...)
    page = demo["page"]
    table = re.search(r'<table class="matrix" data-key="region">.*?</table>', page, re.S)
    assert table is not None
    heads = re.findall(r'<th scope="col" class="([^"]*)" data-value="([^"]+)">', table.group(0))
    assert heads == [("", v) for v in ("east", "north", "south", "west")]
    assert re.search(r'<td class="c-[a-z]+ odd"', table.group(0))  # its odd cells are still marked
    assert "differing first" not in page[page.index("by <code>region</code>") :][:200]
