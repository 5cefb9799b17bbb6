"""Scan engines: where the per-file reads run. `local` is scanning/run.py's own loop; `dask` runs
them on a dask.distributed cluster and merges the per-file profiles by tree reduction.

What crosses the network is one FileRef going out and one FileResult (batch observations:
field statistics and a few examples, never the rows) coming back per file. Drift is computed
on the client from the merged Profile, whose files are sorted by relative path, so the result
is exactly the local one whatever order the workers finished in.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Sequence
from typing import Any

from driftline.core.files import FileResult
from driftline.core.options import ReadOptions
from driftline.errors import EngineError
from driftline.results.profile import Profile
from driftline.sources.discover import FileRef
from driftline.sources.readers import read_file

ENGINES = ("local", "dask")
Progress = Callable[[int, int, str], None]
CONNECT_TIMEOUT_S = 10.0  # --connect-timeout: TCP connect and the scheduler's handshake
TASK_TIMEOUT_S = 3600.0  # --task-timeout: the longest the scan waits with no task finishing
SCHEMES = ("tcp", "tls", "ws", "wss")
TASKS_PER_WORKER = 4  # leaves per worker thread: enough to balance, few enough to keep overhead low
_LOST = ("KilledWorker", "CommClosedError", "CancelledError", "FutureCancelledError", "FutureLostError")


def _read_run(refs: Sequence[FileRef], opts: ReadOptions, root: str) -> Profile:
    """Runs on a worker: a contiguous run of files as one Profile (a tree leaf)."""
    from driftline.scanning.workers import inject_test_fault

    inject_test_fault([ref.rel for ref in refs])
    return Profile(root, tuple(read_file(ref, opts) for ref in refs))


def _merge_pair(left: Profile, right: Profile) -> Profile:
    """Runs on a worker: one inner node of the reduction tree."""
    return left.merge(right)


def tree_levels(n: int, fan_in: int = 2) -> int:
    """How many merge rounds a tree reduction of n leaves takes.

    >>> [tree_levels(n) for n in (1, 2, 3, 4, 5, 300)]
    [0, 1, 2, 2, 3, 9]
    """
    levels = 0
    while n > 1:
        n = -(-n // fan_in)
        levels += 1
    return levels


def _import_distributed() -> Any:
    try:
        import distributed
    except ImportError as exc:
        raise EngineError("--engine dask needs the dask extra: pip install 'driftline[dask]'") from exc
    return distributed


def scheduler_endpoint(address: str) -> tuple[str, str, int]:
    """(scheme, host, port) of a scheduler address, or an EngineError that says how to write it.

    >>> scheduler_endpoint("tcp://10.0.0.5:8786"), scheduler_endpoint("[::1]:8786")
    (('tcp', '10.0.0.5', 8786), ('tcp', '::1', 8786))
    >>> try:
    ...     scheduler_endpoint("tcp://127.0.0.1:abc")
    ... except EngineError as exc:
    ...     print(exc)
    --scheduler 'tcp://127.0.0.1:abc': the port 'abc' is not a number from 1 to 65535; write tcp://HOST:PORT, ...
    """
    example = "write tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786"
    scheme, sep, rest = address.strip().rpartition("://")
    scheme = scheme if sep else "tcp"
    if scheme not in SCHEMES:
        raise EngineError(
            f"--scheduler {address!r}: unknown scheme {scheme!r} (one of {', '.join(SCHEMES)}); {example}"
        )
    if rest.startswith("["):  # IPv6: [addr]:port
        host, _, tail = rest[1:].partition("]")
        port_text = tail[1:] if tail.startswith(":") else ""
    else:
        host, _, port_text = rest.rpartition(":") if ":" in rest else (rest, "", "")
    if not host:
        raise EngineError(f"--scheduler {address!r} names no host; {example}")
    if not port_text:
        raise EngineError(f"--scheduler {address!r} names no port (a scheduler listens on 8786 by default); {example}")
    if not (port_text.isascii() and port_text.isdigit() and 1 <= int(port_text) <= 65535):
        raise EngineError(f"--scheduler {address!r}: the port {port_text!r} is not a number from 1 to 65535; {example}")
    return scheme, host, int(port_text)


def _probe(distributed: Any, address: str, timeout: float) -> None:
    """Fail fast and clearly before a Client is made: distributed waits without end for a peer
    that accepts the connection and never answers its handshake."""
    import socket

    scheme, host, port = scheduler_endpoint(address)
    check = "check the address and that `dask scheduler` runs there"
    try:
        with socket.create_connection((host, port), timeout=timeout):
            pass
    except ConnectionRefusedError:
        raise EngineError(f"nothing listens at {address} (connection refused); {check}") from None
    except TimeoutError:
        raise EngineError(
            f"no connection to {address} within {timeout:g} s (--connect-timeout); {check}, and the firewalls between"
        ) from None
    except OSError as exc:
        raise EngineError(f"cannot connect to {address}: {exc.strerror or exc}; {check}") from None
    if scheme != "tcp":
        return  # TLS and websocket handshakes need the cluster's security settings: the Client does them
    try:
        peer = _run_async(
            lambda: _handshake(
                distributed, f"tcp://{host}:{port}" if ":" not in host else f"tcp://[{host}]:{port}", timeout
            ),
            2 * timeout + 1,
        )
    except TimeoutError:
        raise EngineError(
            f"{address} accepted the connection but did not answer as a dask scheduler within {timeout:g} s "
            "(--connect-timeout); check that the port is the scheduler's (8786 by default), not its dashboard "
            "or another service"
        ) from None
    except Exception as exc:  # a peer that answers, but not as distributed expects
        raise EngineError(
            f"{address} does not speak the dask protocol ({type(exc).__name__}: {exc}); {check}"
        ) from None
    if peer != "Scheduler":
        raise EngineError(
            f"{address} is a dask {peer or 'peer'}, not a scheduler; give the scheduler's address "
            "(the one `dask scheduler` prints, port 8786 by default)"
        )


async def _handshake(distributed: Any, address: str, timeout: float) -> str | None:
    """distributed's handshake, then the peer's identity: 'Scheduler', 'Worker', 'Nanny' (or None)."""
    import asyncio

    comm = await asyncio.wait_for(distributed.comm.connect(address, timeout=timeout), timeout)
    try:
        await comm.write({"op": "identity", "reply": True})
        answer = await asyncio.wait_for(comm.read(), timeout)
    finally:
        await comm.close()
    return answer.get("type") if isinstance(answer, dict) else None


def _run_async(make: Callable[[], Any], timeout: float) -> Any:
    """Run a coroutine to its end in a thread of its own (the caller may be inside an event loop)."""
    import asyncio
    from concurrent.futures import ThreadPoolExecutor

    pool = ThreadPoolExecutor(1)
    try:
        return pool.submit(asyncio.run, make()).result(timeout)
    finally:
        pool.shutdown(wait=False)


def _connect(
    distributed: Any, scheduler: str | None, workers: int, timeout: float = CONNECT_TIMEOUT_S
) -> tuple[Any, Any]:
    """A Client on the given scheduler, or on a fresh loopback LocalCluster (returned to close)."""
    if scheduler:
        _probe(distributed, scheduler, timeout)
        try:
            return distributed.Client(scheduler, timeout=timeout, set_as_default=False), None
        except Exception as exc:  # whatever distributed raises (versions that disagree, a lost connection)
            raise EngineError(
                f"cannot reach the dask scheduler at {scheduler!r}: {type(exc).__name__}: {exc}; "
                "check the address and that `dask scheduler` runs there"
            ) from exc
    # Loopback only: a scan started on a laptop never listens on the network.
    cluster = distributed.LocalCluster(
        n_workers=max(1, workers),
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=":0",
        silence_logs=logging.CRITICAL,
    )
    try:
        client = distributed.Client(cluster, set_as_default=False)
    except Exception:
        cluster.close()
        raise
    return client, cluster


def connect(scheduler: str | None, workers: int, timeout: float = CONNECT_TIMEOUT_S) -> tuple[Any, Any, Any]:
    """(distributed, a Client, the LocalCluster to close or None) for other verbs' tasks (apply):
    the scheduler given, or a loopback LocalCluster of workers processes."""
    distributed = _import_distributed()
    client, cluster = _connect(distributed, scheduler, workers, timeout)
    return distributed, client, cluster


def read_dask(
    files: Sequence[FileRef],
    opts: ReadOptions,
    root: str,
    *,
    scheduler: str | None = None,
    workers: int = 2,
    max_errors: int | None = None,
    progress: Progress | None = None,
    connect_timeout: float = CONNECT_TIMEOUT_S,
    task_timeout: float = TASK_TIMEOUT_S,
) -> list[FileResult]:
    """Read files on a dask cluster; return their FileResults in relative-path order.

    max_errors keeps the local meaning (files in path order up to and including the one that
    reaches the limit); every file is read, then the list is cut on the client.
    connect_timeout bounds reaching the scheduler; task_timeout is the longest wait with no
    task finishing (a hung worker or a lost scheduler ends the scan with an EngineError).
    """
    distributed = _import_distributed()
    client, cluster = _connect(distributed, scheduler, workers, connect_timeout)
    try:
        merged = _reduce(
            distributed, client, files, opts, root, progress, task_timeout, scheduler or "the local cluster"
        )
    except EngineError:
        raise
    except Exception as exc:
        # Lost workers (KilledWorker), closed connections, cancelled futures, timeouts: the
        # scan is abandoned as a whole rather than reported from what happened to arrive.
        if isinstance(exc, OSError | TimeoutError) or type(exc).__name__ in _LOST:
            raise EngineError(
                f"the dask cluster lost the scan ({type(exc).__name__}: {exc}); nothing was reported"
            ) from exc
        raise
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    if sorted(f.rel for f in merged.files) != sorted(f.rel for f in files):
        # Never a partial result passed off as a whole one.
        raise EngineError(f"the dask scan returned {len(merged.files)} of {len(files)} files")
    return _cut(list(merged.files), max_errors)


def runs_of(n: int, workers: int, per_worker: int = TASKS_PER_WORKER) -> list[range]:
    """Contiguous runs of file indexes, about per_worker of them per worker (fewer tasks, same tree).

    >>> runs_of(10, 2, 2)
    [range(0, 3), range(3, 6), range(6, 9), range(9, 10)]
    """
    size = max(1, -(-n // max(1, workers * per_worker)))
    return [range(i, min(i + size, n)) for i in range(0, n, size)]


def _reduce(
    distributed: Any,
    client: Any,
    files: Sequence[FileRef],
    opts: ReadOptions,
    root: str,
    progress: Progress | None,
    task_timeout: float = TASK_TIMEOUT_S,
    where: str = "the cluster",
) -> Profile:
    total = len(files)
    workers = max(1, sum(client.nthreads().values()))
    runs = runs_of(total, workers)
    token = _token()
    # pure=False and fresh keys: a rescan must re-read files that changed under the same FileRef.
    leaves = [
        client.submit(_read_run, [files[i] for i in run], opts, root, pure=False, key=f"driftline-read-{token}-{k}")
        for k, run in enumerate(runs)
    ]
    sizes = {leaf.key: len(run) for leaf, run in zip(leaves, runs, strict=True)}
    level = list(leaves)
    while len(level) > 1:
        # Neighbours merge, so each inner node covers a contiguous run of the sorted paths.
        nxt = [client.submit(_merge_pair, level[i], level[i + 1], pure=False) for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    spans = {leaf.key: (files[run[0]].rel, files[run[-1]].rel) for leaf, run in zip(leaves, runs, strict=True)}
    remaining = set(leaves) | set(level)
    done_files = 0
    while remaining:
        try:
            with client.as_current():  # wait() uses the current client; this one is never the default
                done, remaining = distributed.wait(list(remaining), timeout=task_timeout, return_when="FIRST_COMPLETED")
        except TimeoutError:  # the futures are released with the client (cancelling them upsets the scheduler)
            waiting = sorted(spans[f.key] for f in remaining if f.key in spans)
            what = "merging the results"
            if waiting:
                lo, hi = waiting[0]
                what = f"reading {lo}" if lo == hi else f"reading the files from {lo} to {hi} (one task)"
            raise EngineError(
                f"no dask task finished within {task_timeout:g} s (--task-timeout) while {what}; check the "
                f"workers of {where} (alive, not out of memory, able to reach the files), or raise --task-timeout"
            ) from None
        for fut in done:
            if fut.status == "error":
                fut.result()  # raises the task's own error
            done_files += sizes.get(fut.key, 0)
        if progress and any(f.key in sizes for f in done):
            progress(done_files, total, "")
    result: Profile = level[0].result()
    return result


def _token() -> str:
    import uuid

    return uuid.uuid4().hex[:12]


def _cut(results: list[FileResult], max_errors: int | None) -> list[FileResult]:
    """The serial scan's stopping rule applied after the fact."""
    if max_errors is None:
        return results
    errors = 0
    for i, res in enumerate(results):
        errors += res.errors
        if errors >= max_errors:
            return results[: i + 1]
    return results


def dask_reader(
    root: str,
    scheduler: str | None,
    *,
    connect_timeout: float = CONNECT_TIMEOUT_S,
    task_timeout: float = TASK_TIMEOUT_S,
) -> Callable[..., list[FileResult]]:
    """A reader with scanning/run.py's `_read_all` signature (files, opts, jobs, max_errors, progress).

    jobs is the worker count of the local cluster made when no scheduler is given.
    """

    def read_all(
        files: Sequence[FileRef], opts: ReadOptions, jobs: int, max_errors: int | None, progress: Progress | None
    ) -> list[FileResult]:
        return read_dask(
            files,
            opts,
            root,
            scheduler=scheduler,
            workers=jobs,
            max_errors=max_errors,
            progress=progress,
            connect_timeout=connect_timeout,
            task_timeout=task_timeout,
        )

    return read_all
