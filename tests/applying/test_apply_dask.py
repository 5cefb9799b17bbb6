"""driftline apply --engine dask against a real distributed.LocalCluster on loopback.

The reference is apply's own --jobs 1 run of the demo, which tests/applying/test_apply_run.py
checks against pyarrow, DuckDB and the recommendation's predictions: the dask run must
write the same files with the same bytes.
"""

from __future__ import annotations

import hashlib
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

import driftline
from _dask import local_cluster
from driftline.applying.output import PART_NAME
from driftline.errors import EngineError


@pytest.fixture(scope="module")
def cluster() -> Iterator[Any]:
    with local_cluster() as c:
        yield c


@pytest.fixture(scope="module")
def serial(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    out = tmp_path_factory.mktemp("serial") / "clean"
    assert driftline.apply(demo_dir / "landing", out=out, jobs=1).matches
    return _tree(out)


def _tree(out: Path) -> dict[str, str]:
    return {
        p.relative_to(out).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(out.rglob("*"))
        if p.is_file()
    }


def test_dask_writes_the_bytes_of_jobs_1(cluster: Any, demo_dir: Path, serial: dict[str, str], tmp_path: Path) -> None:
    got = driftline.apply(
        demo_dir / "landing", out=tmp_path / "clean", engine="dask", scheduler=cluster.scheduler_address
    )
    assert got.matches
    assert len(got.written) == 14  # the demo's 14 key=value partitions, each one task
    tree = _tree(tmp_path / "clean")
    assert sorted(tree) == sorted(serial)
    assert tree == serial
    assert not [k for k in tree if ".tmp-" in k]


def test_dask_with_saved_rules_and_state(demo_dir: Path, serial: dict[str, str], tmp_path: Path) -> None:
    """No --scheduler: a loopback cluster of --jobs workers; --state then keeps every partition."""
    rules, state = tmp_path / "rules.json", tmp_path / "state.json"
    driftline.scan(demo_dir / "landing").recommend().write(rules, "rules")
    out = tmp_path / "clean"
    first = driftline.apply(demo_dir / "landing", out=out, rules=rules, state=state, engine="dask", jobs=2)
    assert first.matches
    tree = _tree(out)
    skip = ("_reconciliation.json",)  # it names the rules file instead of the scan
    assert {k: v for k, v in tree.items() if k not in skip} == {k: v for k, v in serial.items() if k not in skip}
    again = driftline.apply(demo_dir / "landing", out=out, rules=rules, state=state, engine="dask", jobs=2)
    assert again.written == () and sorted(again.kept) == sorted(first.written)
    assert _tree(out) == tree


def test_unreachable_scheduler_writes_no_partition(demo_dir: Path, tmp_path: Path) -> None:
    rules = tmp_path / "rules.json"
    driftline.scan(demo_dir / "landing").recommend().write(rules, "rules")
    out = tmp_path / "clean"
    with pytest.raises(EngineError, match=r"^nothing listens at tcp://127.0.0.1:9 \(connection refused\)"):
        driftline.apply(demo_dir / "landing", out=out, rules=rules, engine="dask", scheduler="tcp://127.0.0.1:9")
    assert not list(out.rglob(PART_NAME))


def test_cli_engine_dask(cluster: Any, demo_dir: Path, serial: dict[str, str], tmp_path: Path) -> None:
    out = tmp_path / "clean"
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "driftline.cli",
            "apply",
            str(demo_dir / "landing"),
            "--out",
            str(out),
            "--engine",
            "dask",
            "--scheduler",
            cluster.scheduler_address,
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith(f"wrote 14 partitions to {out}\n")
    assert _tree(out) == serial


def test_a_task_past_the_task_timeout_is_a_clear_error(cluster: Any, demo_dir: Path, tmp_path: Path) -> None:
    rules = tmp_path / "rules.json"
    driftline.scan(demo_dir / "landing").recommend().write(rules, "rules")
    first = "readings/region=east/day=2026-11-27"  # the first partition in path order
    with pytest.raises(EngineError, match=rf"^no dask task finished within 0.001 s \(--task-timeout\) .*'{first}'"):
        driftline.apply(
            demo_dir / "landing",
            out=tmp_path / "clean",
            rules=rules,
            engine="dask",
            scheduler=cluster.scheduler_address,
            task_timeout=0.001,
        )
