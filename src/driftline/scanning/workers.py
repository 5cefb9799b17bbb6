"""Worker processes of a local scan: bounded in number, each task timed, a death retried once.

concurrent.futures' process pool turns one killed worker (the kernel's out-of-memory
killer, a crash in a native library) into BrokenProcessPool for every task still pending.
Here the tasks that were running when a pool broke are read again one at a time, each in a
process of its own: a task that kills that process too is the cause, and the scan ends
with a WorkerError naming its files; every other task runs on in a fresh pool. A task that
does not finish within the task timeout ends the scan the same way, naming its files.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import signal
import time
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from driftline.core import stagetime
from driftline.core.fileref import FileRef
from driftline.core.options import DEFAULT_TASK_TIMEOUT
from driftline.errors import WorkerError

log = logging.getLogger("driftline")

WORKER_BYTES = 256 * 2**20  # one worker (about 70 MB measured at rest) and the working set of a batch
# Tests only: a worker about to read the file named here fails on purpose. "kill:NAME" kills
# itself with SIGKILL as the out-of-memory killer would ("kill:NAME|FLAG": only while the file
# FLAG does not exist yet, so once); "hang:NAME" sleeps, as on a hung mount.
TEST_FAULT_ENV = "DRIFTLINE_TEST_WORKER_FAULT"

# Tests only: with this set to 1 a scan asked for several jobs starts its pool whatever the size
# of the work, so that the pool's own paths (faults, ordering, results equal to the serial run's)
# are exercised on small test folders (tests/conftest.py sets it for the suite).
TEST_POOL_ENV = "DRIFTLINE_TEST_ALWAYS_POOL"

# When a pool pays (docs/performance.md, "When a pool starts"): the serial reading time of the
# files is estimated from their number and size, and under POOL_MIN_SECONDS they are read in
# this process, since the pool's start, its transfers and the loss of the large serial Parquet
# groups cost more than a second core can save. Measured on 2 cores, in-process, median of 5:
# a small JSON Lines or CSV file costs about 2.5 ms, a small Parquet file 0.65 ms, and text is
# read at about 50 MB/s (a compressed file's bytes expand about 6 times, measured on gzip'd JSON).
POOL_MIN_SECONDS = 1.0
FILE_SECONDS = {"parquet": 0.00065}
TEXT_FILE_SECONDS = 0.0025
BYTES_PER_SECOND = 50e6
COMPRESSED_EXPANSION = 6

Names = Callable[[Any], list[str]]  # the relative paths a task reads, for messages


def usable_cores() -> int:
    """The cores this process may run on (its CPU affinity, which containers restrict)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def available_memory() -> int | None:
    """Bytes that can still be used: the smaller of the system's MemAvailable and what the
    cgroup (container) limit leaves; None when neither can be read."""
    found: list[int] = []
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    found.append(int(line.split()[1]) * 1024)
    except (OSError, ValueError, IndexError):
        pass
    try:
        with open("/sys/fs/cgroup/memory.max", encoding="ascii") as fh:
            limit = fh.read().strip()
        with open("/sys/fs/cgroup/memory.current", encoding="ascii") as fh:
            used = int(fh.read().strip())
        if limit.isdigit():
            found.append(max(0, int(limit) - used))
    except (OSError, ValueError):
        pass
    return min(found) if found else None


def cap_jobs(requested: int, *, cores: int | None = None, memory: int | None = -1) -> tuple[int, str | None]:
    """The number of worker processes to start, and why it is lower than asked (or None).

    More processes than cores only add memory (each costs about WORKER_BYTES), so the
    number is capped by the cores and by the memory available.

    >>> cap_jobs(4, cores=8, memory=16 * 2**30)
    (4, None)
    >>> cap_jobs(512, cores=2, memory=16 * 2**30)[0]
    2
    >>> cap_jobs(8, cores=8, memory=1 * 2**30)
    (4, '--jobs 8 lowered to 4: each worker process needs about 256 MB and 1,024 MB of memory is available')
    """
    cores = usable_cores() if cores is None else cores
    memory = available_memory() if memory == -1 else memory
    jobs, why = requested, None
    if jobs > cores:
        jobs, why = cores, f"--jobs {requested} lowered to {cores}: {cores} cores can run only {cores} workers at once"
    if memory is not None and jobs > max(1, memory // WORKER_BYTES):
        jobs = max(1, memory // WORKER_BYTES)
        why = (
            f"--jobs {requested} lowered to {jobs}: each worker process needs about {WORKER_BYTES // 2**20} MB "
            f"and {memory // 2**20:,} MB of memory is available"
        )
    return jobs, why


def serial_seconds(files: Sequence[FileRef]) -> float:
    """The estimated time to read files one after another in this process (see POOL_MIN_SECONDS).

    >>> ref = FileRef("/d/a.jsonl", "a.jsonl", (), "jsonl", None, 5_000_000, 0)
    >>> round(serial_seconds([ref] * 4), 3)  # 4 × (2.5 ms + 5 MB at 50 MB/s)
    0.41
    """
    total = 0.0
    for ref in files:
        size = ref.size * (COMPRESSED_EXPANSION if ref.compression else 1)
        total += FILE_SECONDS.get(ref.format, TEXT_FILE_SECONDS) + size / BYTES_PER_SECOND
    return total


def pool_pays(files: Sequence[FileRef], jobs: int) -> bool:
    """Whether reading files in a pool of `jobs` workers is worth starting it: several files or
    spans, and either an object store (whose waits overlap) or a second of estimated work
    (tests/scanning/test_pool_choice.py).

    >>> small = FileRef("/d/a.csv", "a.csv", (), "csv", None, 10_000, 0)
    >>> round(serial_seconds([small] * 45), 2), round(serial_seconds([small] * 1_000), 2)  # 45 files: no pool
    (0.12, 2.7)
    """
    if jobs <= 1 or not files:
        return False
    if os.environ.get(TEST_POOL_ENV) == "1" or any(ref.is_remote for ref in files):
        return True
    return serial_seconds(files) >= POOL_MIN_SECONDS


def run_ordered(
    fn: Callable[[Any, Any], Any],
    items: Sequence[Any],
    opts: Any,
    *,
    jobs: int,
    names: Names,
    task_timeout: float = DEFAULT_TASK_TIMEOUT,
    chunk: int = 1,
) -> Iterator[Any]:
    """fn(item, opts) for every item, computed in worker processes, yielded in item order.

    Items travel in chunks of `chunk` (fewer round trips for small tasks). task_timeout
    bounds the wait for the next result in order: it started when the one before it
    came back, so this is at least its own running time. A consumer that stops early
    stops the pool.
    """
    results: dict[int, Any] = {}
    nxt = 0
    while nxt < len(items):
        todo = [i for i in range(nxt, len(items)) if i not in results]
        chunks = [todo[k : k + chunk] for k in range(0, len(todo), max(1, chunk))]
        pool = ProcessPoolExecutor(max_workers=jobs)
        futures = [(c, pool.submit(_run_chunk, fn, names, [items[i] for i in c], opts)) for c in chunks]
        broken_at: int | None = None
        hung = False
        try:
            for k, (c, fut) in enumerate(futures):
                try:
                    got = fut.result(timeout=task_timeout)
                except BrokenProcessPool:
                    broken_at = k
                    break
                except TimeoutError:
                    hung = True
                    raise WorkerError(_timeout_message([n for i in c for n in names(items[i])], task_timeout)) from None
                results.update(zip(c, got, strict=True))
                while nxt in results:
                    yield results.pop(nxt)
                    nxt += 1
        finally:
            _stop(pool, kill=hung or broken_at is not None)
        if broken_at is None:
            continue
        failed = []
        for c, fut in futures[broken_at:]:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                results.update(zip(c, fut.result(), strict=True))
            else:
                failed.append(c)
        # The pool feeds tasks in order, at most jobs + 1 at a time: the cause is among these.
        suspects = [i for c in failed[: jobs + 1] for i in c]
        log.warning(
            "a worker process died while reading %s; each is read again in a process of its own",
            ", ".join(n for i in suspects for n in names(items[i])),
        )
        for i in suspects:
            results[i] = _alone(fn, names, items[i], opts, task_timeout)
        while nxt in results:
            yield results.pop(nxt)
            nxt += 1


def _run_chunk(fn: Callable[[Any, Any], Any], names: Names, items: list[Any], opts: Any) -> list[Any]:
    out = []
    for item in items:
        inject_test_fault(names(item))
        out.append(fn(item, opts))
    stagetime.flush()  # scripts/bench --profile: this worker's stage totals so far (nothing when off)
    return out


def inject_test_fault(rels: list[str]) -> None:
    """Tests only (TEST_FAULT_ENV, unset in real use): fail like a killed or hung worker."""
    spec = os.environ.get(TEST_FAULT_ENV)
    if not spec:
        return
    how, _, target = spec.partition(":")
    name, _, flag = target.partition("|")
    if name not in rels:
        return
    if flag:
        try:
            os.close(os.open(flag, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600))
        except FileExistsError:
            return  # failed once already
    if how == "kill":
        os.kill(os.getpid(), signal.SIGKILL)
    elif how == "hang":
        while True:
            time.sleep(60)


def _alone_child(conn: Any, fn: Callable[[Any, Any], Any], names: Names, item: Any, opts: Any) -> None:
    try:
        value = _run_chunk(fn, names, [item], opts)[0]
    except BaseException as exc:  # handed to the parent, which raises it as the pool would
        conn.send((False, exc))
    else:
        conn.send((True, value))
    conn.close()


def _alone(fn: Callable[[Any, Any], Any], names: Names, item: Any, opts: Any, task_timeout: float) -> Any:
    """fn(item, opts) in a process of its own: its death is this item's, and is an error."""
    ctx = multiprocessing.get_context()
    recv, send = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_alone_child, args=(send, fn, names, item, opts), daemon=True)
    proc.start()
    send.close()
    rels = names(item)
    try:
        if not recv.poll(task_timeout):
            raise WorkerError(_timeout_message(rels, task_timeout))
        try:
            ok, value = recv.recv()
        except EOFError:
            proc.join(5)
            raise WorkerError(_death_message(rels, proc.exitcode)) from None
    finally:
        recv.close()
        if proc.is_alive():
            proc.kill()
        proc.join(5)
    if not ok:
        raise value
    return value


def _stop(pool: ProcessPoolExecutor, *, kill: bool) -> None:
    if kill:
        # A hung or broken pool: its processes are ended, never waited for.
        for proc in list(getattr(pool, "_processes", {}).values()):
            if proc.is_alive():
                proc.kill()
        pool.shutdown(wait=False, cancel_futures=True)
    else:
        pool.shutdown(wait=True, cancel_futures=True)


def _files(rels: list[str]) -> str:
    return rels[0] if len(rels) == 1 else f"{rels[0]} (and {len(rels) - 1} more files of its task)"


def _death_message(rels: list[str], exitcode: int | None) -> str:
    """
    >>> _death_message(["day=1/a.jsonl"], -9)[:98]
    'the worker process reading day=1/a.jsonl died twice, the second time alone (killed by SIGKILL: the'
    """
    if exitcode is not None and exitcode < 0:
        try:
            how = f"killed by {signal.Signals(-exitcode).name}"
        except ValueError:
            how = f"killed by signal {-exitcode}"
        if exitcode == -signal.SIGKILL:
            how += ": the out-of-memory killer, or another process"
    else:
        how = f"exit status {exitcode}"
    return (
        f"the worker process reading {_files(rels)} died twice, the second time alone ({how}); nothing was "
        "reported. Check the memory available to the scan (fewer --jobs, a smaller --batch-rows), or leave "
        "the file out with --exclude"
    )


def _timeout_message(rels: list[str], task_timeout: float) -> str:
    return (
        f"reading {_files(rels)} did not finish within {task_timeout:g} s (--task-timeout); nothing was "
        "reported. Check that the file's storage answers (a hung network mount or object store), or raise "
        "--task-timeout for a file that is simply very large"
    )
