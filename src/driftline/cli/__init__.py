"""The command line: a thin layer over the library. Nothing below driftline.cli imports it.

Exit codes (all verbs):
  0  done (scan: the data could be read; drift is information, not failure)
  1  check: a policy violation
  2  usage or input error: bad option, missing path, nothing readable, unwritable output
"""

from __future__ import annotations

import atexit
import contextlib
import os
import sys
import threading

# Verbs register themselves on `app` when imported: the group imports a verb's module when
# that verb is asked for (driftline.cli.app.VERBS).
from driftline.cli.app import app


def main() -> None:
    """Console-script entry point."""
    try:
        app(prog_name="driftline")
        code = 0
    except SystemExit as exc:
        code = _exit_code(exc.code)
    except BrokenPipeError:  # `driftline scan … | head` is fine
        code = 0
    _leave(code)


def _exit_code(code: object) -> int:
    if code is None:
        return 0
    if isinstance(code, int):
        return code
    sys.stderr.write(f"{code}\n")  # sys.exit("text") prints it and exits 1, as Python does
    return 1


def _leave(code: int) -> None:
    """End the process without finalizing the interpreter. A thread of Arrow's pools that still
    holds a Python object asks for the GIL as it lets go of it; once finalization has begun that
    request ends the thread, and the unwinding aborts the process (exit 134, about 1 scan in
    300 with 8 at a time; sources/native.py). Everything a normal exit does first is done here:
    threads joined, exit hooks run (native.settle waits for Arrow there), streams flushed."""
    shutdown = getattr(threading, "_shutdown", None)  # what finalization runs first (CPython)
    if shutdown is not None:
        shutdown()
    atexit._run_exitfuncs()
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(OSError, ValueError):  # a closed pipe or stream: nothing more to say there
            stream.flush()
    os._exit(code)


__all__ = ["app", "main"]
