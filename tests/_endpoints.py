"""Local endpoints for the timeout tests: a socket that accepts and never answers, a dead port.

Both listen on loopback only (127.0.0.1), so no traffic leaves the machine.
"""

from __future__ import annotations

import socket
import threading
from collections.abc import Iterator


def silent_endpoint() -> Iterator[int]:
    """The port of a local socket that accepts connections and never answers, until closed."""
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(64)
    held: list[socket.socket] = []
    stop = threading.Event()

    def accept() -> None:
        server.settimeout(0.2)
        while not stop.is_set():
            try:
                held.append(server.accept()[0])
            except OSError:
                continue

    thread = threading.Thread(target=accept, daemon=True)
    thread.start()
    try:
        yield server.getsockname()[1]
    finally:
        stop.set()
        thread.join(5)
        for conn in held:
            conn.close()
        server.close()


def dead_port() -> int:
    """A port bound but never listening: connections to it are refused."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])
