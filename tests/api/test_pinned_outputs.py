"""Pinned outputs: the JSON report, the schema files and the terminal text stay byte-identical.

A restructuring of the code must not change what a user sees. This test runs the command
line on the demo, on the public conformance suites (../shared/testdata, see its README) and
on the benchmark's seeded data at a small scale, and compares a SHA-256 digest of every
output with tests/fixtures/pinned/outputs.json. Only what differs from run to run is
normalised: the scan's duration, file modification times and the temporary folder.

A change that is meant to alter an output re-pins on purpose, in its own commit:

    DRIFTLINE_REPIN=1 .venv/bin/python -m pytest tests/api/test_pinned_outputs.py

and a failing run leaves the outputs it made under the pytest temporary folder it names.
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

from conftest import ROOT, SHARED_TESTDATA, fixture_path

PINS = fixture_path("pinned/outputs.json")
EXE = [sys.executable, "-m", "driftline.cli"]
TEMP: list[Path] = [Path("/nonexistent")]  # pytest's base temporary folder, set by the test
SCHEMA_FORMATS = ("json-schema", "arrow", "arrow-text", "sql", "avro", "iceberg", "spark")
ENV = {**os.environ, "COLUMNS": "100", "NO_COLOR": "1", "TERM": "dumb"}

# source: the public conformance suites of ../shared/testdata (README there: MIT, BSD-2-Clause,
# Apache-2.0), read in place and never copied into the repository.
SUITES = {
    "csv-edge-cases": "csv-edge-cases/csvs",
    "json-parsing": "json-parsing/test_parsing",
    "parquet-data": "parquet-conformance/data",
    "parquet-bad-data": "parquet-conformance/bad_data",
}


def _normalise(data: bytes, root: Path) -> bytes:
    data = data.replace(str(root).encode(), b"<ROOT>").replace(str(TEMP[0]).encode(), b"<TEMP>")
    data = re.sub(rb'"duration_s": [0-9.e-]+', b'"duration_s": 0', data)
    data = re.sub(rb'"mtime_ns": [0-9]+', b'"mtime_ns": 0', data)
    return re.sub(rb"\b\d+\.\d\d s\b", b"<SECONDS> s", data)


def _run(args: list[str], root: Path) -> bytes:
    res = subprocess.run([*EXE, *args], capture_output=True, timeout=600, env=ENV, cwd=root.parent)
    assert res.returncode in (0, 1), f"driftline {' '.join(args)} exited {res.returncode}: {res.stderr[-2000:]!r}"
    return _normalise(res.stdout, root)


def outputs_of(root: Path, work: Path) -> dict[str, bytes]:
    """Every pinned output for one data folder: scan text and report, schema text and files."""
    report = work / "report.json"
    out = {"scan.txt": _run(["scan", str(root), "--json", str(report)], root)}
    out["report.json"] = _normalise(report.read_bytes(), root)
    out["schema.txt"] = _run(["schema", str(report)], root)
    for fmt in SCHEMA_FORMATS:
        out[f"schema.{fmt}"] = _run(["schema", str(report), "--to", fmt, "--table", "pinned", "--out", "-"], root)
    out["rules.json"] = _run(["schema", str(report), "--rules", "-"], root)
    return out


def _bench_data(target: Path) -> tuple[Path, dict[str, str]]:
    spec = importlib.util.spec_from_file_location("bench", ROOT / "scripts" / "bench")
    if spec is None or spec.loader is None:  # a file without the .py suffix needs an explicit loader
        from importlib.machinery import SourceFileLoader

        loader = SourceFileLoader("bench", str(ROOT / "scripts" / "bench"))
        spec = importlib.util.spec_from_loader("bench", loader)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return Path(module.ensure_data(target, 0.01, lambda _msg: None)), dict(module.FILES)


def _datasets(demo_dir: Path, tmp: Path) -> dict[str, Path]:
    sets = {"demo": demo_dir / "landing"}
    bench, files = _bench_data(tmp / "bench")
    for name, rel in files.items():
        sets[f"bench-{name}"] = bench / rel
    for name, rel in SUITES.items():
        if (SHARED_TESTDATA / rel).is_dir():
            sets[name] = SHARED_TESTDATA / rel
    return sets


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def test_outputs_are_byte_identical_to_the_pins(
    demo_dir: Path, tmp_path: Path, tmp_path_factory: pytest.TempPathFactory
) -> None:
    TEMP[0] = tmp_path_factory.getbasetemp()
    actual: dict[str, dict[str, str]] = {}
    for name, root in _datasets(demo_dir, tmp_path).items():
        work = tmp_path / "out" / name
        work.mkdir(parents=True)
        outputs = outputs_of(root, work)
        for key, text in outputs.items():
            (work / key).write_bytes(text)
        actual[name] = {key: _digest(text) for key, text in outputs.items()}
    if os.environ.get("DRIFTLINE_REPIN"):
        PINS.parent.mkdir(parents=True, exist_ok=True)
        PINS.write_text(json.dumps(actual, indent=1, sort_keys=True) + "\n", encoding="utf-8")
    pinned: dict[str, Any] = json.loads(PINS.read_text(encoding="utf-8"))
    changed = [
        f"{name}/{key}"
        for name, digests in actual.items()
        for key, digest in digests.items()
        if pinned.get(name, {}).get(key) != digest
    ]
    assert not changed, f"outputs changed (left in {tmp_path / 'out'}): {changed}"
    # Every pinned data set ran: a missing suite would silently pin less.
    assert sorted(actual) == sorted(pinned)
