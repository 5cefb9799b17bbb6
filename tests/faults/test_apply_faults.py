"""driftline apply interrupted in a real subprocess: SIGINT or SIGTERM while a partition's
Parquet file is half written, and a disk that fills up, leave the earlier output whole and no
partial partition; a re-run then completes and equals a clean run."""

from __future__ import annotations

import gzip
import hashlib
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import driftline

SRC = str(Path(driftline.__file__).resolve().parents[1])
# A driftline process with one hook (monkeypatched inside that process only), by the first argument:
#   stall  the first batch of partition P is in its temporary file when "ready" appears; then it sleeps
#   full   writing partition P fails with ENOSPC, as a full disk does
PROBE = r"""
import errno, importlib, sys, time
mode, marker, partition, *args = sys.argv[1:]
output = importlib.import_module("driftline.applying.output")
real_write = output.Staged.write

def write(self, batch):
    real_write(self, batch)
    if partition in str(self.final) and "_quarantine" not in str(self.final) and "_rejected" not in str(self.final):
        if mode == "full":
            raise OSError(errno.ENOSPC, "No space left on device", str(self.tmp))
        self.writer.close(); self.writer = None  # flushed: the half-made partition is on disk
        open(marker, "w").close()
        time.sleep(120)

output.Staged.write = write
from driftline.cli import main
sys.argv = ["driftline", *args]
main()
"""
CHANGED = "readings/region=north/day=2026-11-27"


def _tree(out: Path) -> dict[str, str]:
    return {
        str(p.relative_to(out)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(out.rglob("*"))
        if p.is_file()
    }


def _grow(path: Path) -> None:
    with gzip.open(path, "rt", encoding="utf-8") as fh:
        text = fh.read()
    with gzip.open(path, "wt", encoding="utf-8") as fh:
        fh.write(text + text.split("\n", 1)[0] + "\n")


@pytest.fixture
def landed(demo_dir: Path, tmp_path: Path) -> tuple[Path, Path, dict[str, str]]:
    """A copy of the demo applied once, then one of its files changed: the next run rewrites."""
    landing = tmp_path / "landing"
    shutil.copytree(demo_dir / "landing", landing)
    out = tmp_path / "clean"
    assert driftline.apply(landing, out=out).matches
    earlier = _tree(out)
    _grow(landing / CHANGED / "part-0000.jsonl.gz")
    return landing, out, earlier


def _start(mode: str, marker: Path, landing: Path, out: Path) -> subprocess.Popen[bytes]:
    env = {**os.environ, "PYTHONPATH": SRC}
    args = [sys.executable, "-c", PROBE, mode, str(marker), CHANGED, "apply", str(landing), "--out", str(out)]
    return subprocess.Popen(args, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_signal_mid_write_leaves_the_earlier_output_whole(landed, tmp_path: Path, sig: int):
    landing, out, earlier = landed
    marker = tmp_path / "ready"
    proc = _start("stall", marker, landing, out)
    deadline = time.monotonic() + 120
    while not marker.exists() and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    assert marker.exists(), proc.communicate()[1].decode()
    # mid-write: the changed partition's temporary file is on disk beside the earlier one
    assert [p.name for p in (out / CHANGED).iterdir() if ".tmp-" in p.name] == [f".part-0.parquet.tmp-{proc.pid}"]
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err.decode()
    assert b"Traceback" not in err
    assert [p for p in out.rglob("*") if ".tmp-" in p.name] == []
    assert _tree(out) == earlier  # every partition as the earlier run left it, the changed one too
    again = driftline.apply(landing, out=out)
    assert again.matches and again.reconciliation["rows"]["in"] == 4695
    assert _tree(out) == _tree(driftline.apply(landing, out=tmp_path / "fresh").out)


@pytest.mark.slow
def test_a_full_disk_is_a_clear_error_and_keeps_the_earlier_partition(landed, tmp_path: Path):
    # ENOSPC is simulated, as in test_faults_output.py: the Parquet writer's batch write fails
    landing, out, earlier = landed
    proc = _start("full", tmp_path / "never", landing, out)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 2
    text = err.decode()
    assert f"error: cannot write partition '{CHANGED}'" in text and "No space left on device" in text, text
    assert "Traceback" not in text
    assert [p for p in out.rglob("*") if ".tmp-" in p.name] == []
    assert _tree(out) == earlier
