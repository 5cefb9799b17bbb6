"""The import structure: no cycle, and nothing imports a floor above its own.

The floors, top to bottom, are the ones DEVELOPERS.md draws; data flows down them one way.
The graph is built by grimp from every import in src/, including imports inside functions
and under TYPE_CHECKING, so a deferred import cannot hide an upward arrow; the one
annotation-only exception is listed, and checked to run nothing.
"""

from __future__ import annotations

import grimp
import pytest

from conftest import ROOT

# Top to bottom. A floor may import any floor below it, never one above.
FLOORS: tuple[tuple[str, ...], ...] = (
    ("cli",),
    ("_api",),
    ("applying",),
    ("gate",),
    ("emit",),
    ("recommendation",),
    ("scanning",),
    ("results",),
    ("sources",),
    ("observe",),
    ("core", "errors"),
)

# Inside a floor, the same rule between its rooms (top to bottom).
ROOMS: dict[str, tuple[tuple[str, ...], ...]] = {
    "driftline.observe": (("fast",), ("thinning",), ("records", "textclass", "jsonparse", "linetext")),
}


# The one arrow allowed to point up, and only for type checkers (under TYPE_CHECKING: it
# runs nothing): every error class has one home, errors.py, and SchemaConflictError carries
# the Recommendation strict mode refused, so its annotations name that class.
ANNOTATION_ONLY = {("driftline.errors", "driftline.recommendation.plan")}


@pytest.fixture
def graph() -> grimp.ImportGraph:
    g = grimp.build_graph("driftline", cache_dir=None)
    for importer, imported in ANNOTATION_ONLY:
        assert g.direct_import_exists(importer=importer, imported=imported)  # still needed?
        g.remove_import(importer=importer, imported=imported)
    return g


def test_the_allowed_arrow_runs_nothing() -> None:
    runtime = grimp.build_graph("driftline", cache_dir=None, exclude_type_checking_imports=True)
    assert [pair for pair in ANNOTATION_ONLY if runtime.direct_import_exists(importer=pair[0], imported=pair[1])] == []


def _describe(found: set[grimp.PackageDependency]) -> list[str]:
    return sorted(
        f"{d.importer} -> {d.imported}: "
        + "; ".join(
            " -> ".join(("|".join(sorted(r.heads)), *r.middle, "|".join(sorted(r.tails))))
            for r in sorted(d.routes, key=str)
        )
        for d in found
    )


def test_every_module_sits_on_a_floor(graph: grimp.ImportGraph) -> None:
    # A new top-level module must be given a floor here (and in DEVELOPERS.md) on purpose.
    tops = {m.split(".")[1] for m in graph.modules if m.count(".") >= 1}
    placed = {name for floor in FLOORS for name in floor}
    assert sorted(tops - placed - {"__main__"}) == []


def test_nothing_imports_a_floor_above_its_own(graph: grimp.ImportGraph) -> None:
    layers = [grimp.Layer(*floor, independent=False) for floor in FLOORS]
    assert _describe(graph.find_illegal_dependencies_for_layers(layers, containers={"driftline"})) == []


@pytest.mark.parametrize("container", sorted(ROOMS))
def test_rooms_inside_a_floor_keep_their_order(graph: grimp.ImportGraph, container: str) -> None:
    layers = [grimp.Layer(*room, independent=False) for room in ROOMS[container]]
    assert _describe(graph.find_illegal_dependencies_for_layers(layers, containers={container})) == []


def _cycles(graph: grimp.ImportGraph) -> list[list[str]]:
    """Strongly connected groups of more than one module (Tarjan), each sorted."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.find_modules_directly_imported_by(v)):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                found.append(sorted(group))

    for module in sorted(graph.modules):
        if module not in index:
            visit(module)
    return sorted(found)


def test_no_import_cycle(graph: grimp.ImportGraph) -> None:
    assert _cycles(graph) == []


def test_the_cycle_finder_finds_a_cycle() -> None:
    # The finder itself, on a graph with one known cycle of three and one self-contained pair.
    g = grimp.ImportGraph()
    for a, b in (("p.a", "p.b"), ("p.b", "p.c"), ("p.c", "p.a"), ("p.d", "p.a"), ("p.e", "p.f"), ("p.f", "p.e")):
        g.add_import(importer=a, imported=b)
    assert _cycles(g) == [["p.a", "p.b", "p.c"], ["p.e", "p.f"]]


def test_developers_md_draws_these_floors() -> None:
    # The picture in DEVELOPERS.md is the contract a contributor reads: it names the same floors,
    # in the same order, as FLOORS above (a floor's first column: `cli/`, `_api.py`, `core/ + errors.py`).
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    block = text.split("## Architecture", 1)[1].split("```", 2)[1]
    drawn = [
        tuple(part.strip().removesuffix("/").removesuffix(".py") for part in line.split("  ", 1)[0].split("+"))
        for line in block.splitlines()
        if line and not line.startswith(" ")
    ]
    assert drawn == list(FLOORS)
