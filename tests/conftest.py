"""Shared fixtures: the demo landing directory (built once per session) and small helpers."""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path
from typing import Any

import pytest

ROOT = Path(__file__).resolve().parents[1]
SHARED_TESTDATA = ROOT.parent / "shared" / "testdata"


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
