"""Shared fixtures: the demo landing directory (built once per session) and small helpers.

The tests live in folders that mirror the package (tests/<area>/test_<module>.py). This file's
folder, tests/, is on sys.path, so the support modules beside it (_synthetic, _orders, ...)
import by name from every folder; without __init__.py files every test module's name must
be unique across the folders.
"""

from __future__ import annotations

import importlib
import importlib.util
import json
import os
import sys
from pathlib import Path
from types import ModuleType
from typing import Any

import pytest

TESTS = Path(__file__).resolve().parent
ROOT = TESTS.parent
SHARED_TESTDATA = ROOT.parent / "shared" / "testdata"
# Golden inputs: the tests' own under tests/fixtures/, the real-file corpus (which scripts read
# too) under the repository's fixtures/.
FIXTURE_DIRS = (TESTS / "fixtures", ROOT / "fixtures")

# A scan asked for several jobs starts its pool even on the suite's small folders, so that the
# pool's paths stay exercised (faults, order, results equal to the serial run's); the decision
# itself, with this unset, is tested in tests/scanning/test_pool_choice.py. Subprocesses inherit it.
os.environ["DRIFTLINE_TEST_ALWAYS_POOL"] = "1"  # driftline.scanning.workers.TEST_POOL_ENV


def fixture_path(name: str) -> Path:
    """The golden input `name` (a path relative to a fixtures folder), tests/fixtures/ first;
    a name in neither is the path it would have in tests/fixtures/ (where a re-pin writes)."""
    for folder in FIXTURE_DIRS:
        if (folder / name).exists():
            return folder / name
    return FIXTURE_DIRS[0] / name


def import_test_module(name: str) -> ModuleType:
    """The test module `name` (e.g. "test_sql") from whichever folder holds it, imported as
    pytest's prepend mode imports it (its folder first on sys.path), so that a helper one test
    module keeps can serve another."""
    (path,) = TESTS.rglob(f"{name}.py")
    if str(path.parent) not in sys.path:
        sys.path.insert(0, str(path.parent))
    return importlib.import_module(name)


def _load_make_demo() -> Any:
    spec = importlib.util.spec_from_file_location("make_demo", ROOT / "scripts" / "make_demo.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="session")
def demo_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A freshly generated demo: <dir>/landing/ and <dir>/manifest.json."""
    target = tmp_path_factory.mktemp("demo")
    _load_make_demo().build(target)
    return target


@pytest.fixture(scope="session")
def demo_manifest(demo_dir: Path) -> dict[str, Any]:
    return json.loads((demo_dir / "manifest.json").read_text())


@pytest.fixture(scope="session")
def demo_profile(demo_dir: Path) -> Any:
    import driftline

    return driftline.scan(demo_dir / "landing")


def write_lines(path: Path, lines: list[str]) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("".join(line + "\n" for line in lines), encoding="utf-8")
    return path
