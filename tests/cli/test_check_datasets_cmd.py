"""`driftline check ROOT` on a root of several datasets, through the real console script: a baseline
per dataset (a folder of them, or the policy file's [baselines] table), one verdict per dataset and
the overall one, the verdict set (--json), one JUnit testsuite per dataset, a dataset no baseline
names, a baseline naming no dataset, and the state file's record of each file's dataset (the
issue's Done-when root from tests/fixtures/datasets/make_layouts.py, copied as landing/).

Each baseline is made by `driftline schema <dataset folder>` run on that folder alone, and a
dataset's verdict is held to `driftline check` run on that folder alone.
"""

from __future__ import annotations

import gzip
import json
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import jsonschema
import pytest

from _cli import ENV, EXE, make_layouts
from conftest import ROOT

NAMES = ["depot_exports", "readings", "stations.parquet"]


def run(*args: str | Path, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *map(str, args)], capture_output=True, text=True, timeout=120, env=ENV, cwd=cwd)


@pytest.fixture(scope="module")
def made(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The Done-when root as landing/ and baselines/ made by `driftline schema` on each dataset's folder."""
    out = tmp_path_factory.mktemp("check-landing")
    make_layouts().main(out, ["done_when"])
    (out / "done_when").rename(out / "landing")
    (out / "baselines").mkdir()
    for name in NAMES:
        res = run("schema", f"landing/{name}", "--to", "json-schema", "--out", f"baselines/{name}.schema.json", cwd=out)
        assert res.returncode == 0, res.stderr
    return out


@pytest.fixture
def work(made: Path, tmp_path: Path) -> Path:
    """A copy of landing/ and baselines/ a test may change."""
    for name in ("landing", "baselines"):
        shutil.copytree(made / name, tmp_path / name, copy_function=shutil.copy2)
    return tmp_path


def _retype(work: Path) -> None:
    """readings: one row's temp_c becomes a string (a field changes type)."""
    f = work / "landing" / "readings" / "region=south" / "day=2026-03-02" / "part-0.jsonl.gz"
    rows = [json.loads(line) for line in gzip.decompress(f.read_bytes()).decode().splitlines()]
    rows[1]["temp_c"] = "warm"
    f.write_bytes(gzip.compress("".join(json.dumps(r) + "\n" for r in rows).encode(), mtime=0))


def _verdict(res: subprocess.CompletedProcess[str]) -> dict[str, Any]:
    return json.loads(res.stdout)


def test_three_datasets_against_their_baselines_pass(work: Path) -> None:
    res = run("check", "landing/", "--baseline", "baselines/", cwd=work)
    assert res.returncode == 0, res.stderr
    heads = [line.split(" ─")[0] for line in res.stdout.splitlines() if line.startswith("dataset ")]
    assert heads == [f"dataset {n}" for n in NAMES]
    assert res.stdout.count("\nPASS  0 violations, 0 warnings\n") == 3
    assert res.stdout.rstrip().splitlines()[-1] == "overall PASS  3 datasets: 3 passed, 0 warned, 0 failed"
    doc = _verdict(run("check", "landing/", "--baseline", "baselines/", "--json", "-", "-q", cwd=work))
    assert (doc["format"], doc["version"], doc["passed"], doc["exit_code"]) == ("driftline-verdict-set", 2, True, 0)
    assert {n: d["status"] for n, d in doc["datasets"].items()} == dict.fromkeys(NAMES, "passed")
    assert {n: d["format"] for n, d in doc["datasets"].items()} == dict.fromkeys(NAMES, "driftline-verdict")
    # rows per dataset, from make_layouts.done_when: 2 regions x 2 days x 3 rows, 3 exports of 1 row, 2 stations
    assert {n: d["counts"]["rows"] for n, d in doc["datasets"].items()} == {
        "depot_exports": 3,
        "readings": 12,
        "stations.parquet": 2,
    }
    assert doc["counts"] == {"datasets": 3, "passed": 3, "warned": 0, "failed": 0, "files": 8, "rows": 17}
    assert (doc["violations"], doc["warnings"]) == ([], [])


def test_a_changed_type_fails_that_dataset_as_a_check_of_its_folder_alone(work: Path) -> None:
    _retype(work)
    res = run("check", "landing/", "--baseline", "baselines/", "--json", "-", cwd=work)
    assert res.returncode == 1, res.stderr  # today's FAIL: a policy violation
    doc = _verdict(res)
    assert {n: d["status"] for n, d in doc["datasets"].items()} == {
        "depot_exports": "passed",
        "readings": "failed",
        "stations.parquet": "passed",
    }
    assert (doc["passed"], doc["exit_code"], doc["counts"]["failed"]) == (False, 1, 1)
    alone = run(
        "check", "landing/readings", "--baseline", "baselines/readings.schema.json", "--json", "-", "-q", cwd=work
    )
    assert alone.returncode == 1
    single = _verdict(alone)
    assert single["format"] == "driftline-verdict"
    got = doc["datasets"]["readings"]
    assert got["violations"] == single["violations"]
    assert [(v["rule"], v["field"], v["change"], v["file"], v["row"], v["example"]) for v in got["violations"]] == [
        # source: RFC 8259 section 7: the example is the JSON string warm, not the text "\"warm\"".
        (
            "type_change",
            "temp_c",
            "float64 → string",
            "region=south/day=2026-03-02/part-0.jsonl.gz",
            1,
            {"value": "warm"},
        )
    ]
    assert (got["rules"], got["root"], got["baseline"]) == (single["rules"], single["root"], single["baseline"])
    # the terminal: the dataset's FAIL under its heading, then the overall line
    text = run("check", "landing/", "-b", "baselines/", cwd=work).stdout
    after = text.split("dataset readings ─")[1]
    assert after.split("\n", 1)[1].startswith("FAIL  1 violation, 0 warnings")
    assert text.rstrip().splitlines()[-1] == (
        "overall FAIL  3 datasets: 2 passed, 0 warned, 1 failed (failed: readings)"
    )


def test_the_policy_files_baselines_table_gives_the_same_verdicts(work: Path) -> None:
    _retype(work)
    # source: TOML v1.0.0 (toml.io), tables and quoted keys: a name with a '.' is a quoted key
    (work / "gate.toml").write_text(
        'widening = "allow"\n\n[baselines]\n' + "".join(f'"{n}" = "baselines/{n}.schema.json"\n' for n in NAMES),
        encoding="utf-8",
    )
    by_table = _verdict(run("check", "landing/", "--policy", "gate.toml", "--json", "-", "-q", cwd=work))
    by_folder = _verdict(run("check", "landing/", "--baseline", "baselines/", "--json", "-", "-q", cwd=work))
    assert by_table["exit_code"] == by_folder["exit_code"] == 1
    for name in NAMES:
        a, b = by_table["datasets"][name], by_folder["datasets"][name]
        assert (a["status"], a["violations"], a["warnings"], a["rules"]) == (
            b["status"],
            b["violations"],
            b["warnings"],
            b["rules"],
        )
        assert os.path.samefile(a["baseline"], work / "baselines" / f"{name}.schema.json")
    assert by_table["baselines"] == "gate.toml"


def test_a_dataset_without_a_baseline_warns_or_fails_under_the_policy(work: Path) -> None:
    (work / "baselines" / "stations.parquet.schema.json").unlink()
    res = run("check", "landing/", "--baseline", "baselines/", "--json", "-", cwd=work)
    assert res.returncode == 0, res.stderr
    doc = _verdict(res)
    got = doc["datasets"]["stations.parquet"]
    assert (got["status"], got["passed"], got["baseline"]) == ("warned", True, "")
    assert [(w["rule"], w["severity"], w["change"]) for w in got["warnings"]] == [
        ("no_baseline", "warn", "no baseline")
    ]
    assert doc["counts"]["warned"] == 1 and doc["passed"] is True
    (work / "gate.toml").write_text('[datasets]\nno_baseline = "fail"\n', encoding="utf-8")
    res = run("check", "landing/", "-b", "baselines/", "-p", "gate.toml", cwd=work)
    assert res.returncode == 1
    assert "no baseline names the dataset 'stations.parquet' in baselines/; it is not checked" in res.stdout
    assert res.stdout.rstrip().splitlines()[-1].startswith("overall FAIL  3 datasets: 2 passed, 0 warned, 1 failed")
    (work / "gate.toml").write_text('[datasets]\nno_baseline = "allow"\n', encoding="utf-8")
    res = run("check", "landing/", "-b", "baselines/", "-p", "gate.toml", cwd=work)
    assert res.returncode == 2 and "/datasets/no_baseline" in res.stderr and "Traceback" not in res.stderr


def test_a_baseline_naming_no_dataset_of_the_root_is_reported(work: Path) -> None:
    shutil.copy(work / "baselines" / "readings.schema.json", work / "baselines" / "old_readings.schema.json")
    res = run("check", "landing/", "--baseline", "baselines/", "--json", "-", cwd=work)
    assert res.returncode == 0, res.stderr
    doc = _verdict(res)
    assert [(w["rule"], w["change"], w["file"]) for w in doc["warnings"]] == [
        ("unknown_dataset", "baseline for 'old_readings'", "baselines/old_readings.schema.json")
    ]
    text = run("check", "landing/", "--baseline", "baselines/", cwd=work).stdout
    assert "Warnings of the root (1)" in text
    assert "the baseline old_readings.schema.json names 'old_readings', which is not a dataset of the root" in text


def test_junit_holds_one_testsuite_per_dataset(work: Path) -> None:
    _retype(work)
    res = run("check", "landing/", "--baseline", "baselines/", "--junit", "gate.xml", "-q", cwd=work)
    assert res.returncode == 1
    # source: the JUnit XML layout CI systems read (testsuites > testsuite > testcase > failure | skipped)
    top = ET.parse(work / "gate.xml").getroot()
    assert top.tag == "testsuites"
    suites = top.findall("testsuite")
    assert [s.get("name") for s in suites] == NAMES
    failing = {
        s.get("name"): [c.get("name") for c in s.findall("testcase") if c.find("failure") is not None] for s in suites
    }
    assert failing == {"depot_exports": [], "readings": ["type_change"], "stations.parquet": []}
    assert [s.get("failures") for s in suites] == ["0", "1", "0"]
    assert top.get("failures") == "1"
    assert top.get("tests") == str(sum(int(s.get("tests") or 0) for s in suites))
    failure = next(c for c in suites[1].findall("testcase") if c.get("name") == "type_change").find("failure")
    assert failure is not None and "temp_c: float64 → string" in (failure.get("message") or "")


def test_one_baseline_file_on_a_root_of_several_datasets_says_how_to_go_on(work: Path) -> None:
    res = run("check", "landing/", "--baseline", "baselines/readings.schema.json", cwd=work)
    assert res.returncode == 2 and "Traceback" not in res.stderr
    assert "holds 3 datasets ('depot_exports', 'readings', 'stations.parquet')" in res.stderr
    assert "--dataset NAME" in res.stderr and "--one-table" in res.stderr
    picked = run(
        "check",
        "landing/",
        "--baseline",
        "baselines/readings.schema.json",
        "--dataset",
        "readings",
        "--json",
        "-",
        cwd=work,
    )
    assert picked.returncode == 0, picked.stderr
    assert list(_verdict(picked)["datasets"]) == ["readings"]
    whole = run(
        "check", "landing/", "--baseline", "baselines/readings.schema.json", "--one-table", "--json", "-", cwd=work
    )
    assert whole.returncode == 1  # the old blend: the CSV rows lack every readings field
    assert _verdict(whole)["format"] == "driftline-verdict"
    res = run("check", "landing/", "--baseline", "baselines/", "--dataset", "nope", cwd=work)
    assert res.returncode == 2 and "no dataset named 'nope'" in res.stderr


def test_a_root_that_is_one_table_is_checked_as_before(work: Path) -> None:
    """landing/readings alone reads as one table: the single verdict, with or without --one-table."""
    args = ["check", "landing/readings", "--baseline", "baselines/readings.schema.json", "--json", "-", "-q"]
    a, b = run(*args, cwd=work), run(*args, "--one-table", cwd=work)
    assert a.returncode == b.returncode == 0
    assert a.stdout == b.stdout and _verdict(a)["format"] == "driftline-verdict"


def test_the_state_records_each_files_dataset_and_a_file_that_changed_dataset(work: Path) -> None:
    res = run("check", "landing/", "--baseline", "baselines/", "--state", "gate.state", "-q", cwd=work)
    assert res.returncode == 0, res.stderr
    state = json.loads((work / "gate.state").read_text(encoding="utf-8"))
    # source: the published state schema, checked by the jsonschema package (Draft 2020-12)
    registry = _registry()
    jsonschema.Draft202012Validator(
        json.loads((ROOT / "docs" / "state.schema.json").read_text()), registry=registry
    ).validate(state)
    assert sorted((f["dataset"]["name"], f["dataset"]["path"]) for f in state["files"]) == [
        ("depot_exports", f"depot_exports/depots-2026-03-0{k}.csv") for k in (1, 2, 3)
    ] + [
        ("readings", f"readings/region={r}/day=2026-03-0{k}/part-0.jsonl.gz")
        for r in ("north", "south")
        for k in (1, 2)
    ] + [("stations.parquet", "stations.parquet")]
    again = _verdict(run("check", "landing/", "-b", "baselines/", "--state", "gate.state", "--json", "-", cwd=work))
    assert {n: (d["counts"]["files_read"], d["counts"]["files_reused"]) for n, d in again["datasets"].items()} == {
        "depot_exports": (0, 3),
        "readings": (0, 4),
        "stations.parquet": (0, 1),
    }
    # a readings file moved into the exports folder: a new field set in the wrong folder
    src = work / "landing" / "readings" / "region=north" / "day=2026-03-01" / "part-0.jsonl.gz"
    os.rename(src, work / "landing" / "depot_exports" / "part-0.jsonl.gz")  # a move keeps size and mtime
    res = run("check", "landing/", "-b", "baselines/", "--state", "gate.state", "--json", "-", cwd=work)
    assert res.returncode == 0, res.stderr
    doc = _verdict(res)
    moved = doc["datasets"]["depot_exports/part-0.jsonl.gz"]
    assert [(w["rule"], w["severity"], w["change"], w["file"]) for w in moved["warnings"]] == [
        ("no_baseline", "warn", "no baseline", None),
        ("changed_dataset", "warn", "dataset readings → depot_exports/part-0.jsonl.gz", "part-0.jsonl.gz"),
    ]
    assert (
        "was at readings/region=north/day=2026-03-01/part-0.jsonl.gz in the dataset 'readings'"
        in (moved["warnings"][1]["message"])
    )
    # moved back under changed_dataset = "fail": readings fails, the file named with both datasets
    (work / "gate.toml").write_text('[datasets]\nchanged_dataset = "fail"\n', encoding="utf-8")
    os.rename(work / "landing" / "depot_exports" / "part-0.jsonl.gz", src)
    res = run(
        "check", "landing/", "-b", "baselines/", "-p", "gate.toml", "--state", "gate.state", "--json", "-", cwd=work
    )
    assert res.returncode == 1
    back = _verdict(res)["datasets"]["readings"]
    assert back["status"] == "failed"
    assert [(v["rule"], v["change"], v["file"]) for v in back["violations"]] == [
        (
            "changed_dataset",
            "dataset depot_exports/part-0.jsonl.gz → readings",
            "region=north/day=2026-03-01/part-0.jsonl.gz",
        )
    ]
    res = run("check", "landing/", "-b", "baselines/", "-p", "gate.toml", "--state", "gate.state", cwd=work)
    assert res.returncode == 0  # the state now records it in readings again: nothing changed since


def _registry() -> Any:
    from referencing import Registry, Resource

    docs = [json.loads(p.read_text(encoding="utf-8")) for p in (ROOT / "docs").glob("*.schema.json")]
    return Registry().with_resources((d["$id"], Resource.from_contents(d)) for d in docs)


def _check_block(text: str) -> str:
    return next(b for b in re.findall(r"```[a-z]*\n(.*?)```", text, re.S) if b.startswith("driftline check landing/ "))


def test_the_documented_check_commands_run_as_written(work: Path) -> None:
    section = (ROOT / "README.md").read_text(encoding="utf-8").split("### Several tables in one root\n", 1)[1]
    block = _check_block(section.split("\n### ", 1)[0])
    assert block == _check_block((ROOT / "docs" / "gate.md").read_text(encoding="utf-8"))
    commands = [ln.split("  #")[0].strip() for ln in block.splitlines() if ln.startswith("driftline ")]
    assert len(commands) == 3
    helped = run("check", "--help").stdout
    assert set(commands) <= {ln.strip() for ln in helped.splitlines()}, helped  # --help shows the same commands
    codes = [run(*cmd.split()[1:], cwd=work).returncode for cmd in commands]
    # every dataset passes; readings alone passes; the root as one table fails (the CSV rows lack readings' fields)
    assert codes == [0, 0, 1]


def test_an_output_never_replaces_a_baseline_of_the_folder(work: Path) -> None:
    before = (work / "baselines" / "readings.schema.json").read_bytes()
    res = run("check", "landing/", "-b", "baselines/", "--json", "baselines/readings.schema.json", cwd=work)
    assert res.returncode == 2 and "an input of this run" in res.stderr
    assert (work / "baselines" / "readings.schema.json").read_bytes() == before
