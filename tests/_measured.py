"""Run the CLI in a child process and measure it: exit code, output, peak memory; snapshot inputs.

The peak is `resource.getrusage(RUSAGE_CHILDREN).ru_maxrss` (source: getrusage(2): the
resident set size of the largest waited-for descendant, in kilobytes on Linux), taken in
a small wrapper process of its own, so the children of earlier tests do not count.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

PEAK_LIMIT = 1.5 * 2**30  # bytes: every hostile case must stay below this

_WRAPPER = (
    "import json, resource, subprocess, sys\n"
    "p = subprocess.run(sys.argv[1:], capture_output=True)\n"
    "peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024\n"
    "sys.stdout.write(json.dumps({'rc': p.returncode, 'out': p.stdout.decode('utf-8', 'replace'),\n"
    "                             'err': p.stderr.decode('utf-8', 'replace'), 'peak': peak}))\n"
)


@dataclass
class Run:
    returncode: int
    stdout: str
    stderr: str
    peak: int  # bytes


def run_cli(*args: str, env: dict[str, str] | None = None, timeout: float = 300) -> Run:
    """`python -m driftline.cli ARGS` with its peak memory."""
    src = str(Path(__file__).resolve().parents[1] / "src")
    full_env = {**os.environ, **(env or {})}
    full_env["PYTHONPATH"] = src + os.pathsep + full_env.get("PYTHONPATH", "")
    proc = subprocess.run(
        [sys.executable, "-c", _WRAPPER, sys.executable, "-m", "driftline.cli", *args],
        capture_output=True,
        text=True,
        env=full_env,
        timeout=timeout,
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(proc.stdout)
    return Run(got["rc"], got["out"], got["err"], got["peak"])


def snapshot(root: Path) -> dict[str, str]:
    """Every file below root by relative path, with the BLAKE2 digest of its bytes."""
    return {
        p.relative_to(root).as_posix(): hashlib.blake2b(p.read_bytes(), digest_size=16).hexdigest()
        for p in sorted(root.rglob("*"))
        if p.is_file()
    }
