"""The CLI is a thin layer: `driftline scan --json -` gives what the Python API gives."""

from __future__ import annotations

import csv
import json
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

import driftline
from conftest import write_lines
from driftline.emit.schemas import rules_json
from driftline.results.report import to_dict

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
    assert res.stderr.strip() == f"error: {info.value}"


# -- every verb is one library call: the CLI and the library on the same data ----------------


def cli_json(*args: str, cwd: Path | None = None, code: int = 0) -> Any:
    res = subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, cwd=cwd)
    assert res.returncode == code, res.stderr
    return json.loads(res.stdout)


def semicolon_landing(root: Path) -> Path:
    """A partitioned folder of semicolon-delimited CSV files: day=1 and day=2 hold integers,
    day=3 a text value in `n` (left out by --where 'day<=2')."""
    for day, rows in ((1, ["1;a;0.5", "2;b;1.5"]), (2, ["3;c;2.5"]), (3, ["x;d;3.5"])):
        write_lines(root / f"day={day}" / "part.csv", ["n;name;score", *rows])
    return root


def test_schema_is_the_same_from_cli_and_api_with_where_and_delimiter(tmp_path: Path):
    land = semicolon_landing(tmp_path / "land")
    cli = cli_json("schema", str(land), "--where", "day<=2", "--delimiter", ";", "--rules", "-", "-q")
    rec = driftline.recommend(land, where=["day<=2"], delimiter=";")
    api = json.loads(rules_json.dumps(rec))
    assert cli == api
    # source: Python's csv module reads the same files with delimiter=';' (the header names),
    # and every value of n in day=1 and day=2 is a decimal integer, of score a decimal fraction.
    with (land / "day=1" / "part.csv").open(newline="") as fh:
        header = next(csv.reader(fh, delimiter=";"))
    assert sorted(f["path"] for f in cli["fields"]) == sorted(header) == ["n", "name", "score"]
    assert {f["path"]: f["target"] for f in cli["fields"]} == {"n": "int64", "name": "string", "score": "float64"}
    # Without --where the day=3 file ("x") is read too: n is no longer all integers.
    wide = cli_json("schema", str(land), "--delimiter", ";", "--rules", "-", "-q")
    assert {f["path"]: f["target"] for f in wide["fields"]}["n"] != "int64"


def test_check_is_the_same_from_cli_and_api(tmp_path: Path):
    land = semicolon_landing(tmp_path / "land")
    contract = tmp_path / "contract.schema.json"
    contract.write_text(json.dumps({"type": "object", "properties": {"n": {"type": "integer"}}}))
    args = ("check", str(land), "--baseline", str(contract), "--delimiter", ";", "--json", "-", "-q")
    for extra, code in (((), 1), (("--where", "day<=2"), 0)):
        cli = cli_json(*args, *extra, code=code)
        where = [extra[1]] if extra else []
        api = driftline.check(land, baseline=contract, delimiter=";", where=where).to_json()
        assert cli == json.loads(json.dumps(api))
        assert cli["exit_code"] == code
    # source: the data above: only day=3 holds a non-integer n ("x", row 0 of its file)
    assert [(v["field"], v["file"], v["row"]) for v in cli_json(*args, code=1)["violations"]] == [
        ("n", "day=3/part.csv", 0)
    ]


def test_diff_is_the_same_from_cli_and_api(tmp_path: Path):
    land = semicolon_landing(tmp_path / "land")
    a, b = str(land / "day=1"), str(land / "day=3")
    cli = cli_json("diff", a, b, "--delimiter", ";", "--json", "-", "-q")
    api = driftline.diff(a, b, delimiter=";")
    assert cli["diffs"] == [json.loads(json.dumps(api.to_json()))]
    assert (cli["diffs"][0]["before"], cli["diffs"][0]["after"]) == (a, b)
    by = cli_json("diff", str(land), "--by", "day", "--delimiter", ";", "--where", "day>=2", "--json", "-", "-q")
    steps = driftline.diff(land, by="day", delimiter=";", where="day>=2")
    assert by["diffs"] == [json.loads(json.dumps(d.to_json())) for d in steps]
    assert [(d["before"], d["after"]) for d in by["diffs"]] == [("day=2", "day=3")]


def _options_in_help(verb: str) -> set[str]:
    res = subprocess.run([*EXE, verb, "--help"], capture_output=True, text=True, timeout=120, env=HELP_ENV)
    assert res.returncode == 0, res.stderr
    return set(re.findall(r"(?<![\w-])(--[a-z][a-z-]*)", res.stdout))


HELP_ENV = {**os.environ, "COLUMNS": "200", "NO_COLOR": "1", "TERM": "dumb"}


def test_every_verb_that_reads_data_lists_the_same_read_options_in_help():
    from driftline.cli.read_flags import READ_FLAGS

    shared = {f.option.param_decls[0] for f in READ_FLAGS}
    # The read options a user of any verb expects, named here rather than derived.
    assert {"--where", "--delimiter", "--include", "--exclude", "--batch-rows", "--jobs", "--encoding"} <= shared
    assert {"--csv-dialect", "--max-record-bytes", "--hidden", "--config", "--endpoint-url"} <= shared
    listed = {verb: _options_in_help(verb) & shared for verb in ("scan", "schema", "check", "diff")}
    assert all(found == shared for found in listed.values()), {v: shared - f for v, f in listed.items()}


def test_jobs_default_is_the_same_in_cli_and_library():
    import inspect

    from driftline.core.options import DEFAULT_JOBS, ScanOptions

    assert ScanOptions().jobs == DEFAULT_JOBS == 1
    res = subprocess.run([*EXE, "scan", "--help"], capture_output=True, text=True, timeout=120, env=HELP_ENV)
    assert re.search(r"--jobs N\s+Files read in parallel[^\[]*\[default: 1;", res.stdout), res.stdout
    assert "options" in inspect.signature(driftline.check).parameters
