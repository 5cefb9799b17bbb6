"""A small Chrome DevTools Protocol client for the browser tests: Debian's chromium, headless.

One browser per Browser(); pages are targets attached in flat mode over the browser's
own websocket (the endpoint chromium writes to DevToolsActivePort in its profile folder).
Protocol reference: https://chromedevtools.github.io/devtools-protocol/ (Target, Page,
Runtime, Log, Network, Input, Emulation domains).
"""

from __future__ import annotations

import base64
import contextlib
import json
import os
import shutil
import subprocess
import tempfile
import time
from pathlib import Path
from typing import Any

import websocket  # websocket-client

# The flags the tests and scripts/screenshot_report run chromium with: headless, no
# sandbox (root in CI), and nothing that talks to the network on its own.
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",  # small /dev/shm in containers
    "--disable-quic",
    "--no-first-run",
    "--no-default-browser-check",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-extensions",
    "--disable-default-apps",
    "--metrics-recording-only",
    "--hide-scrollbars",
    "--mute-audio",
]


def chromium_path() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


class Page:
    """One tab: send commands, and keep every event it reports."""

    def __init__(self, browser: Browser, session: str) -> None:
        self.browser = browser
        self.session = session
        self.events: list[dict[str, Any]] = []

    def send(self, method: str, **params: Any) -> dict[str, Any]:
        return self.browser.call(method, params, self.session)

    def wait_for(self, method: str, timeout: float = 20.0) -> dict[str, Any]:
        """The first event of that name (already received or arriving within timeout)."""
        deadline = time.monotonic() + timeout
        while True:
            for ev in self.events:
                if ev["method"] == method:
                    return ev
            if time.monotonic() > deadline:
                raise TimeoutError(f"no {method} within {timeout} s")
            self.browser.pump(deadline - time.monotonic())

    def evaluate(self, expression: str) -> Any:
        res = self.send("Runtime.evaluate", expression=expression, returnByValue=True, awaitPromise=True)
        if "exceptionDetails" in res:
            raise RuntimeError(f"page script failed: {res['exceptionDetails']}")
        return res["result"].get("value")

    def settle(self, seconds: float = 0.3) -> None:
        """Let pending events arrive."""
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            self.browser.pump(deadline - time.monotonic())

    def key(self, key: str, code: str, keycode: int, shift: bool = False) -> None:
        mods = 8 if shift else 0
        for kind in ("rawKeyDown", "keyUp"):
            self.send(
                "Input.dispatchKeyEvent", type=kind, key=key, code=code, windowsVirtualKeyCode=keycode, modifiers=mods
            )

    def screenshot(self, width: int, height: int, mobile: bool = False) -> bytes:
        self.send("Emulation.setDeviceMetricsOverride", width=width, height=height, deviceScaleFactor=1, mobile=mobile)
        # clip is in document coordinates: the part of the page the window shows now.
        x, y = self.evaluate("[window.scrollX, window.scrollY]")
        clip = {"x": x, "y": y, "width": width, "height": height, "scale": 1}
        data = self.send("Page.captureScreenshot", format="png", clip=clip)
        return base64.b64decode(data["data"])


class Browser:
    """A headless chromium with a fresh profile folder, driven over the DevTools websocket."""

    def __init__(self, executable: str, *, timeout: float = 30.0) -> None:
        self.profile_dir = tempfile.mkdtemp(prefix="driftline-chromium-")
        self.proc = subprocess.Popen(
            [executable, *FLAGS, f"--user-data-dir={self.profile_dir}", "--remote-debugging-port=0", "about:blank"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        port_file = Path(self.profile_dir) / "DevToolsActivePort"
        deadline = time.monotonic() + timeout
        while not (port_file.exists() and len(port_file.read_text().splitlines()) >= 2):
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.close()
                raise RuntimeError("chromium did not start (no DevToolsActivePort)")
            time.sleep(0.05)
        port, path = port_file.read_text().splitlines()[:2]
        # No Origin header: chromium refuses websocket clients with an origin it was not told to allow.
        self.ws = websocket.create_connection(f"ws://127.0.0.1:{port}{path}", timeout=timeout, suppress_origin=True)
        self.next_id = 0
        self.pages: dict[str, Page] = {}
        self.replies: dict[int, dict[str, Any]] = {}

    def pump(self, timeout: float) -> None:
        self.ws.settimeout(max(timeout, 0.01))
        try:
            msg = json.loads(self.ws.recv())
        except websocket.WebSocketTimeoutException:
            return
        if "id" in msg:
            self.replies[msg["id"]] = msg
        elif msg.get("sessionId") in self.pages:
            self.pages[msg["sessionId"]].events.append(msg)

    def call(
        self, method: str, params: dict[str, Any], session: str | None = None, timeout: float = 30.0
    ) -> dict[str, Any]:
        self.next_id += 1
        mid = self.next_id
        msg: dict[str, Any] = {"id": mid, "method": method, "params": params}
        if session:
            msg["sessionId"] = session
        self.ws.send(json.dumps(msg))
        deadline = time.monotonic() + timeout
        while mid not in self.replies:
            if time.monotonic() > deadline:
                raise TimeoutError(f"{method}: no reply within {timeout} s")
            self.pump(deadline - time.monotonic())
        reply = self.replies.pop(mid)
        if "error" in reply:
            raise RuntimeError(f"{method}: {reply['error']}")
        return reply.get("result", {})

    def new_page(self) -> Page:
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        page = self.pages[session] = Page(self, session)
        for domain in ("Page", "Runtime", "Log", "Network"):
            page.send(f"{domain}.enable")
        return page

    def open(self, url: str, width: int = 1280, height: int = 900, mobile: bool = False) -> Page:
        """A new page showing url, after its load event (mobile: as a phone lays it out, the
        page's viewport meta tag applied)."""
        page = self.new_page()
        page.send("Emulation.setDeviceMetricsOverride", width=width, height=height, deviceScaleFactor=1, mobile=mobile)
        page.events.clear()
        page.send("Page.navigate", url=url)
        page.wait_for("Page.loadEventFired")
        page.settle()
        return page

    def close(self) -> None:
        try:
            if getattr(self, "ws", None) is not None:
                with contextlib.suppress(Exception):  # the browser may already be gone
                    self.call("Browser.close", {}, timeout=5)
                self.ws.close()
        finally:
            if self.proc.poll() is None:
                self.proc.terminate()
                try:
                    self.proc.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    self.proc.kill()
                    self.proc.wait()
            shutil.rmtree(self.profile_dir, ignore_errors=True)

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def decode_png(data: bytes) -> tuple[int, int, list[bytes]]:
    """Width, height and the unfiltered pixel rows (RGB or RGBA, 8 bits) of a PNG.

    Written from the PNG specification (W3C PNG, 3rd edition: chunk layout in 5.3, IHDR in
    11.2.1, filter types 0-4 and the Paeth predictor in 9.2-9.4) so the test does not rely
    on an image library.
    """
    import zlib

    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, width = 8, b"", 0
    height = depth = colour = 0
    while pos < len(data):
        length = int.from_bytes(data[pos : pos + 4], "big")
        kind = data[pos + 4 : pos + 8]
        body = data[pos + 8 : pos + 8 + length]
        if kind == b"IHDR":
            width, height = int.from_bytes(body[0:4], "big"), int.from_bytes(body[4:8], "big")
            depth, colour = body[8], body[9]
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    assert depth == 8 and colour in (2, 6), f"unexpected PNG depth {depth} colour type {colour}"
    bpp = 3 if colour == 2 else 4
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows: list[bytes] = []
    prev = bytearray(stride)
    for y in range(height):
        ftype = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1 : (y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b = prev[i]
            c = prev[i - bpp] if i >= bpp else 0
            if ftype == 1:
                line[i] = (line[i] + a) & 0xFF
            elif ftype == 2:
                line[i] = (line[i] + b) & 0xFF
            elif ftype == 3:
                line[i] = (line[i] + (a + b) // 2) & 0xFF
            elif ftype == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pred = a if pa <= pb and pa <= pc else b if pb <= pc else c
                line[i] = (line[i] + pred) & 0xFF
        rows.append(bytes(line) if bpp == 3 else bytes(v for j, v in enumerate(line) if j % 4 != 3))
        prev = line
    return width, height, rows


def env_requires_browser() -> bool:
    return bool(os.environ.get("CI"))
