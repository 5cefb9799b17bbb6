"""An episode's reach in words, on one line: the terminal's events list and the HTML report's."""

from __future__ import annotations

from driftline.core.words import count
from driftline.emit.safe import safe_text
from driftline.results.drift import Event


def _where(file: str | None, row: int | None) -> str:
    return safe_text(file or "", 200) + (f" row {row:,}" if row is not None else "")


# The partition values an event names on its line, at most; the JSON report lists them all.
VALUES_SHOWN = 5


def partition_text(e: Event) -> str:
    """The partition values a partition kind's event concerns, and how many of the key's values
    were compared ('' for the walk's kinds).

    >>> partition_text(Event("partition-lacks", "b", "struct", None, "w.csv", (("region", "west"),), 0, 0, 2,
    ...     None, 5, partition_key="region", partition_values=("west",), partition_compared=4))
    'at region=west, 1 of 4 region values'
    """
    if e.partition_key is None:
        return ""
    key = safe_text(e.partition_key, 60)
    shown = ", ".join(f"{key}={safe_text(v, 60)}" for v in e.partition_values[:VALUES_SHOWN])
    more = len(e.partition_values) - VALUES_SHOWN
    if more > 0:
        shown += f" and {more:,} more"
    return f"at {shown}, {len(e.partition_values):,} of {e.partition_compared:,} {key} values"


def reach_text(e: Event) -> str:
    """How far an episode reaches, on one line: files, rows (or values), from where to where,
    still going or ended (and where), recurrences; a partition kind's first names the values.

    >>> reach_text(Event("type-conflict", "t", "float64", "string", "a.jsonl", (), 0, 1500, 1501, None, 3,
    ...     1512, 1512, 3, 3, "c.jsonl", 11))
    '3 files, 1,512 rows, from a.jsonl row 1,500 (line 1,501) to c.jsonl row 11; still going'
    >>> reach_text(Event("nulls-begin", "t", None, "null", "a.jsonl", (), 0, 4, 5, None, 1, 1, 1, 1, 1, "a.jsonl", 4))
    '1 file, 1 row, from a.jsonl row 4 (line 5); still going'
    """
    files = count(e.files, "file")
    n, unit = (e.rows, "row") if e.rows is not None else (e.values, "value")
    amount = count(n, unit)
    text = f"{files}, {amount}, from {_where(e.file, e.row)}" + (f" (line {e.line:,})" if e.line is not None else "")
    if e.partition_key is not None:
        text = partition_text(e) + "; " + text
    if (e.last_file, e.last_row) != (e.file, e.row):
        text += f" to {_where(e.last_file, e.last_row)}"
    if e.recurrences:
        text += f", came back {count(e.recurrences, 'time')}"
    if e.ended_file is None:
        return text + "; still going"
    return text + f"; ended at {_where(e.ended_file, e.ended_row)}"


def short_reach(e: Event) -> str:
    """An episode's reach in a few words for the compact list: where among partitions, files,
    rows (or values), still going or ended; the positions are in reach_text (--events-detail).

    >>> short_reach(Event("type-conflict", "t", "float64", "string", "a.jsonl", (), 0, 1500, 1501, None, 3,
    ...     1512, 1512, 3, 3, "c.jsonl", 11))
    '3 files, 1,512 rows, still going'
    """
    n, unit = (e.rows, "row") if e.rows is not None else (e.values, "value")
    text = f"{count(e.files, 'file')}, {count(n, unit)}"
    if e.partition_key is not None:
        key = safe_text(e.partition_key, 40)
        shown = ", ".join(f"{key}={safe_text(v, 40)}" for v in e.partition_values[:2])
        more = len(e.partition_values) - 2
        text = f"at {shown}" + (f" and {more:,} more" if more > 0 else "") + ", " + text
    return text + (", still going" if e.ended_file is None else ", ended")
