"""Local worker processes: bounded in number, a death retried once and then an error, tasks timed.

Workers are killed for real (SIGKILL, as the out-of-memory killer does) through the
test-only fault hook of driftline.scanning.workers. The reference for every report is the serial
scan (--jobs 1), which the rest of the suite checks against published suites.
"""

from __future__ import annotations

import doctest
import json
import os
from pathlib import Path
from typing import Any

import pytest

import driftline.scanning.workers as workers
from _measured import PEAK_LIMIT, run_cli, snapshot
from driftline.scanning.run import scan_paths
from driftline.scanning.workers import TEST_FAULT_ENV, WorkerError, cap_jobs, usable_cores


@pytest.fixture
def landing(tmp_path: Path) -> Path:
    """24 small JSON Lines files; f07 changes the type of v."""
    root = tmp_path / "landing"
    root.mkdir()
    for i in range(24):
        v = '"text"' if i == 7 else str(i)
        (root / f"f{i:02d}.jsonl").write_text(f'{{"id": {i}, "v": {v}}}\n{{"id": {i + 100}}}\n')
    return root


def report(run_stdout: str) -> dict[str, Any]:
    got = json.loads(run_stdout)
    got.pop("duration_s")
    return dict(got)


def serial(root: Path) -> dict[str, Any]:
    run = run_cli("scan", str(root), "--jobs", "1", "--json", "-", "-q")
    assert run.returncode == 0, run.stderr
    return report(run.stdout)


def test_docstring_examples_run() -> None:
    result = doctest.testmod(workers, optionflags=doctest.ELLIPSIS)
    assert result.failed == 0 and result.attempted >= 4


def test_cap_by_cores_and_memory() -> None:
    assert cap_jobs(2, cores=2, memory=None) == (2, None)
    assert cap_jobs(64, cores=2, memory=None) == (2, "--jobs 64 lowered to 2: 2 cores can run only 2 workers at once")
    # 68 MB per worker at rest (measured in the issue): 512 workers would need about 34 GB
    jobs, why = cap_jobs(512, cores=64, memory=2 * 2**30)
    assert jobs == 8 and why is not None and "about 256 MB and 2,048 MB of memory is available" in why
    assert cap_jobs(3, cores=8, memory=10)[0] == 1  # never below one worker


def test_usable_cores_is_the_affinity() -> None:
    # source: sched_getaffinity(2): the set of CPUs the process may run on
    assert usable_cores() == len(os.sched_getaffinity(0))


def test_jobs_far_above_the_cores(landing: Path) -> None:
    before = snapshot(landing)
    run = run_cli("scan", str(landing), "--jobs", "512", "--json", "-", "-q")
    assert run.returncode == 0, run.stderr
    cores = len(os.sched_getaffinity(0))
    expected = min(cores, max(1, (workers.available_memory() or 2**60) // workers.WORKER_BYTES))
    assert f"warning: --jobs 512 lowered to {expected}: " in run.stderr
    assert "Traceback" not in run.stderr
    assert report(run.stdout) == serial(landing)
    assert snapshot(landing) == before
    assert run.peak < PEAK_LIMIT


def test_a_worker_killed_once_is_retried(landing: Path, tmp_path: Path) -> None:
    before = snapshot(landing)
    flag = tmp_path / "died-once"
    run = run_cli(
        "scan", str(landing), "--jobs", "2", "--json", "-", "-q", env={TEST_FAULT_ENV: f"kill:f07.jsonl|{flag}"}
    )
    assert flag.exists()  # the worker really died
    assert run.returncode == 0, run.stderr
    assert "warning: a worker process died while reading " in run.stderr and "f07.jsonl" in run.stderr
    assert report(run.stdout) == serial(landing)
    assert snapshot(landing) == before
    assert run.peak < PEAK_LIMIT


def test_a_worker_killed_twice_is_an_error_naming_the_file(landing: Path) -> None:
    before = snapshot(landing)
    run = run_cli("scan", str(landing), "--jobs", "2", "--json", "-", "-q", env={TEST_FAULT_ENV: "kill:f07.jsonl"})
    assert run.returncode == 2
    assert run.stdout == ""  # nothing reported
    # source: signal(7): SIGKILL, the signal the out-of-memory killer sends
    assert (
        "error: the worker process reading f07.jsonl died twice, the second time alone "
        "(killed by SIGKILL: the out-of-memory killer, or another process); nothing was reported."
    ) in run.stderr
    assert "Traceback" not in run.stderr
    assert snapshot(landing) == before
    assert run.peak < PEAK_LIMIT


def test_a_hung_worker_times_out(landing: Path) -> None:
    before = snapshot(landing)
    run = run_cli(
        "scan",
        str(landing),
        "--jobs",
        "2",
        "--task-timeout",
        "3",
        "-q",
        env={TEST_FAULT_ENV: "hang:f07.jsonl"},
        timeout=120,
    )
    assert run.returncode == 2
    assert (
        "error: reading f07.jsonl did not finish within 3 s (--task-timeout); nothing was reported. "
        "Check that the file's storage answers"
    ) in run.stderr
    assert "Traceback" not in run.stderr
    assert snapshot(landing) == before
    assert run.peak < PEAK_LIMIT


@pytest.mark.parametrize("value", ["0", "-1", "abc"])
def test_task_timeout_out_of_range_is_a_usage_error(landing: Path, value: str) -> None:
    run = run_cli("scan", str(landing), "--task-timeout", value, "-q")
    assert run.returncode == 2
    assert "--task-timeout" in run.stderr and "Traceback" not in run.stderr


def test_a_split_file_whose_worker_dies_is_named(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Big JSON Lines files are read as byte spans in several tasks: a death there names the file."""
    import driftline.sources.jsonsplit as jsonsplit

    monkeypatch.setattr(jsonsplit, "SPLIT_MIN_BYTES", 1)  # forked workers inherit it
    root = tmp_path / "big"
    root.mkdir()
    (root / "big.jsonl").write_text("".join(f'{{"id": {i}}}\n' for i in range(50_000)))
    (root / "small.jsonl").write_text('{"id": 1}\n')
    monkeypatch.setenv(TEST_FAULT_ENV, f"kill:big.jsonl|{tmp_path / 'flag'}")
    again = scan_paths([root], jobs=2)  # killed once: read again, the same as serial
    assert (tmp_path / "flag").exists()
    assert again == scan_paths([root], jobs=1)
    assert again.file("big.jsonl").rows == 50_000
    monkeypatch.setenv(TEST_FAULT_ENV, "kill:big.jsonl")
    with pytest.raises(WorkerError, match=r"^the worker process reading big.jsonl died twice"):
        scan_paths([root], jobs=2)
