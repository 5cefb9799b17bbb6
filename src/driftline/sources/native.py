"""Python objects handed to Arrow's own threads, and a wait for their release before exit.

Arrow's CSV reader reads ahead and parses on its I/O and CPU thread pools, and a pending
callback there may hold the last reference to the reader after Python dropped its own.  When
that thread then releases the Python file it read from (or the invalid-row handler, or a
buffer of Python bytes), it must take the GIL; once the interpreter has begun to finalize, a
thread that asks for the GIL is ended by pthread_exit, whose unwinding through Arrow's C++
frames calls std::terminate: "terminate called without an active exception", exit 134,
after the report was written.  Seen 5 runs in 60 with four scans at a time.

So every Python object given to Arrow goes through `hand`, which counts it until Arrow lets it
go, and an atexit hook waits (GIL released) until none is left: atexit hooks run before the
interpreter starts to finalize, so the release happens while taking the GIL is still safe.
"""

from __future__ import annotations

import atexit
import threading
from typing import Any

import pyarrow as pa

_SETTLE_SECONDS = 30.0  # what a pending read-ahead of one block may take on a loaded machine

_lock = threading.Condition()
_live = 0


class _Handed:
    """A stand-in for obj that counts as live until the last reference to it goes."""

    __slots__ = ("_obj", "__weakref__")

    def __init__(self, obj: Any) -> None:
        global _live
        self._obj = obj
        with _lock:
            _live += 1

    def __getattr__(self, name: str) -> Any:
        return getattr(self._obj, name)

    def __call__(self, *args: Any) -> Any:
        return self._obj(*args)

    def __del__(self) -> None:
        global _live
        with _lock:
            _live -= 1
            _lock.notify_all()


def hand(obj: Any) -> Any:
    """obj (a file object or a callable) as Arrow should be given it: attributes and calls pass
    through, and its release is awaited at exit."""
    return _Handed(obj)


def hand_bytes(data: bytes | bytearray) -> pa.Buffer:
    """An Arrow buffer over data without a copy, whose release is awaited at exit."""
    view = pa.py_buffer(data)  # only for the address: data itself is kept by the stand-in
    return pa.foreign_buffer(view.address, view.size, base=_Handed(data))


def live() -> int:
    """How many handed objects Arrow still holds."""
    return _live


def settle(timeout: float = _SETTLE_SECONDS) -> bool:
    """Wait until Arrow released every handed object; False when timeout passed first."""
    with _lock:
        return _lock.wait_for(lambda: _live == 0, timeout)


atexit.register(settle)
