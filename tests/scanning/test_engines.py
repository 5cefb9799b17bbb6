"""The dask engine against a real distributed.LocalCluster on loopback: equal to the local scan.

The reference for every check is driftline's own local engine (scan_paths with engine='local'),
which the rest of the suite checks against the demo manifest and published standards; the dask
engine must reproduce it exactly (Profile ==, events ==).
"""

from __future__ import annotations

import json
import os
import signal
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from _dask import distributed, local_cluster
from _endpoints import dead_port, silent_endpoint
from driftline.scanning.engines import EngineError, runs_of, tree_levels
from driftline.scanning.run import scan_paths


@pytest.fixture(scope="module")
def cluster() -> Iterator[Any]:
    with local_cluster() as c:
        yield c


@pytest.fixture(scope="module")
def many_files(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """300 small JSON Lines files in day=… partitions, with a type change and a new field."""
    root = tmp_path_factory.mktemp("many")
    for i in range(300):
        day = f"2026-11-{1 + i // 20:02d}"
        rows = []
        for r in range(5):
            row: dict[str, Any] = {"id": i * 5 + r, "v": (i * 5 + r) * 1.5 if i >= 150 else i * 5 + r}
            if i >= 250:
                row["extra"] = f"x{r}"
            rows.append(json.dumps(row))
        target = root / f"day={day}" / f"part-{i:04d}.jsonl"
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text("\n".join(rows) + "\n")
    (root / "day=2026-11-03" / "part-bad.jsonl").write_text('{"id": 1}\n{"id": \n')
    return root


def test_runs_cover_every_file_once_in_order() -> None:
    for n, workers in ((1, 2), (7, 2), (301, 2), (1000, 3)):
        runs = runs_of(n, workers)
        assert [i for r in runs for i in r] == list(range(n))
        assert len(runs) <= workers * 4


def test_tree_levels() -> None:
    # A binary tree over n leaves has ceil(log2 n) levels (common practice).
    assert [tree_levels(n) for n in (1, 2, 3, 8, 9, 300, 1024)] == [0, 1, 2, 3, 4, 9, 10]


def test_demo_equals_local(cluster: Any, demo_dir: Path) -> None:
    landing = demo_dir / "landing"
    local = scan_paths([landing])
    remote = scan_paths([landing], engine="dask", scheduler=cluster.scheduler_address)
    assert remote == local
    assert remote.events == local.events
    assert remote.fields == local.fields
    # Data files on disk, counted without driftline: names not starting with '.' or '_'.
    on_disk = [p for p in landing.rglob("*") if p.is_file() and not p.name.startswith((".", "_"))]
    assert len(remote.files) == len(on_disk)


def test_many_files_equal_local(cluster: Any, many_files: Path) -> None:
    local = scan_paths([many_files], jobs=1)
    remote = scan_paths([many_files], engine="dask", scheduler=cluster.scheduler_address)
    assert len(remote.files) == 301
    assert remote == local
    assert remote.events == local.events
    assert remote.rows == 300 * 5 + 1
    assert remote.fields["v"].stats.types == {"int64": 750, "float64": 750}
    assert remote.fields["extra"].absent == 1500 + 1 - 250


def test_max_errors_cut_like_serial(cluster: Any, many_files: Path) -> None:
    local = scan_paths([many_files], max_errors=1)
    remote = scan_paths([many_files], engine="dask", scheduler=cluster.scheduler_address, max_errors=1)
    assert [f.rel for f in remote.files] == [f.rel for f in local.files]
    assert remote.files[-1].rel == "day=2026-11-03/part-bad.jsonl"
    assert remote == local


def test_local_cluster_made_when_no_scheduler(demo_dir: Path) -> None:
    landing = demo_dir / "landing"
    assert scan_paths([landing], engine="dask", jobs=2) == scan_paths([landing])


def test_killed_worker_is_never_wrong(many_files: Path) -> None:
    local = scan_paths([many_files])
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=":0"
    ) as c:
        victim = next(iter(c.workers.values())).process.process.pid
        killed: list[int] = []

        def progress(done: int, total: int, current: str) -> None:
            if 0 < done < total and not killed:  # after the first run of files came back
                os.kill(victim, signal.SIGKILL)  # the nanny restarts it; its tasks and results are lost
                killed.append(victim)

        try:
            remote = scan_paths([many_files], engine="dask", scheduler=c.scheduler_address, progress=progress)
        except EngineError as exc:
            assert "dask cluster lost the scan" in str(exc)
        else:
            assert remote == local
            assert remote.events == local.events
        assert killed == [victim]


def test_unreachable_scheduler_is_a_clear_error(demo_dir: Path) -> None:
    with pytest.raises(EngineError, match=r"^nothing listens at tcp://127.0.0.1:9 \(connection refused\)"):
        scan_paths([demo_dir / "landing"], engine="dask", scheduler="tcp://127.0.0.1:9")


def test_cli_engine_dask_report_equals_local(cluster: Any, demo_dir: Path, tmp_path: Path) -> None:
    import subprocess
    import sys

    landing = str(demo_dir / "landing")
    out = {}
    for name, extra in (("local", []), ("dask", ["--engine", "dask", "--scheduler", cluster.scheduler_address])):
        target = tmp_path / f"{name}.json"
        proc = subprocess.run(
            [sys.executable, "-m", "driftline.cli", "scan", landing, "--json", str(target), "-q", *extra],
            capture_output=True,
            text=True,
            timeout=120,
        )
        assert proc.returncode == 0, proc.stderr
        out[name] = json.loads(target.read_text())
    for report in out.values():
        report.pop("duration_s", None)
    assert out["dask"] == out["local"]


def test_cli_unknown_engine_exits_2(demo_dir: Path) -> None:
    import subprocess
    import sys

    args = [sys.executable, "-m", "driftline.cli", "scan", str(demo_dir / "landing"), "--engine", "spark"]
    proc = subprocess.run(args, capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert "unknown engine 'spark'; choose local or dask" in proc.stderr


# -- dead, wrong and silent schedulers; a hung task -------------------------------------------


def test_docstring_examples_run() -> None:
    import doctest

    import driftline.scanning.engines as engines

    result = doctest.testmod(engines, optionflags=doctest.ELLIPSIS)
    assert result.failed == 0 and result.attempted >= 4


@pytest.fixture
def silent_port() -> Iterator[int]:
    """A local socket that accepts connections and never answers (the hostile endpoint)."""
    yield from silent_endpoint()


def _scheduler_run(demo_dir: Path, address: str, *extra: str) -> Any:
    from _measured import PEAK_LIMIT, run_cli, snapshot

    landing = demo_dir / "landing"
    before = snapshot(landing)
    run = run_cli("scan", str(landing), "--engine", "dask", "--scheduler", address, *extra, timeout=120)
    assert run.returncode == 2
    assert run.stdout == "" and "Traceback" not in run.stderr
    assert snapshot(landing) == before
    assert run.peak < PEAK_LIMIT
    return run


@pytest.mark.timeout(120)
def test_silent_scheduler_times_out(demo_dir: Path, silent_port: int) -> None:
    address = f"tcp://127.0.0.1:{silent_port}"
    run = _scheduler_run(demo_dir, address, "--connect-timeout", "2")
    assert run.stderr == (
        f"error: {address} accepted the connection but did not answer as a dask scheduler "
        "within 2 s (--connect-timeout); check that the port is the scheduler's (8786 by default), "
        "not its dashboard or another service\n"
    )


@pytest.mark.timeout(120)
def test_dead_scheduler_port(demo_dir: Path) -> None:
    address = f"tcp://127.0.0.1:{dead_port()}"
    run = _scheduler_run(demo_dir, address)
    assert run.stderr == (
        f"error: nothing listens at {address} (connection refused); check the address and "
        "that `dask scheduler` runs there\n"
    )


@pytest.mark.parametrize(
    ("address", "problem"),
    [
        ("tcp://127.0.0.1:abc", "the port 'abc' is not a number from 1 to 65535"),
        ("tcp://127.0.0.1:70000", "the port '70000' is not a number from 1 to 65535"),
        ("127.0.0.1", "names no port (a scheduler listens on 8786 by default)"),
        ("tcp://:8786", "names no host"),
        ("udp://127.0.0.1:8786", "unknown scheme 'udp' (one of tcp, tls, ws, wss)"),
    ],
)
def test_malformed_scheduler_address(demo_dir: Path, address: str, problem: str) -> None:
    run = _scheduler_run(demo_dir, address)
    sep = " " if problem.startswith("names") else ": "
    assert (
        run.stderr == f"error: --scheduler {address!r}{sep}{problem}; write tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786\n"
    )


@pytest.mark.timeout(180)
def test_a_hung_dask_task_times_out(many_files: Path) -> None:
    from _measured import PEAK_LIMIT, run_cli, snapshot
    from driftline.scanning.workers import TEST_FAULT_ENV

    before = snapshot(many_files)
    run = run_cli(
        "scan",
        str(many_files),
        "--engine",
        "dask",
        "--jobs",
        "1",
        "--task-timeout",
        "5",
        "-q",
        env={TEST_FAULT_ENV: "hang:day=2026-11-03/part-0045.jsonl"},
        timeout=170,
    )
    assert run.returncode == 2, run.stderr
    # 301 files on 1 worker thread: runs of 76 files (engines.runs_of); the hung file is in the first run.
    assert (
        "error: no dask task finished within 5 s (--task-timeout) while reading the files from "
        "day=2026-11-01/part-0000.jsonl to day=2026-11-04/part-0074.jsonl (one task); check the workers of "
        "the local cluster"
    ) in run.stderr
    assert "Traceback" not in run.stderr
    assert snapshot(many_files) == before
    assert run.peak < PEAK_LIMIT


@pytest.mark.timeout(120)
def test_a_worker_address_is_not_a_scheduler(cluster: Any, demo_dir: Path) -> None:
    # source: distributed's identity() answers: {"type": "Scheduler" | "Worker" | "Nanny", ...}
    worker = next(iter(cluster.scheduler_info["workers"]))
    run = _scheduler_run(demo_dir, worker, "--connect-timeout", "5")
    assert run.stderr == (
        f"error: {worker} is a dask Worker, not a scheduler; give the scheduler's address "
        "(the one `dask scheduler` prints, port 8786 by default)\n"
    )
