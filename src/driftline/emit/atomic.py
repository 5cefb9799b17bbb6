"""Atomic output: every file is written to a temporary sibling, flushed, then renamed.

An interrupted run (SIGINT, SIGTERM, a full disk) leaves the earlier file intact and no
half-written one; '-' means standard output.
"""

from __future__ import annotations

import errno
import os
import signal
import sys
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager, suppress

from driftline.errors import OutputError


@contextmanager
def _terminate_as_interrupt() -> Iterator[None]:
    # SIGTERM takes the same clean-up path as Ctrl-C, so the temporary file is removed.
    def raise_interrupt(signum: int, frame: object) -> None:
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, raise_interrupt)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _mode_for(target: str) -> int:
    """Keep an existing file's mode; a new file gets the usual 0666 less the umask (mkstemp gives 0600)."""
    try:
        return os.stat(target).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def write_output(target: str, data: str | bytes) -> None:
    """Write data to target atomically, or to stdout when target is '-'."""
    payload = data.encode("utf-8") if isinstance(data, str) else data
    if target == "-":
        sys.stdout.buffer.write(payload)
        sys.stdout.buffer.flush()
        return
    folder = os.path.dirname(os.path.abspath(target))
    if not os.path.isdir(folder):
        raise OutputError(f"cannot write {target!r}: folder {folder!r} does not exist")
    if os.path.isdir(target):
        raise OutputError(f"cannot write {target!r}: it is a folder; give a file name")
    tmp = None
    try:
        with _terminate_as_interrupt():
            fd, tmp = tempfile.mkstemp(prefix="." + os.path.basename(target) + ".", suffix=".tmp", dir=folder)
            os.fchmod(fd, _mode_for(target))
            with os.fdopen(fd, "wb") as fh:
                fh.write(payload)
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, target)
            tmp = None
    except OSError as exc:
        reason = "the disk is full" if exc.errno == errno.ENOSPC else (exc.strerror or str(exc))
        raise OutputError(f"cannot write {target!r}: {reason}; the earlier file, if any, is unchanged") from None
    finally:
        if tmp is not None:
            with suppress(OSError):
                os.unlink(tmp)
