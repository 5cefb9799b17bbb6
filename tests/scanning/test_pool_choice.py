"""The pool is chosen from the work: a small scan with --jobs 2 reads in this process, a large one
starts its workers, and the report is the same either way.

The suite sets driftline.scanning.workers.TEST_POOL_ENV (tests/conftest.py) so that small test
folders still exercise the pool; these tests unset it to see the choice itself.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

from driftline.core.fileref import FileRef
from driftline.scanning import run, workers
from driftline.scanning.run import scan_paths
from driftline.scanning.workers import TEST_POOL_ENV, pool_pays, serial_seconds


@pytest.fixture(autouse=True)
def _own_choice(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv(TEST_POOL_ENV, raising=False)  # the suite's override off: the choice itself


@pytest.fixture
def choice(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """Every pool started (its jobs), on any number of cores."""
    monkeypatch.setattr(run, "cap_jobs", lambda jobs: (jobs, None))  # a 1-core runner keeps its 2 jobs
    started: list[int] = []
    real = run.run_ordered

    def spy(*args: Any, **kwargs: Any) -> Any:
        started.append(kwargs["jobs"])
        return real(*args, **kwargs)

    monkeypatch.setattr(run, "run_ordered", spy)
    return started


def _ref(fmt: str, size: int, compression: str | None = None, path: str = "/d/f") -> FileRef:
    return FileRef(path, "f", (), fmt, compression, size, 0)  # type: ignore[arg-type]


def test_the_estimate_adds_a_cost_per_file_and_per_byte():
    # The figures of docs/performance.md, "When a pool starts" (measured there, not a standard).
    assert serial_seconds([]) == 0
    assert serial_seconds([_ref("jsonl", 0)]) == pytest.approx(0.0025)
    assert serial_seconds([_ref("parquet", 0)]) == pytest.approx(0.00065)
    assert serial_seconds([_ref("csv", 50_000_000)]) == pytest.approx(1.0025)
    assert serial_seconds([_ref("jsonl", 10_000_000, "gzip")]) == pytest.approx(0.0025 + 1.2)  # expands 6 times


def test_a_pool_pays_from_a_second_of_work_or_an_object_store():
    assert not pool_pays([_ref("jsonl", 2_000)] * 45, 2)  # the 45 small files of the issue
    assert pool_pays([_ref("jsonl", 2_000)] * 400, 2)  # 400 × (2.5 ms + 0.04 ms) > 1 s
    assert not pool_pays([_ref("parquet", 2_000)] * 1_000, 2)  # 1,000 × (0.65 + 0.04 ms) < 1 s
    assert pool_pays([_ref("parquet", 2_000)] * 2_000, 2)  # the benchmark's 2,000 Parquet files
    assert pool_pays([_ref("csv", 60_000_000)] * 2, 2)
    assert not pool_pays([_ref("csv", 60_000_000)] * 2, 1)  # one job: never a pool
    assert pool_pays([_ref("jsonl", 10, path="s3://lake/a.jsonl")] * 2, 2)  # network waits overlap


def test_the_override_forces_the_pool(monkeypatch: pytest.MonkeyPatch):
    monkeypatch.setenv(TEST_POOL_ENV, "1")
    assert pool_pays([_ref("jsonl", 10)] * 2, 2)
    monkeypatch.setenv(TEST_POOL_ENV, "0")
    assert not pool_pays([_ref("jsonl", 10)] * 2, 2)


def _small_folder(root: Path, files: int) -> Path:
    for i in range(files):
        (root / f"f{i:02d}.jsonl").write_text("".join(f'{{"id": {j}, "v": "{i}-{j}"}}\n' for j in range(20)))
    return root


def test_a_small_folder_with_two_jobs_reads_in_this_process(tmp_path: Path, choice: list[int]):
    landing = _small_folder(tmp_path, 45)
    two = scan_paths([landing], jobs=2)
    assert choice == []  # no pool was started
    assert two == scan_paths([landing], jobs=1)
    assert two.rows == 45 * 20


def test_a_larger_scan_starts_the_pool_and_reports_the_same(
    tmp_path: Path, choice: list[int], monkeypatch: pytest.MonkeyPatch
):
    landing = _small_folder(tmp_path, 45)
    serial = scan_paths([landing], jobs=1)
    monkeypatch.setattr(workers, "POOL_MIN_SECONDS", 0.01)  # 45 × 2.5 ms: now above the line
    pooled = scan_paths([landing], jobs=2)
    assert choice == [2]
    assert pooled == serial


@pytest.mark.parametrize("always", ["0", "1"])
def test_the_cli_report_is_the_same_whatever_the_choice(demo_dir: Path, always: str):
    # The demo (15 data files, 196 kB) is small: --jobs 2 reads it in-process unless forced.
    def report(jobs: str, env: dict[str, str]) -> dict[str, Any]:
        cmd = [sys.executable, "-m", "driftline.cli", "scan", str(demo_dir / "landing"), "--jobs", jobs]
        run_ = subprocess.run([*cmd, "--json", "-", "-q"], capture_output=True, text=True, env=env, timeout=120)
        assert run_.returncode == 0, run_.stderr
        got = json.loads(run_.stdout)
        got.pop("duration_s")
        return got

    env = {**os.environ, TEST_POOL_ENV: always}
    assert report("2", env) == report("1", env)
