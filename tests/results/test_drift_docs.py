"""docs/drift.md's table of every kind: exactly the kinds of EVENT_KINDS, each with the levels
results/levels.py gives it.

Both sides are read, never written here: a kind added to EVENT_KINDS (or a level changed in
levels.py) without its row in the table fails this test.
"""

from __future__ import annotations

import re
from pathlib import Path

from conftest import ROOT
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.results.drift import EVENT_KINDS
from driftline.results.levels import LEVELS, level_of

DOC = ROOT / "docs" / "drift.md"
HEADING = "## Every kind at a glance"

# The before/after texts an event can carry: type keys (lattice spelling, unions and lists
# as the walk writes them), content classes and a list of classes (textclass-changed), none.
_TYPES = ["int64", "float64", "string", "bool", "date32", "timestamp[us, UTC]", "timestamp[us]"]
_TEXTS: list[str | None] = [
    None,
    *_TYPES,
    "union<int64 | string>",
    "union<float64 | string>",
    "list<int64>",
    *TEXT_CLASS_TYPE,
    "integer, decimal",
]


def _table(doc: Path) -> list[list[str]]:
    """The rows (cells, stripped) of the first table after the heading."""
    text = doc.read_text(encoding="utf-8")
    assert HEADING in text, f"{doc} has no section {HEADING!r}"
    rows: list[list[str]] = []
    for line in text.split(HEADING, 1)[1].splitlines():
        if line.startswith("|"):
            rows.append([c.strip() for c in line.strip().strip("|").split("|")])
        elif rows:
            break  # the table ended
    header, rule, *body = rows
    assert header[:2] == ["kind", "level"] and set("".join(rule)) <= {"-"}
    return body


def _levels_in(cell: str) -> set[str]:
    words = re.split(r",\s*|\s+or\s+", cell)
    assert all(w in LEVELS for w in words), cell
    return set(words)


def _levels_given(kind: str) -> set[str]:
    """Every level level_of gives the kind over the texts an event may carry."""
    return {level_of(kind, before, after) for before in _TEXTS for after in _TEXTS}


def test_the_kinds_table_lists_exactly_event_kinds_with_their_levels():
    body = _table(DOC)
    kinds = [row[0].strip("`") for row in body]
    assert len(kinds) == len(set(kinds)), "a kind listed twice"
    assert set(kinds) == set(EVENT_KINDS)
    documented = {row[0].strip("`"): _levels_in(row[1]) for row in body}
    assert {k: _levels_given(k) for k in EVENT_KINDS} == documented


def test_the_texts_reach_every_level_of_the_two_kinds_that_vary():
    # The grid above is wide enough to tell: both kinds whose level follows their types give
    # more than one level over it (docs/drift.md, "Levels": element-changed widening or
    # breaking, textclass-changed info, widening or breaking).
    assert level_of("element-changed", "int64", "float64") == "widening"  # source: pyarrow unify_schemas permissive
    assert level_of("element-changed", "int64", "union<int64 | string>") == "breaking"
    assert level_of("textclass-changed", "text", "integer") == "info"  # free text takes anything
    assert level_of("textclass-changed", "integer", "decimal") == "widening"
    assert level_of("textclass-changed", "integer", "text") == "breaking"  # digits turning into labels
    assert _levels_given("element-changed") == {"widening", "breaking"}
    assert _levels_given("textclass-changed") == set(LEVELS)
