"""Golden drift cases: tests/fixtures/drift/<case>/ holds a small input folder, the script of
ours that wrote it, and the episodes a scan must report.

A case folder holds:
- ``make.py``: writes ``input/`` from nothing but the standard library (run it with the
  folder as its argument; ``scripts/make_drift_cases`` runs every case's). It says in its
  docstring what it injects, so the expected episodes can be checked by reading it.
- ``input/``: what make.py wrote, committed (a test checks that make.py writes it again
  byte for byte).
- ``events.json``: ``{"about": str, "scan": {scan keywords}, "levels": {level: n},
  "events": [{key: value}]}``. "events" lists every episode of the scan in report order;
  each entry gives the keys that matter for the case (kind and path always), compared
  with the report's event (Event.to_json) key by key. "levels" counts the episodes of each
  level (all of them, those listed or not: a case lists every one).
"""

from __future__ import annotations

import filecmp
import json
import runpy
import sys
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

CASES = Path(__file__).resolve().parent / "fixtures" / "drift"


@dataclass(frozen=True)
class DriftCase:
    name: str
    folder: Path
    about: str
    scan: Mapping[str, Any]
    levels: Mapping[str, int]
    events: tuple[Mapping[str, Any], ...]

    @property
    def input(self) -> Path:
        return self.folder / "input"


def drift_cases() -> list[DriftCase]:
    """Every golden case, by folder name."""
    return [load_case(d) for d in sorted(CASES.iterdir()) if (d / "events.json").is_file()]


def load_case(folder: Path) -> DriftCase:
    spec = json.loads((folder / "events.json").read_text(encoding="utf-8"))
    return DriftCase(
        name=folder.name,
        folder=folder,
        about=spec["about"],
        scan=spec.get("scan", {}),
        levels=spec["levels"],
        events=tuple(spec["events"]),
    )


def write_input(case: DriftCase, into: Path) -> Path:
    """Run the case's make.py into a fresh folder; returns the input folder it wrote."""
    out = into / "input"
    argv = sys.argv
    try:
        sys.argv = [str(case.folder / "make.py"), str(out)]
        runpy.run_path(str(case.folder / "make.py"), run_name="__main__")
    finally:
        sys.argv = argv
    return out


def same_tree(a: Path, b: Path) -> list[str]:
    """The relative paths that differ between two folders (missing on one side, or other bytes)."""
    names_a = {p.relative_to(a).as_posix() for p in a.rglob("*") if p.is_file()}
    names_b = {p.relative_to(b).as_posix() for p in b.rglob("*") if p.is_file()}
    differ = sorted(names_a ^ names_b)
    for name in sorted(names_a & names_b):
        if not filecmp.cmp(a / name, b / name, shallow=False):
            differ.append(name)
    return differ


def mismatches(case: DriftCase, events: list[Mapping[str, Any]]) -> list[str]:
    """What differs between a scan's events (report form, in report order) and the case's."""
    out: list[str] = []
    if len(events) != len(case.events):
        got = [f"{e['kind']} {e['path']}" for e in events]
        out.append(f"{len(events)} events, expected {len(case.events)}: {got}")
    for i, (want, got) in enumerate(zip(case.events, events, strict=False)):
        for key, value in want.items():
            if got.get(key) != value:
                out.append(f"event {i} ({want['kind']} {want['path']}): {key} is {got.get(key)!r}, expected {value!r}")
    return out
