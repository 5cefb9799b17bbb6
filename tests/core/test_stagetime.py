"""core/stagetime: the stage clocks of scripts/bench --profile, and nothing at all when off."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from conftest import ROOT
from driftline.core import stagetime


def test_off_the_function_itself() -> None:
    # The suite runs without the variable: no wrapper, so no cost per call.
    assert not stagetime.enabled()

    def f() -> int:
        return 1

    assert stagetime.staged("parse")(f) is f


_CHILD = """
import json, sys
from driftline.core import stagetime

def burn(n):
    return sum(i * i for i in range(n))

@stagetime.staged("classify")
def inner():
    return burn(3_000_000)

@stagetime.staged("parse")
def outer():
    burn(3_000_000)
    return inner()

stagetime.begin()
outer()
inner()
stagetime.flush()
print(json.dumps(stagetime.collect(sys.argv[1])))
"""


def test_nested_stages_count_once(tmp_path: Path) -> None:
    env = {**os.environ, stagetime.ENV: str(tmp_path), "PYTHONPATH": str(ROOT / "src")}
    proc = subprocess.run(
        [sys.executable, "-c", _CHILD, str(tmp_path)], capture_output=True, text=True, env=env, timeout=120
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(proc.stdout)
    assert len(list(tmp_path.glob("stages-*.json"))) == 1  # one process, one file
    # inner ran twice (once inside outer), outer's own work once: the same loop three times, so
    # classify holds about twice what parse holds; were inner counted in outer too, parse would hold more
    assert got["classify"] > 1.3 * got["parse"] > 0
    # every CPU second of the process is somewhere: the stages, the rest of the main thread, other threads
    parts = got["parse"] + got["classify"] + got["other"] + got["arrow threads"]
    assert abs(parts - got["process"]) < 0.05 * got["process"] + 0.01
