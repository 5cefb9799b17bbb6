"""Numbers as people read them, shared by every emitter."""

from __future__ import annotations


def human_bytes(n: int) -> str:
    """A byte count in binary units.

    >>> human_bytes(512), human_bytes(115_097)
    ('512 B', '112.4 KiB')
    """
    size = float(n)
    for unit in ("B", "KiB", "MiB", "GiB"):
        if size < 1024 or unit == "GiB":
            return f"{n} B" if unit == "B" else f"{size:.1f} {unit}"
        size /= 1024
    return f"{n} B"  # pragma: no cover - the loop always returns
