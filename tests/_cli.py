"""What the command-line tests share: the command as a subprocess with a fixed terminal, and
the dataset layouts of tests/fixtures/datasets/make_layouts.py loaded as a module."""

from __future__ import annotations

import importlib.util
import os
import sys
from typing import Any

from conftest import fixture_path

EXE = [sys.executable, "-m", "driftline.cli"]
# A fixed width and no colour, so that the terminal output is the same on every machine.
ENV = {**os.environ, "COLUMNS": "100", "NO_COLOR": "1", "TERM": "dumb"}


def make_layouts() -> Any:
    """tests/fixtures/datasets/make_layouts.py as a module (a fixture script, not a package)."""
    spec = importlib.util.spec_from_file_location("make_layouts", fixture_path("datasets/make_layouts.py"))
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module
