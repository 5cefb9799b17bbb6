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
    assert page.evaluate(status) == f"page 1 of {500 // PAGE['fields']} · 500 shown"
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
