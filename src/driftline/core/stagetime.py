"""CPU seconds per stage of a scan (parse, classify, exactness checks, walk, merge), for
scripts/bench --profile; nothing at all when off.

Off (the environment variable unset when the module is imported), :func:`staged` returns the
function it decorates unchanged: no wrapper, no clock, no check per call.  On, each staged
call's CPU time on its own thread (``time.thread_time``) goes to its stage, minus the staged
calls inside it, so nested stages never count twice.  A process's totals are written with
:func:`flush` to ``stages-<pid>.json`` in the folder the variable names (a pool worker
flushes after each task), and :func:`collect` sums every process's file.  What the process
spent on threads of its own (Arrow's parsing threads) is ``process - threads``: the
process's CPU time that no Python thread's clock holds.
"""

from __future__ import annotations

import functools
import json
import os
import threading
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

ENV = "DRIFTLINE_STAGE_TIMES"  # a folder: on when set (read once, at import)
STAGES = ("read", "dialect", "parse", "classify", "exactness", "walk", "columnar", "merge")

_FOLDER = os.environ.get(ENV) or None
_lock = threading.Lock()
_totals: dict[str, float] = {}
_local = threading.local()
_since: dict[str, Any] = {}  # this process's clocks when it began counting (pid, process, main thread)

F = TypeVar("F", bound=Callable[..., Any])


def enabled() -> bool:
    return _FOLDER is not None


def staged(stage: str) -> Callable[[F], F]:
    """Count the decorated function's CPU time to stage (when on; else the function itself)."""
    if stage not in STAGES:
        raise ValueError(f"unknown stage {stage!r}")

    def wrap(fn: F) -> F:
        if _FOLDER is None:
            return fn

        @functools.wraps(fn)
        def timed(*args: Any, **kwargs: Any) -> Any:
            begin()
            stack = _stack()
            stack.append(0.0)  # CPU time of the staged calls inside this one
            start = time.thread_time()
            try:
                return fn(*args, **kwargs)
            finally:
                spent = time.thread_time() - start
                inner = stack.pop()
                if stack:
                    stack[-1] += spent
                with _lock:
                    _totals[stage] = _totals.get(stage, 0.0) + spent - inner
                    if not stack and threading.current_thread() is not threading.main_thread():
                        # a helper thread's (string_profiles' pool, a callback on Arrow's reader thread)
                        _totals["threads"] = _totals.get("threads", 0.0) + spent

        return timed  # type: ignore[return-value]

    return wrap


def _stack() -> list[float]:
    got: list[float] | None = getattr(_local, "stack", None)
    if got is None:
        got = _local.stack = []
    return got


def begin() -> None:
    """Start counting in this process (again, after a fork: a pool worker's copy of its parent's)."""
    if _since.get("pid") == os.getpid():
        return
    with _lock:
        _totals.clear()
        _since.update(pid=os.getpid(), process=time.process_time(), main=time.thread_time())


def flush() -> None:
    """Write this process's totals (when on and counting): main is the main thread's CPU time,
    process the whole process's, since counting began."""
    if _FOLDER is None or _since.get("pid") != os.getpid():
        return
    with _lock:
        got = dict(_totals)
    got["process"] = time.process_time() - _since["process"]
    if threading.current_thread() is threading.main_thread():
        got["main"] = time.thread_time() - _since["main"]
    target = Path(_FOLDER) / f"stages-{os.getpid()}.json"
    tmp = target.with_name(target.name + ".tmp")
    tmp.write_text(json.dumps(got))
    tmp.replace(target)


def collect(folder: str | Path) -> dict[str, float]:
    """Every process's totals in folder, summed; 'other' is main-thread time outside the stages,
    'arrow threads' the CPU time of threads no Python clock saw (Arrow's own)."""
    out: dict[str, float] = {}
    for f in sorted(Path(folder).glob("stages-*.json")):
        got = json.loads(f.read_text())
        staged_main = sum(got.get(s, 0.0) for s in STAGES) - got.get("threads", 0.0)
        main = got.get("main", staged_main)
        for s in STAGES:
            out[s] = out.get(s, 0.0) + got.get(s, 0.0)
        out["other"] = out.get("other", 0.0) + max(0.0, main - staged_main)
        arrow = got.get("process", 0.0) - main - got.get("threads", 0.0)
        out["arrow threads"] = out.get("arrow threads", 0.0) + max(0.0, arrow)
        out["process"] = out.get("process", 0.0) + got.get("process", 0.0)
    return out
