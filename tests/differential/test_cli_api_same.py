"""The CLI is a thin layer: `driftline scan --json -` gives what the Python API gives."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

import driftline
from conftest import write_lines
from driftline.report import to_dict

EXE = [sys.executable, "-m", "driftline.cli"]


def cli_report(*args: str) -> dict[str, Any]:
    res = subprocess.run([*EXE, "scan", *args, "--json", "-", "--quiet"], capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    report = json.loads(res.stdout)
    report.pop("duration_s")
    return report


def api_report(profile: driftline.Profile) -> dict[str, Any]:
    # Through JSON too, so tuples/lists and int keys compare as the CLI's output does.
    report = json.loads(json.dumps(to_dict(profile)))
    report.pop("duration_s")
    return report


@pytest.mark.parametrize("jobs", ["1", "3"])
def test_demo_scan_is_the_same_from_cli_and_api(demo_dir: Path, jobs: str):
    landing = demo_dir / "landing"
    cli = cli_report(str(landing), "--jobs", jobs)
    api = api_report(driftline.scan(landing))
    assert cli == api
    # source: the demo manifest (tests/scripts/test_make_demo.py): 4,694 rows, 2 skipped entries
    assert cli["summary"]["rows"] == 4694 and cli["summary"]["skipped"] == 2


def test_options_mean_the_same_in_cli_and_api(tmp_path: Path):
    write_lines(tmp_path / "a.csv", ["id;v", *[f"{i};{i * 0.5}" for i in range(10)], "x;y"])
    write_lines(tmp_path / "b.jsonl", ['{"id": 1}', '{"id": "2"}'])
    write_lines(tmp_path / "_c.jsonl", ['{"id": 3}'])
    cli = cli_report(str(tmp_path), "--delimiter", ";", "--batch-rows", "4", "--exclude", "b.*", "--hidden")
    api = api_report(driftline.scan(tmp_path, delimiter=";", batch_rows=4, exclude=["b.*"], include_hidden=True))
    assert cli == api
    assert [f["path"] for f in cli["files"]] == ["_c.jsonl", "a.csv"]
    assert [len(f["batches"]) for f in cli["files"]] == [1, 3]  # 11 CSV rows in batches of 4
    assert cli["options"]["batch_rows"] == 4


def test_cli_error_line_is_the_api_exception(tmp_path: Path):
    missing = tmp_path / "nope"
    res = subprocess.run([*EXE, "scan", str(missing)], capture_output=True, text=True, timeout=120)
    with pytest.raises(driftline.InputPathError) as info:
        driftline.scan(missing)
    assert res.returncode == 2
    assert res.stderr.strip() == f"InputPathError: {info.value}"
