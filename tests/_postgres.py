"""A throw-away PostgreSQL server for the SQL tests: Debian's postgresql package, run with initdb
and pg_ctl in a temporary folder on a free port of 127.0.0.1, stopped at the end.

initdb refuses to run as root (PostgreSQL manual 19.1, "The Database User Account"), so as
root the server runs as the postgres user (the package makes it) or nobody, owning the folder.
scripts/test installs the package when it is missing and it runs as root; with CI set a
missing server fails the tests that need one instead of skipping them.
"""

from __future__ import annotations

import contextlib
import glob
import os
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pytest


def _bin(name: str) -> str | None:
    """A PostgreSQL server program: on PATH, or in Debian's /usr/lib/postgresql/<version>/bin."""
    found = shutil.which(name)
    if found:
        return found
    versions = sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}"), key=lambda p: int(Path(p).parts[-3]))
    return versions[-1] if versions else None


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _user() -> str | None:
    """The user the server runs as: None (ourselves) unless we are root."""
    if os.geteuid() != 0:
        return None
    import pwd

    for name in ("postgres", "nobody"):
        with contextlib.suppress(KeyError):
            pwd.getpwnam(name)
            return name
    return None


def _as(user: str | None, argv: list[str]) -> list[str]:
    if user is None:
        return argv
    runuser = shutil.which("runuser")
    return [runuser, "-u", user, "--", *argv] if runuser else ["su", user, "-s", "/bin/sh", "-c", " ".join(argv)]


def unavailable(why: str) -> None:
    """Skip, or fail with CI set (the server is part of the test run there)."""
    message = f"PostgreSQL is not available: {why} (scripts/test installs it when run as root)"
    if os.environ.get("CI"):
        pytest.fail(message)
    pytest.skip(message)


@contextlib.contextmanager
def server() -> Iterator[str]:
    """Start a server; yield its connection string (database postgres, the running user); stop it."""
    initdb, pg_ctl = _bin("initdb"), _bin("pg_ctl")
    if initdb is None or pg_ctl is None:
        unavailable("no initdb or pg_ctl")
    assert initdb is not None and pg_ctl is not None
    try:
        import psycopg  # noqa: F401
    except ImportError:
        unavailable("the psycopg package is not installed")
    user = _user()
    folder = Path(tempfile.mkdtemp(prefix="driftline-pg-"))
    data, sockets, log = folder / "data", folder / "sock", folder / "server.log"
    sockets.mkdir()
    if user is not None:
        import pwd

        entry = pwd.getpwnam(user)
        os.chown(folder, entry.pw_uid, entry.pw_gid)
        os.chown(sockets, entry.pw_uid, entry.pw_gid)
    port = _free_port()
    run_as = user or _current_user()
    started = False
    try:
        subprocess.run(
            _as(user, [initdb, "-D", str(data), "-U", run_as, "--auth=trust", "--no-sync", "-E", "UTF8"]),
            check=True,
            capture_output=True,
            timeout=120,
        )
        options = f"-h 127.0.0.1 -p {port} -k {sockets} -F"
        subprocess.run(
            _as(user, [pg_ctl, "-D", str(data), "-l", str(log), "-o", options, "-w", "-t", "60", "start"]),
            check=True,
            capture_output=True,
            timeout=90,
        )
        started = True
        yield f"host=127.0.0.1 port={port} dbname=postgres user={run_as}"
    except subprocess.CalledProcessError as exc:
        text = (exc.stderr or b"").decode(errors="replace") + (log.read_text() if log.exists() else "")
        unavailable(f"{Path(exc.cmd[-1]).name} failed: {text.strip()[-500:]}")
    finally:
        if started:
            subprocess.run(
                _as(user, [pg_ctl, "-D", str(data), "-m", "immediate", "-w", "stop"]),
                capture_output=True,
                timeout=60,
            )
        shutil.rmtree(folder, ignore_errors=True)


def _current_user() -> str:
    import pwd

    return pwd.getpwuid(os.geteuid()).pw_name
