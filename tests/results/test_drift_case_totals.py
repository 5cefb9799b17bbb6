"""The golden drift cases' episode totals against an independent count made with DuckDB.

DuckDB reads each input file of a case (read_ndjson_objects, one thread so rows come back
in file order) and gives each row's JSON type of the field; the reach of the episode is then
counted from those types alone, file by file (each file is one batch at the default batch
size): values and rows, files and batches, first and last place, whether it is still going,
where it ended and how often it came back. None of driftline's arithmetic is used.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

import driftline
from _drift_cases import CASES

Shows = Callable[[str | None], bool]


def _json_types(folder: Path, field: str) -> list[tuple[str, int, str | None]]:
    """(file, 0-based row, JSON type of field or None when the key is missing) for every row."""
    import duckdb

    con = duckdb.connect()
    con.execute("SET threads = 1")  # one reader thread: rows come back in file order
    out = []
    for path in sorted(folder.rglob("*.jsonl"), key=lambda p: p.relative_to(folder).as_posix()):
        # source: DuckDB JSON extension docs, read_ndjson_objects (one JSON value per line) and json_type
        got = con.execute(f"SELECT json_type(json, '$.{field}') FROM read_ndjson_objects(?)", [str(path)]).fetchall()
        rel = path.relative_to(folder).as_posix()
        out.extend((rel, i, t) for i, (t,) in enumerate(got))
    return out


@dataclass(frozen=True)
class Reach:
    file: str
    row: int
    values: int
    batches: int
    files: int
    last_file: str
    last_row: int
    still_going: bool
    ended: dict[str, object] | None
    recurrences: int


def _reach(types: list[tuple[str, int, str | None]], could: Shows, shows: Shows, *, whole_batch: bool) -> Reach:
    """The episode counted file by file: a file could show it when one of its rows could, and
    shows it when a row does (whole_batch: when every row does, as a field gone from the batch)."""
    files = list(dict.fromkeys(f for f, _, _ in types))
    rows = {f: [(r, t) for g, r, t in types if g == f] for f in files}
    judged = []  # (file, shows) for every file that could show it, in scan order
    for f in files:
        if any(could(t) for _, t in rows[f]):
            hit = [shows(t) for _, t in rows[f]]
            judged.append((f, all(hit) if whole_batch else any(hit)))
    shown = {f for f, s in judged if s}
    showing = [(f, r) for f, r, t in types if shows(t) and f in shown]
    runs = sum(1 for i, (_, s) in enumerate(judged) if s and (i == 0 or not judged[i - 1][1]))
    last = max(i for i, (_, s) in enumerate(judged) if s)
    ended = None if last == len(judged) - 1 else {"file": judged[last + 1][0], "batch": 0, "row": 0}
    last_file = judged[last][0]
    last_rows = [r for f, r in showing if f == last_file]
    return Reach(
        file=showing[0][0],
        row=showing[0][1],
        values=len(showing),
        batches=len(shown),  # one batch a file
        files=len({f for f, _ in showing}),
        last_file=last_file,
        # for a gone field, the last row of its last batch; else the first row showing it there
        last_row=max(last_rows) if whole_batch else min(last_rows),
        still_going=ended is None,
        ended=ended,
        recurrences=runs - 1,
    )


def _present(t: str | None) -> bool:
    return t is not None


def _valued(t: str | None) -> bool:
    return t not in (None, "NULL")


# (case, kind, field, could show, shows, the whole batch must show it)
EPISODES = [
    ("flip-every-seventh", "type-conflict", "temp_c", _valued, lambda t: t == "VARCHAR", False),
    ("stops-and-still-going", "type-widened", "humidity", _valued, lambda t: t == "DOUBLE", False),
    ("stops-and-still-going", "nulls-begin", "status", _present, lambda t: t == "NULL", False),
    ("leaves-and-returns", "field-gone", "battery", lambda t: True, lambda t: t is None, True),
]


@pytest.mark.parametrize(
    ("case", "kind", "field", "could", "shows", "whole"), EPISODES, ids=[f"{e[0]}:{e[1]}" for e in EPISODES]
)
def test_case_episode_totals_match_duckdb(
    case: str, kind: str, field: str, could: Shows, shows: Shows, whole: bool
) -> None:
    folder = CASES / case / "input"
    types = _json_types(folder, field)
    if kind == "field-gone":  # rows without the field after it was first seen
        first = next(i for i, (_, _, t) in enumerate(types) if t is not None)
        types = types[first:]
    want = _reach(types, could, shows, whole_batch=whole)
    (e,) = [e.to_json() for e in driftline.scan(folder).events if (e.kind, e.path) == (kind, field)]
    got = Reach(
        e["file"], e["row"], e["values"], e["batches"], e["files"], e["last_file"], e["last_row"],
        e["still_going"], e["ended"], e["recurrences"],
    )  # fmt: skip
    assert got == want
    assert e["rows"] == want.values  # a top-level field: one value a row


def test_the_flip_recurs_in_every_seventh_partition_by_duckdb() -> None:
    # The case's own claim, counted by DuckDB: strings in days 7, 14 and 21 only.
    types = _json_types(CASES / "flip-every-seventh" / "input", "temp_c")
    days = sorted({int(f[len("day=2026-04-") :][:2]) for f, _, t in types if t == "VARCHAR"})
    assert days == [7, 14, 21]
    assert {t for _, _, t in types} == {"DOUBLE", "VARCHAR"}
