"""Outputs go where a person expects them.

* a regular file (or a new name) is written to a temporary sibling, flushed, then renamed
  over it: an interrupted run (SIGINT, SIGTERM, a full disk) leaves the earlier file
  intact and no half-written one;
* a symbolic link is followed: its target is replaced, the link stays;
* a character device (/dev/null) or a FIFO is written into, never replaced;
* '-', /dev/stdout, /dev/fd/N and /proc/self/fd/N are written into the open file
  descriptor, as a shell redirection would;
* a folder, a block device or a socket is refused with a clear error.
"""

from __future__ import annotations

import errno
import os
import re
import signal
import stat
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


_STD_NAMES = {"/dev/stdin": 0, "/dev/stdout": 1, "/dev/stderr": 2}
_FD_PATH = re.compile(r"\A/(?:dev/fd|proc/self/fd|proc/(\d+)/fd)/(\d+)\Z")
_MAX_LINKS = 40  # as the Linux kernel's limit on symlinks followed in one lookup


def own_descriptor(target: str) -> int | None:
    """The open file descriptor of this process that target names, through links; else None.

    >>> own_descriptor("/dev/stdout"), own_descriptor("/dev/fd/2"), own_descriptor("report.json")
    (1, 2, None)
    """
    path = os.path.abspath(target)
    for _ in range(_MAX_LINKS):
        if path in _STD_NAMES:
            return _STD_NAMES[path]
        m = _FD_PATH.match(path)
        if m is not None and (m.group(1) is None or int(m.group(1)) == os.getpid()):
            return int(m.group(2))
        try:
            link = os.readlink(path)
        except OSError:
            return None
        path = os.path.normpath(os.path.join(os.path.dirname(path), link))
    return None


def is_stdout(target: str) -> bool:
    """True for '-' and for names of standard output (/dev/stdout, /dev/fd/1, links to them)."""
    return target == "-" or own_descriptor(target) == 1


def _write_all(fd: int, payload: bytes) -> None:
    view = memoryview(payload)
    while view:
        view = view[os.write(fd, view) :]


def _write_into(target: str, path: str, payload: bytes) -> None:
    """Write into an existing device or FIFO: never created, never truncated, never replaced."""
    try:
        with _terminate_as_interrupt():
            # Opening a FIFO waits for a reader, as a shell redirection does.
            fd = os.open(path, os.O_WRONLY | os.O_NOCTTY | os.O_CLOEXEC)
            try:
                _write_all(fd, payload)
            finally:
                os.close(fd)
    except OSError as exc:
        raise OutputError(f"cannot write into {target!r}: {exc.strerror or exc}") from None


def quiet_stdout() -> None:
    """Send what is still written to standard output to /dev/null, once its reader has gone (the
    pattern Python's signal module documents for SIGPIPE): the command goes on to its own exit
    code, and the last flush at exit cannot fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # no file descriptor (a test's captured stdout): nothing to redirect
        pass


def write_output(target: str, data: str | bytes) -> None:
    """Write data to target where a person expects it (see the module); '-' is standard output."""
    payload = data.encode("utf-8") if isinstance(data, str) else data
    if not target:
        raise OutputError("an output needs a file name, or '-' for standard output")
    fd = 1 if target == "-" else own_descriptor(target)
    if fd == 1:
        try:
            sys.stdout.buffer.write(payload)
            sys.stdout.buffer.flush()
        except BrokenPipeError:  # `… | head` closed the pipe: the reader has what it wanted
            quiet_stdout()
        return
    if fd is not None:
        try:
            _write_all(fd, payload)
        except OSError as exc:
            raise OutputError(f"cannot write into {target!r}: {exc.strerror or exc}") from None
        return
    final = os.path.realpath(target)  # through symlinks: the link stays, its target is replaced
    try:
        st: os.stat_result | None = os.stat(final)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise OutputError(f"cannot write {target!r}: {exc.strerror or exc}") from None
    if st is not None and stat.S_ISDIR(st.st_mode):
        raise OutputError(f"cannot write {target!r}: it is a folder; give a file name")
    if st is not None and (stat.S_ISCHR(st.st_mode) or stat.S_ISFIFO(st.st_mode)):
        _write_into(target, final, payload)
        return
    if st is not None and not stat.S_ISREG(st.st_mode):
        kind = (
            "a block device"
            if stat.S_ISBLK(st.st_mode)
            else "a socket"
            if stat.S_ISSOCK(st.st_mode)
            else "not a regular file"
        )
        raise OutputError(f"cannot write {target!r}: it is {kind}; give a file name, a FIFO or a character device")
    folder = os.path.dirname(final)
    if not os.path.isdir(folder):
        raise OutputError(f"cannot write {target!r}: folder {folder!r} does not exist")
    tmp = None
    try:
        with _terminate_as_interrupt():
            fd, tmp = tempfile.mkstemp(prefix="." + os.path.basename(final) + ".", suffix=".tmp", dir=folder)
            os.fchmod(fd, _mode_for(final))
            with os.fdopen(fd, "wb") as fh:
                fh.write(payload)
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, final)
            tmp = None
    except OSError as exc:
        reason = "the disk is full" if exc.errno == errno.ENOSPC else (exc.strerror or str(exc))
        raise OutputError(f"cannot write {target!r}: {reason}; the earlier file, if any, is unchanged") from None
    finally:
        if tmp is not None:
            with suppress(OSError):
                os.unlink(tmp)
