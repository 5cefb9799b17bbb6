"""The HTML report in a real browser: Debian's chromium, headless, driven over the DevTools Protocol.

scripts/test installs chromium when it is missing (as root). With CI set a missing
browser fails these tests; elsewhere they are skipped with the reason.
"""

from __future__ import annotations

import importlib.util
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from _cdp import Browser, Page, chromium_path, decode_png, env_requires_browser
from conftest import ROOT
from driftline.cli import app

SCRIPT_NAME = "<script>alert(1)</script>"
TIP = "(() => { const t = document.getElementById('tip'); return [t.hidden, t.textContent]; })()"


@pytest.fixture(scope="module")
def browser() -> Iterator[Browser]:
    exe = chromium_path()
    if exe is None:
        if env_requires_browser():
            pytest.fail("chromium is not installed; scripts/test installs it with apt-get when run as root")
        pytest.skip("chromium is not installed (scripts/test installs it when run as root; CI fails without it)")
    with Browser(exe) as b:
        yield b


def _make_demo(root: Path) -> None:
    spec = importlib.util.spec_from_file_location("make_demo", ROOT / "scripts" / "make_demo.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    module.build(root)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    root = tmp_path_factory.mktemp("demo")
    _make_demo(root)
    html, report = root / "report.html", root / "report.json"
    # Through the command line, the way scripts/demo writes it.
    res = CliRunner().invoke(app, ["scan", str(root / "landing"), "--html", str(html), "--json", str(report), "-q"])
    assert res.exit_code == 0, res.output
    return {
        "url": html.as_uri(),
        "report": json.loads(report.read_text(encoding="utf-8")),
        "manifest": json.loads((root / "manifest.json").read_text(encoding="utf-8")),
    }


@pytest.fixture(scope="module")
def demo_page(browser: Browser, demo: dict[str, Any]) -> Page:
    return browser.open(demo["url"])


def _problems(page: Page) -> list[str]:
    """Console errors and warnings, uncaught exceptions, log errors (CSP violations land there)."""
    out = []
    for ev in page.events:
        m, p = ev["method"], ev["params"]
        if m == "Runtime.consoleAPICalled" and p["type"] in ("error", "warning", "assert"):
            out.append(f"console.{p['type']}: {p['args']}")
        elif m == "Runtime.exceptionThrown":
            out.append(f"exception: {p['exceptionDetails']}")
        elif m == "Log.entryAdded" and p["entry"]["level"] in ("error", "warning"):
            out.append(f"log: {p['entry']}")
    return out


def _requests(page: Page) -> list[str]:
    return [ev["params"]["request"]["url"] for ev in page.events if ev["method"] == "Network.requestWillBeSent"]


def test_page_loads_offline_without_errors(demo_page: Page, demo: dict[str, Any]) -> None:
    assert _problems(demo_page) == []
    assert _requests(demo_page) == [demo["url"]]  # the file itself and nothing else
    assert demo_page.evaluate("document.title").startswith("driftline report")
    # source: HTML Living Standard, the "initial" insertion mode: a comment before the DOCTYPE is
    # appended to the document and leaves no-quirks mode (from memory of the parsing rules)
    assert demo_page.evaluate("document.compatMode") == "CSS1Compat"
    assert demo_page.evaluate("document.firstChild.nodeType === Node.COMMENT_NODE")  # driftline's mark
    assert demo_page.evaluate("document.documentElement.classList.contains('js')")  # our script ran (CSP hash ok)


def test_charts_have_the_series_and_flags_of_the_known_drift(demo_page: Page, demo: dict[str, Any]) -> None:
    charts = demo_page.evaluate("""
        Array.from(document.querySelectorAll('svg.timeline')).map(s => ({
          path: s.dataset.path,
          series: Array.from(s.querySelectorAll('path.series')).map(p => p.dataset.series),
          legend: Array.from(s.querySelectorAll('.legend text')).map(t => t.textContent),
          flags: Array.from(s.querySelectorAll('a.mk')).map(a => [a.dataset.kind, a.dataset.file, a.dataset.row]),
        }))""")
    report = demo["report"]
    by_path: dict[str, list[dict[str, Any]]] = {}
    for e in report["events"]:
        by_path.setdefault(e["path"], []).append(e)
    # One chart per field with drift, one flag per event of that field, in the JSON report's order.
    assert sorted(c["path"] for c in charts) == sorted(by_path)
    for c in charts:
        events = by_path[c["path"]]
        assert c["flags"] == [[e["kind"], e["file"], "" if e["row"] is None else str(e["row"])] for e in events]
        f = report["fields"][c["path"]]
        expected = set(f["types"]) | ({"null"} if f["nulls"] else set()) | ({"absent"} if f["absent"] else set())
        assert set(c["series"]) == expected and len(c["series"]) == len(expected)
        assert [t.rsplit(" ", 1)[0] for t in c["legend"]] == c["series"]  # each series is labelled in text
    # Every injected change of the demo's manifest is a flag at its file and row.
    flags = {(c["path"], *f) for c in charts for f in c["flags"]}
    for ch in demo["manifest"]["changes"]:
        if ch["field"] is not None:
            assert (ch["field"], ch["change"], ch["file"], str(ch["row"])) in flags, ch


def test_flag_shows_provenance_on_keyboard_focus_and_hover(demo_page: Page, demo: dict[str, Any]) -> None:
    first = demo["report"]["events"][0]
    # Tab from the top until a flag has focus (the links and buttons before it come first).
    demo_page.evaluate("window.scrollTo(0, 0); document.activeElement && document.activeElement.blur()")
    for _ in range(200):
        demo_page.key("Tab", "Tab", 9)
        if demo_page.evaluate("document.activeElement.classList.contains('mk')"):
            break
    else:
        pytest.fail("no drift flag is reachable with the Tab key")
    tip = demo_page.evaluate(TIP)
    focused = demo_page.evaluate("document.activeElement.getAttribute('href')")
    number = int(focused.removeprefix("#ev-"))
    event = demo["report"]["events"][number - 1]
    assert tip[0] is False
    assert f"file {event['file']}" in tip[1] and f"row {event['row']}" in tip[1] and event["kind"] in tip[1]
    # Escape hides it; pointing at the flag with the mouse shows it again.
    demo_page.key("Escape", "Escape", 27)
    assert demo_page.evaluate("document.getElementById('tip').hidden") is True
    box = demo_page.evaluate(
        "(() => { const r = document.querySelector('a.mk .flag').getBoundingClientRect();"
        " return [r.x + r.width / 2, r.y + r.height / 2]; })()"
    )
    demo_page.send("Input.dispatchMouseEvent", type="mouseMoved", x=box[0], y=box[1])
    tip = demo_page.evaluate(TIP)
    assert tip[0] is False and f"file {first['file']}" in tip[1]
    demo_page.send("Input.dispatchMouseEvent", type="mouseMoved", x=1, y=1)


def test_table_filters_sorts_and_pages(demo_page: Page, demo: dict[str, Any]) -> None:
    fields = demo["report"]["fields"]
    drifting = {e["path"] for e in demo["report"]["events"]}
    shown = (
        "Array.from(document.querySelectorAll('#field-table tbody tr')).filter(r => r.offsetParent !== null)"
        ".map(r => r.dataset.name)"
    )
    assert sorted(demo_page.evaluate(shown)) == sorted(fields)[:50]
    demo_page.evaluate("document.getElementById('drift-only').click()")
    assert sorted(demo_page.evaluate(shown)) == sorted(drifting)
    demo_page.evaluate(
        "(() => { const f = document.getElementById('field-filter'); f.value = 'PM'; "
        "f.dispatchEvent(new Event('input')); })()"
    )
    assert sorted(demo_page.evaluate(shown)) == sorted(p for p in drifting if "pm" in p.lower())
    demo_page.evaluate(
        "(() => { const f = document.getElementById('field-filter'); f.value = ''; "
        "f.dispatchEvent(new Event('input')); document.getElementById('drift-only').click(); })()"
    )
    # Sort by drift events, most first: the first row is a field with the most events.
    counts = {p: sum(1 for e in demo["report"]["events"] if e["path"] == p) for p in fields}
    demo_page.evaluate(
        "(() => { const b = document.querySelectorAll('#field-table thead button')[3]; b.click(); b.click(); })()"
    )
    top = demo_page.evaluate(shown)[0]
    assert counts[top] == max(counts.values())
    assert (
        demo_page.evaluate("document.querySelectorAll('#field-table thead th')[4].getAttribute('aria-sort')")
        == "descending"
    )


def test_print_shows_every_chart(demo_page: Page) -> None:
    total = demo_page.evaluate("document.querySelectorAll('figure.chart').length")
    visible = (
        "Array.from(document.querySelectorAll('figure.chart'))"
        ".filter(f => getComputedStyle(f).display !== 'none').length"
    )
    demo_page.send("Emulation.setEmulatedMedia", media="print")
    try:
        assert demo_page.evaluate(visible) == total
        assert demo_page.evaluate("getComputedStyle(document.querySelector('.pager')).display") == "none"
    finally:
        demo_page.send("Emulation.setEmulatedMedia", media="")


def test_screenshot_is_not_blank(demo_page: Page) -> None:
    demo_page.evaluate("window.scrollTo(0, 0)")
    width, height, rows = decode_png(demo_page.screenshot(900, 700))
    assert (width, height) == (900, 700)
    pixels = [row[i : i + 3] for row in rows for i in range(0, len(row), 3)]
    background = {b"\xff\xff\xff", bytes.fromhex("fbfaf6")}
    ink = sum(1 for p in pixels if p not in background)
    assert ink / len(pixels) > 0.15  # header band, cards, text
    assert len(set(pixels)) > 50  # anti-aliased text and the palette stripe, not one flat fill
    assert rows[8][3 * 8 : 3 * 8 + 3] == bytes.fromhex("1b2330")  # the header band is our ink colour


def test_a_field_named_script_is_text_and_runs_nothing(browser: Browser, tmp_path: Path) -> None:
    d = tmp_path / "landing"
    d.mkdir()
    (d / "a.jsonl").write_text(json.dumps({SCRIPT_NAME: 1, "n": 1}) + "\n", encoding="utf-8")
    hostile = {SCRIPT_NAME: "<img src=x onerror=alert(2)>", "n": 2}
    (d / "b.jsonl").write_text(json.dumps(hostile) + "\n", encoding="utf-8")
    out = tmp_path / "hostile.html"
    res = CliRunner().invoke(app, ["scan", str(d), "--html", str(out), "-q"])
    assert res.exit_code == 0, res.output
    page = browser.open(out.as_uri())
    assert not [ev for ev in page.events if ev["method"] == "Page.javascriptDialogOpening"]  # no alert()
    assert _problems(page) == []  # no script tried to run and was refused either
    assert _requests(page) == [out.as_uri()]  # the <img src=x> never became an image
    assert page.evaluate("document.scripts.length") == 1
    assert page.evaluate("document.images.length") == 0
    assert page.evaluate("document.querySelector('#field-table tbody th').textContent") == SCRIPT_NAME
    assert page.evaluate("document.querySelector('figure.chart figcaption').textContent") == SCRIPT_NAME
    assert page.evaluate("document.querySelector('svg.timeline').dataset.path") == SCRIPT_NAME


def test_large_report_pages_and_flags_open_the_page_of_their_event(browser: Browser, tmp_path: Path) -> None:
    from _synthetic import big_profile
    from driftline.emit.html import PAGE, write_html

    out = tmp_path / "big.html"
    write_html(big_profile(n_files=2_000, n_fields=500), str(out))
    page = browser.open(out.as_uri())
    assert _problems(page) == [] and _requests(page) == [out.as_uri()]
    rows = "Array.from(document.querySelectorAll('#field-table tbody tr')).filter(r => r.offsetParent !== null).length"
    assert page.evaluate(rows) == PAGE["fields"]
    status = "document.getElementById('field-table').parentNode.nextElementSibling.querySelector('span').textContent"
    assert page.evaluate(status) == f"page 1 of {500 // PAGE['fields']} · {PAGE['fields']} shown of 500"
    # A real click on a flag whose event is past the first page of the events list.
    href = page.evaluate("""(() => {
        const a = Array.from(document.querySelectorAll('a.mk[href]'))
          .find(a => a.getBoundingClientRect().width > 0 && +a.getAttribute('href').slice(4) > 60);
        a.scrollIntoView({block: 'center'});
        return a.getAttribute('href'); })()""")
    x, y = page.evaluate(f"""(() => {{ const r = document.querySelector('a.mk[href="{href}"] .flag')
        .getBoundingClientRect(); return [r.x + r.width / 2, r.y + r.height / 2]; }})()""")
    for kind in ("mousePressed", "mouseReleased"):
        page.send("Input.dispatchMouseEvent", type=kind, x=x, y=y, button="left", clickCount=1)
    page.settle()
    number = int(href.removeprefix("#ev-"))
    assert page.evaluate("location.hash") == href
    assert page.evaluate(f"document.getElementById('{href[1:]}').offsetParent !== null")
    events_status = (
        "document.querySelector('table.events').parentNode.nextElementSibling.querySelector('span').textContent"
    )
    # the events list puts the breaking ones first, so the row's place, not its number, sets its page
    place = page.evaluate(
        f"Array.from(document.querySelectorAll('table.events tbody tr')).findIndex(r => r.id === 'ev-{number}')"
    )
    assert place >= 0
    assert page.evaluate(events_status).startswith(f"page {place // PAGE['events'] + 1} of ")


# -- the first screen, a phone, the pager, the matrix and paths (issue: the first screen tells what changed) --

DESKTOP, PHONE = (1400, 900), (390, 844)  # a laptop window; a phone (CSS pixels of a common 6.1" one)


def _viewport(browser: Browser, url: str, size: tuple[int, int]) -> Page:
    page = browser.open(url, *size, mobile=size == PHONE)
    page.evaluate("window.scrollTo(0, 0)")
    return page


def _save_shot(page: Page, size: tuple[int, int], folder: Path, name: str) -> Path:
    """A screenshot of the first viewport, kept in the test's folder (its path printed)."""
    data = page.screenshot(*size, mobile=size == PHONE)
    width, height, _ = decode_png(data)
    assert (width, height) == size
    out = folder / f"{name}-{size[0]}x{size[1]}.png"
    out.write_bytes(data)
    print(f"screenshot: {out}")
    return out


RECT = "(el => { const r = el.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; })"


@pytest.mark.parametrize("size", [DESKTOP, PHONE], ids=["1400x900", "390x844"])
def test_first_viewport_shows_what_changed(browser: Browser, demo: dict[str, Any], tmp_path: Path, size) -> None:
    page = _viewport(browser, demo["url"], size)
    _save_shot(page, size, tmp_path, "demo-first-viewport")
    width, height = size
    assert page.evaluate("[window.innerWidth, window.innerHeight, window.scrollY]") == [width, height, 0]
    first = demo["report"]["events"]
    breaking = [n for n, e in enumerate(first, 1) if e["level"] == "breaking"]
    assert breaking  # the demo has breaking changes
    item = "document.querySelector('ul.changes[data-level=breaking] li[data-event]')"
    # the first breaking change is the first one the JSON report lists, and all of it is in view
    assert page.evaluate(f"{item}.dataset.event") == str(breaking[0])
    left, top, right, bottom = page.evaluate(f"{RECT}({item})")
    assert left >= 0 and right <= width and top >= 0 and bottom <= height, (left, top, right, bottom)
    # so are the strip's counts, each level's count in its own colour
    left, top, right, bottom = page.evaluate(f"{RECT}(document.getElementById('strip'))")
    assert top >= 0 and bottom <= height and right <= width
    colours = page.evaluate(
        "Array.from(document.querySelectorAll('.lvc'))"
        ".map(a => [a.dataset.levelCount, getComputedStyle(a).backgroundColor])"
    )
    assert dict(colours)["breaking"] == "rgb(138, 31, 61)"  # report.css --odd, the breaking colour
    assert dict(colours)["widening"] == "rgb(31, 95, 134)"  # --accent
    assert len({c for _, c in colours}) == len(colours)
    if size == DESKTOP:
        # the strip is one line: as tall as one of its items
        strip_h = bottom - top
        fact_h = page.evaluate("document.querySelector('#strip .lvc').getBoundingClientRect().height")
        assert strip_h < 1.5 * fact_h, (strip_h, fact_h)
        # every breaking change listed is in the first viewport too
        bottoms = page.evaluate(
            "Array.from(document.querySelectorAll('ul.changes[data-level=breaking] li'))"
            ".map(li => li.getBoundingClientRect().bottom)"
        )
        assert bottoms and max(bottoms) <= height


def _overflowing(page: Page, width: int) -> list[str]:
    """Elements whose box runs past the right edge of the window, outside a matrix's own scroll box."""
    return page.evaluate(f"""(() => {{
        const out = [];
        for (const el of document.querySelectorAll('body *')) {{
          if (el.closest('.matrix-box') && el !== el.closest('.matrix-box')) continue;
          if (el.closest('svg.defs') || el.id === 'tip') continue;
          const r = el.getBoundingClientRect();
          if (r.width === 0 && r.height === 0) continue;
          if (r.right > {width} + 0.5 || r.left < -0.5) out.push(el.tagName + '.' + el.className + ' ' + r.right);
        }}
        return out; }})()""")


def test_no_sideways_scroll_on_a_phone(browser: Browser, demo: dict[str, Any], tmp_path: Path) -> None:
    from _synthetic import partition_landing

    landing = partition_landing(tmp_path / "landing")
    out = tmp_path / "p120.html"
    res = CliRunner().invoke(app, ["scan", str(landing), "--html", str(out), "-q"])
    assert res.exit_code == 0, res.output
    for url in (demo["url"], out.as_uri()):
        page = _viewport(browser, url, PHONE)
        # the page itself never scrolls sideways (CSSOM View: scrollWidth past clientWidth would)
        assert page.evaluate("[document.documentElement.scrollWidth, document.documentElement.clientWidth]") == [
            PHONE[0],
            PHONE[0],
        ]
        assert _overflowing(page, PHONE[0]) == []
        # ... while a matrix wider than the phone scrolls inside its own box
        boxes = page.evaluate(
            "Array.from(document.querySelectorAll('.matrix-box')).map(b => [b.scrollWidth, b.clientWidth, "
            "getComputedStyle(b).overflowX])"
        )
        assert boxes and all(ov == "auto" for _, _, ov in boxes)
        assert any(sw > cw for sw, cw, _ in boxes)
    page.evaluate("document.getElementById('partitions').scrollIntoView()")
    _save_shot(page, PHONE, tmp_path, "p120-matrix")


PAGERS = """Array.from(document.querySelectorAll('[data-pager]')).map(box => {
    const nav = (box.parentNode.classList.contains('scroll') ? box.parentNode : box).nextElementSibling;
    const items = Array.from(box.tBodies ? box.tBodies[0].children : box.children)
      .filter(el => el.hasAttribute('data-item'));
    return {id: box.id || box.className, status: nav.querySelector('span').textContent, hidden: nav.hidden,
            shown: items.filter(el => el.getClientRects().length > 0).length, all: items.length};
})"""


def _check_pagers(page: Page) -> list[dict[str, Any]]:
    import re

    pagers = page.evaluate(PAGERS)
    for p in pagers:
        m = re.fullmatch(r"page (\d+) of (\d+) · (\d+) shown of (\d+)(?: \((\d+) filtered out\))?", p["status"])
        assert m is not None, p
        # the text says what the page displays: the rows or charts shown, out of those that pass the filter
        assert int(m.group(3)) == p["shown"], p
        assert int(m.group(4)) + int(m.group(5) or 0) == p["all"], p
    return pagers


def test_pager_says_what_it_shows(browser: Browser, demo: dict[str, Any]) -> None:
    page = _viewport(browser, demo["url"], DESKTOP)
    charts = len({e["path"] for e in demo["report"]["events"]})
    assert charts > 6  # the demo's charts take two pages of six
    pagers = {p["id"]: p for p in _check_pagers(page)}
    assert pagers["chart-list"]["status"] == f"page 1 of 2 · 6 shown of {charts}"
    page.evaluate("document.getElementById('chart-list').nextElementSibling.querySelectorAll('button')[1].click()")
    pagers = {p["id"]: p for p in _check_pagers(page)}
    assert pagers["chart-list"]["status"] == f"page 2 of 2 · {charts - 6} shown of {charts}"
    # filtered: the field table says how many pass the filter and how many it hides
    page.evaluate("document.getElementById('drift-only').click()")
    pagers = {p["id"]: p for p in _check_pagers(page)}
    fields = len(demo["report"]["fields"])
    assert (
        pagers["field-table"]["status"] == f"page 1 of 1 · {charts} shown of {charts} ({fields - charts} filtered out)"
    )


def test_matrix_of_120_values_shows_the_changed_column_and_keeps_names_whole(browser: Browser, tmp_path: Path) -> None:
    from _synthetic import partition_landing

    landing = partition_landing(tmp_path / "landing")
    out = tmp_path / "p120.html"
    res = CliRunner().invoke(app, ["scan", str(landing), "--html", str(out), "-q"])
    assert res.exit_code == 0, res.output
    for size in (DESKTOP, PHONE):
        page = _viewport(browser, out.as_uri(), size)
        page.evaluate("document.querySelector('.matrix-box').scrollIntoView()")
        box = page.evaluate(f"{RECT}(document.querySelector('.matrix-box'))")
        assert page.evaluate("document.querySelector('.matrix-box').scrollLeft") == 0
        # the changed cell (station s077) is inside the box's visible part, no scrolling needed
        odd = "document.querySelector('.matrix td.odd')"
        assert page.evaluate(f"{odd}.closest('tr').querySelector('th').textContent") == "temperature_celsius"
        assert page.evaluate(f"{odd}.closest('table').tHead.rows[0].cells[{odd}.cellIndex].dataset.value") == "s077"
        left, _, right, _ = page.evaluate(f"{RECT}({odd})")
        assert box[0] <= left and right <= box[2], (box, left, right)
        # field names and values are never wrapped (each one line box), columns keep a minimum width
        lines = page.evaluate(
            "Array.from(document.querySelectorAll('.matrix code')).map(c => [c.textContent, c.getClientRects().length])"
        )
        assert len(lines) == 120 + 3 and all(n == 1 for _, n in lines), [x for x in lines if x[1] != 1]
        widths = page.evaluate(
            "Array.from(document.querySelectorAll('.matrix thead th')).map(th => th.getBoundingClientRect().width)"
        )
        assert min(widths) >= 6 * 13  # 6.5em of 13 px text at the least
        # scrolled to the far right, the field column stays in place (position: sticky)
        page.evaluate("document.querySelector('.matrix-box').scrollLeft = 1e6")
        name = page.evaluate(f"{RECT}(document.querySelector('.matrix tbody th'))")
        assert page.evaluate("document.querySelector('.matrix-box').scrollLeft") > 0
        assert abs(name[0] - box[0]) <= 2, (name, box)
        _save_shot(page, size, tmp_path, "p120-matrix-scrolled")


LINE_BREAKS = """Array.from(document.querySelectorAll('.path, .paths')).filter(el => el.getClientRects().length > 0)
  .map(el => {
    // each character's line, from a Range around it (CSSOM View: Range.getClientRects); a space
    // at a line's end has no box, so each character notes whether a space came just before it
    const chars = [];
    let space = false;
    const walk = document.createTreeWalker(el, NodeFilter.SHOW_TEXT);
    for (let node = walk.nextNode(); node; node = walk.nextNode()) {
      for (let i = 0; i < node.data.length; i++) {
        if (/\\s/.test(node.data[i])) { space = true; continue; }
        const r = document.createRange(); r.setStart(node, i); r.setEnd(node, i + 1);
        const box = r.getClientRects()[0];
        if (box) chars.push([node.data[i], Math.round(box.top), space]);
        space = false;
      }
    }
    const breaks = [];
    for (let i = 1; i < chars.length; i++) {
      if (chars[i][1] > chars[i - 1][1] + 2) breaks.push(chars[i - 1][0] + (chars[i][2] ? " " : "") + chars[i][0]);
    }
    return [el.textContent, breaks];
  })"""


def test_paths_wrap_only_after_slash_or_equals_on_a_phone(browser: Browser, demo: dict[str, Any]) -> None:
    page = _viewport(browser, demo["url"], PHONE)
    page.evaluate("document.getElementById('events').scrollIntoView()")
    found = page.evaluate(LINE_BREAKS)
    wrapped = [(text, b) for text, b in found if b]
    assert wrapped, "no path wraps at 390 px: the check saw nothing"
    for text, breaks in wrapped:
        # the character before each line break is a / or a = (or, in prose naming paths, a space)
        assert all(pair[0] in "/=" or pair[1] == " " for pair in breaks), (text, breaks)
