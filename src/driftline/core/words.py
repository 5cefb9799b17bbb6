"""Counts in words: one noun agreeing with its number, everywhere a message counts things."""

from __future__ import annotations


def plural(n: int, noun: str, many: str | None = None) -> str:
    """The noun that goes with n: itself for exactly 1, else its plural (noun + 's', or many
    for an irregular one).

    >>> plural(1, "file"), plural(0, "file"), plural(2, "entry", "entries")
    ('file', 'files', 'entries')
    """
    if n == 1:
        return noun
    return many if many is not None else noun + "s"


def count(n: int, noun: str, many: str | None = None) -> str:
    """n and its noun, the number with thousands separators.

    >>> count(1, "file")
    '1 file'
    >>> count(0, "violation")
    '0 violations'
    >>> count(1500, "row")
    '1,500 rows'
    >>> count(2, "entry", "entries")
    '2 entries'
    >>> count(1, "file error")
    '1 file error'
    """
    return f"{n:,} {plural(n, noun, many)}"


def every(n: int, noun: str, many: str | None = None) -> str:
    """All n of something, as the subject of a sentence: 'the only file' for one, 'every one
    of the 3 files' for more.

    >>> every(1, "file") + " failed", every(3, "file") + " failed"
    ('the only file failed', 'every one of the 3 files failed')
    """
    return f"the only {noun}" if n == 1 else f"every one of the {count(n, noun, many)}"
