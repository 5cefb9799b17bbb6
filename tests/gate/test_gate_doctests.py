"""The docstring examples of the gate modules run as tests."""

from __future__ import annotations

import doctest
import importlib

import pytest

MODULES = [
    "driftline.gate.baseline",
    "driftline.gate.compare",
    "driftline.gate.diff",
    "driftline.gate.inputs",
    "driftline.gate.policy",
    "driftline.gate.run",
    "driftline.gate.state",
    "driftline.gate.verdict",
]


@pytest.mark.parametrize("name", MODULES)
def test_examples_run(name):
    result = doctest.testmod(importlib.import_module(name), optionflags=doctest.ELLIPSIS)
    assert result.failed == 0
    if name != "driftline.gate.verdict" or result.attempted:
        assert result.attempted > 0
