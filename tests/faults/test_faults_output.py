"""Faults on output, and the scan turned against the person running it.

Output: SIGINT/SIGTERM during a run and a full disk leave no partial file and the earlier
file intact. Security: what the data holds reaches the terminal and HTML neutralised,
partition values stay data, and nothing is written outside the outputs named.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

EARLIER = '{"earlier": "report"}\n'

# A driftline process with one fault-injection hook, chosen by the first argument:
#   scan   reading a file signals "ready" (a marker file) and then sleeps: a long scan
#   write  the report is in its temporary file, flushed, when "ready" appears; then it sleeps
#   full   the disk fills up half-way through writing the report (ENOSPC from write)
# The hooks monkeypatch module attributes inside that process only.
PROBE = r"""
import errno, importlib, os, sys, time
mode, marker, *args = sys.argv[1:]
atomic = importlib.import_module("driftline.emit.atomic")
scanning = importlib.import_module("driftline.scanning.run")  # the module: driftline.scan is also a function

def ready():
    open(marker, "w").close()

if mode == "scan":
    real_read = scanning.read_files
    def slow_read(refs, opts, **kw):
        ready(); time.sleep(60)
        return real_read(refs, opts, **kw)
    scanning.read_files = slow_read
elif mode == "write":
    real_fsync = os.fsync
    def slow_fsync(fd):
        real_fsync(fd); ready(); time.sleep(60)
    atomic.os.fsync = slow_fsync
elif mode == "full":
    class FullDisk:
        def __init__(self, fd): self.fd = fd
        def __enter__(self): return self
        def __exit__(self, *exc): os.close(self.fd)
        def write(self, data):
            os.write(self.fd, data[: len(data) // 2])
            raise OSError(errno.ENOSPC, "No space left on device")
        def flush(self): pass
        def fileno(self): return self.fd
    atomic.os.fdopen = lambda fd, mode="r", *a, **k: FullDisk(fd)
from driftline.cli import main
sys.argv = ["driftline", *args]
main()
"""


def _landing(tmp_path: Path) -> Path:
    d = tmp_path / "landing"
    d.mkdir()
    (d / "a.jsonl").write_text('{"x": 1}\n{"x": 2.5}\n')
    return d


def _outputs(folder: Path) -> dict[str, str]:
    return {p.name: p.read_text() for p in folder.iterdir()}


def _start(tmp_path: Path, mode: str, *args: str) -> tuple[subprocess.Popen[str], Path]:
    marker = tmp_path / f"{mode}.ready"
    proc = subprocess.Popen(
        [sys.executable, "-c", PROBE, mode, str(marker), *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 60
    while not marker.exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the probe never reached its fault"
        time.sleep(0.02)
    return proc, marker


@pytest.mark.parametrize("when", ["scan", "write"])
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_signal_during_a_run_leaves_no_partial_output(tmp_path, when, sig):
    d = _landing(tmp_path)
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    (out_dir / "report.json").write_text(EARLIER)
    proc, _ = _start(tmp_path, when, "scan", str(d), "--json", str(out_dir / "report.json"), "--jobs", "1", "-q")
    if when == "write":  # the new report sits complete in its temporary sibling at this moment
        assert [p.name for p in out_dir.iterdir() if p.name.endswith(".tmp")]
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=30)
    # SIGTERM outside the write is the default action (the process ends, nothing was written);
    # inside it, SIGTERM takes Ctrl-C's path: the temporary file is removed, exit 130.
    expected = -signal.SIGTERM if (sig == signal.SIGTERM and when == "scan") else 130
    assert proc.returncode == expected, err
    if expected == 130:
        assert "interrupted; no output file was left half-written" in err
        assert "Traceback" not in err
    assert _outputs(out_dir) == {"report.json": EARLIER}  # no temporary file, earlier report intact


def test_a_full_disk_gives_a_clear_error_and_keeps_the_earlier_file(tmp_path):
    # ENOSPC is simulated: os.fdopen in driftline.emit.atomic returns a file whose write puts
    # half the bytes on disk and then fails with errno.ENOSPC, as a full disk does.
    d = _landing(tmp_path)
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    (out_dir / "report.json").write_text(EARLIER)
    marker = tmp_path / "never"
    res = subprocess.run(
        [
            sys.executable,
            "-c",
            PROBE,
            "full",
            str(marker),
            "scan",
            str(d),
            "--json",
            str(out_dir / "report.json"),
            "--jobs",
            "1",
            "-q",
        ],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert res.returncode == 2
    assert "error: cannot write" in res.stderr and "the disk is full" in res.stderr
    assert "the earlier file, if any, is unchanged" in res.stderr and "Traceback" not in res.stderr
    assert _outputs(out_dir) == {"report.json": EARLIER}


# -- security ------------------------------------------------------------------------------

HOSTILE = {
    "ansi": "\x1b[31mred\x1b[0m",  # recolours the terminal
    "title": "\x1b]0;pwned\x07",  # OSC: sets the window title, BEL-terminated
    "csi8": "\x9b2J",  # C1 CSI: clears the screen on 8-bit terminals
    "bidi": "abc\u202edcba",  # right-to-left override: text that reads differently
    "cr": "ok\rFAKE",  # carriage return overwrites what was shown
}
RAW_CONTROL = ["\x1b", "\x07", "\x9b", "\u202e", "\r"]


def test_field_names_values_and_file_names_reach_the_terminal_neutralised(tmp_path):
    d = tmp_path / "landing"
    d.mkdir()
    rows = [
        {HOSTILE["ansi"]: 1, "v": 1},
        {HOSTILE["ansi"]: "x", "v": HOSTILE["title"]},
        {HOSTILE["bidi"]: None, "v": HOSTILE["csi8"] + HOSTILE["cr"]},
    ]
    (d / "a.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows))
    (d / "evil\x1b[2Jname.jsonl").write_text('{"v": 1}\nnot json\n')
    res = subprocess.run(
        [sys.executable, "-m", "driftline.cli", "scan", str(d), "--jobs", "1"],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert res.returncode == 0, res.stderr
    shown = res.stdout + res.stderr
    for ch in RAW_CONTROL:
        assert ch not in shown, repr(ch)
    # source: emit.safe.safe_text, control characters become visible \x.. / \u.... escapes
    assert "\\x1b[31mred\\x1b[0m" in shown  # the field name, escaped
    assert "\\x1b[2Jname.jsonl" in shown  # the file name, in the problems list
    assert "\\u202edcba" in shown


def test_a_field_named_script_renders_as_text_in_html(tmp_path):
    d = tmp_path / "landing"
    d.mkdir()
    name, value = "<script>alert(1)</script>", "</script><img src=x onerror=alert(2)>"
    (d / "a.jsonl").write_text(json.dumps({name: 1}) + "\n" + json.dumps({name: value}) + "\n")
    out = tmp_path / "r.html"
    res = subprocess.run(
        [sys.executable, "-m", "driftline.cli", "scan", str(d), "--html", str(out), "-q", "--jobs", "1"],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert res.returncode == 0, res.stderr
    page = out.read_text()
    assert "alert(1)" in page  # the name is shown...
    assert name not in page and "<img" not in page and "onerror=alert(2)>" not in page  # ...never as markup
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page


def _snapshot(root: Path) -> dict[str, str]:
    out = {}
    for p in sorted(root.rglob("*")):
        if p.is_file():
            out[p.relative_to(root).as_posix()] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def test_partition_values_are_data_and_nothing_is_written_outside_the_named_outputs(tmp_path):
    world = tmp_path / "world"
    d = world / "landing"
    for folder in ("region=..", "region=..%2F..%2Fetc", "region=a=b", "day=~root"):
        (d / folder).mkdir(parents=True)
        (d / folder / "part.jsonl").write_text('{"x": 1}\n')
    (world / "work").mkdir()
    (world / "out").mkdir()
    before = _snapshot(world)
    res = subprocess.run(
        [
            sys.executable,
            "-m",
            "driftline.cli",
            "scan",
            str(d),
            "--json",
            str(world / "out" / "r.json"),
            "--html",
            str(world / "out" / "r.html"),
            "--jobs",
            "1",
        ],
        cwd=world / "work",
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert res.returncode == 0, res.stderr
    after = _snapshot(world)
    assert {k: v for k, v in after.items() if k in before} == before  # inputs unchanged
    assert sorted(set(after) - set(before)) == ["out/r.html", "out/r.json"]  # and only the outputs
    report = json.loads((world / "out" / "r.json").read_text())
    parts = sorted(tuple(sorted(f["partitions"].items())) for f in report["files"])
    assert parts == [(("day", "~root"),), (("region", ".."),), (("region", "..%2F..%2Fetc"),), (("region", "a=b"),)]
    assert [f["path"] for f in report["files"]] == sorted(f["path"] for f in report["files"])
    assert all(f["rows"] == 1 and f["issues"] == [] for f in report["files"])
    assert os.listdir(world / "work") == []
