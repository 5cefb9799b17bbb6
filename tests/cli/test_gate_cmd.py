"""`driftline check` and `driftline diff` through the real console script: the flow a pipeline runs."""

from __future__ import annotations

import json
import subprocess
import sys
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
from jsonschema import Draft202012Validator
from typer.testing import CliRunner

from conftest import write_lines
from driftline.cli import app
from driftline.gate.diff import DIFF_KINDS
from driftline.gate.policy import keys

EXE = [sys.executable, "-m", "driftline.cli"]
DAYS = ("2026-11-28", "2026-11-29", "2026-11-30")


def run(*args: str | Path) -> subprocess.CompletedProcess[str]:
    """The real console script in a process of its own (the pipeline flow)."""
    return subprocess.run([*EXE, *map(str, args)], capture_output=True, text=True, timeout=120)


@dataclass
class Result:
    returncode: int
    stdout: str
    stderr: str


def invoke(*args: str | Path) -> Result:
    """The same command line in this process (typer's runner): the checks that need no new process."""
    res = CliRunner().invoke(app, [*map(str, args), "--jobs", "1"])
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise res.exception
    return Result(res.exit_code, res.stdout, res.stderr)


def _day(land: Path, n: int) -> Path:
    """Invented readings of one sensor: day 2 sends fractional temperatures, day 3 one bad seq."""
    day = DAYS[n - 1]
    lines = []
    for i in range(30):
        temp: Any = 18 + (i * 7) % 9
        if n == 2 and i % 4 == 1:
            temp = temp + 0.25  # a benign widening: int64 → float64
        seq: Any = 1000 * n + i
        if n == 3 and i == 17:
            seq = "17b"  # an int → string change in one file
        rec = {
            "device": f"dev-{i % 3:02d}",
            "seq": seq,
            "temp": temp,
            "at": f"{day}T{i % 24:02d}:00:00Z",
            "battery": {"level": 100 - i},
        }
        lines.append(json.dumps(rec))
    return write_lines(land / f"day={day}" / "part-0.jsonl", lines)


@pytest.fixture()
def pipeline(tmp_path: Path) -> dict[str, Path]:
    land = tmp_path / "landing"
    _day(land, 1)
    gate = tmp_path / "gate.toml"
    gate.write_text('# this team wants to hear about widenings\nwidening = "warn"\n', encoding="utf-8")
    return {
        "land": land,
        "contract": tmp_path / "contract.schema.json",
        "gate": gate,
        "state": tmp_path / ".driftline-state",
        "dir": tmp_path,
    }


def _write_contract(p: dict[str, Path]) -> None:
    """Step 1: `driftline schema` writes the baseline from day 1 (then reviewed and committed)."""
    res = run("schema", p["land"], "--to", "json-schema", "--out", p["contract"], "--jobs", "1")
    assert res.returncode == 0, res.stderr
    schema = json.loads(p["contract"].read_text())
    Draft202012Validator.check_schema(schema)  # source: jsonschema 4.26.0, the 2020-12 meta-schema
    assert schema["properties"]["seq"]["x-driftline"] == {"arrow": "int64", "rule": "identity", "null_share": 0.0}


def test_the_pipeline_flow(pipeline: dict[str, Path]):
    land, contract, gate, state, d = (pipeline[k] for k in ("land", "contract", "gate", "state", "dir"))
    _write_contract(pipeline)
    check = ("check", land, "--baseline", contract, "--policy", gate, "--jobs", "1")

    # 1. The baseline was written from day 1: day 1 passes against it, and the state is built.
    res = run(*check, "--state", state)
    assert res.returncode == 0, res.stderr
    assert res.stdout.startswith("PASS  0 violations, 0 warnings\n")

    # 2. Day 2 arrives with a benign widening: exit 0, with a warning naming the field.
    _day(land, 2)
    res = run(*check, "--state", state, "--json", d / "day2.json")
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert out.startswith("PASS  0 violations, 1 warning\n")
    assert "  WARN  widening          temp: int64 → float64\n" in out
    assert "        at day=2026-11-29/part-0.jsonl, partition day=2026-11-29, row 1 (line 2)\n" in out
    assert "        value 25.25\n" in out
    day2 = json.loads((d / "day2.json").read_text())
    assert (day2["counts"]["files_read"], day2["counts"]["files_reused"]) == (1, 1)

    # 3. Day 3 arrives with an int → string change in one file: exit 1, and the message names
    #    the field, the file, the row and the offending value (a full run, no state).
    _day(land, 3)
    res = run(*check, "--junit", d / "gate.xml", "--json", d / "full.json")
    assert res.returncode == 1, res.stderr
    out = res.stdout
    assert out.startswith("FAIL  1 violation, 1 warning\n")
    assert "  FAIL  type_change       seq: int64 → string\n" in out
    assert "        at day=2026-11-30/part-0.jsonl, partition day=2026-11-30, row 17 (line 18)\n" in out
    assert '        value "17b"\n' in out
    assert out.index("FAIL  type_change") < out.index("WARN  widening")  # violations before warnings

    # 4. The JUnit file parses with xml.etree and has the failing case.
    suite = ET.parse(d / "gate.xml").getroot().find("testsuite")
    assert suite is not None and suite.get("failures") == "1"
    failing = [c for c in suite.findall("testcase") if c.find("failure") is not None]
    assert [c.get("name") for c in failing] == ["type_change"]
    message = failing[0].find("failure").get("message")
    assert "seq: int64 → string" in message and "day=2026-11-30/part-0.jsonl" in message and "row 17" in message
    assert '"17b"' in message

    # 5. A bad policy key: exit 2 with the key named.
    bad = d / "bad.toml"
    bad.write_text('widening = "warn"\nnew_fields = "fail"\n', encoding="utf-8")
    res = run("check", land, "--baseline", contract, "--policy", bad, "--jobs", "1")
    assert res.returncode == 2
    assert "error: policy file" in res.stderr and "unknown policy key 'new_fields'" in res.stderr
    assert "did you mean 'new_field'" in res.stderr and "Traceback" not in res.stderr

    # 6. An incremental run after day 3 reads only the new file, counted from the report,
    #    and judges exactly as the full run did.
    res = run(*check, "--state", state, "--json", d / "incremental.json")
    assert res.returncode == 1, res.stderr
    inc, full = json.loads((d / "incremental.json").read_text()), json.loads((d / "full.json").read_text())
    assert (inc["counts"]["files_read"], inc["counts"]["files_reused"], inc["counts"]["files"]) == (1, 2, 3)
    assert (full["counts"]["files_read"], full["counts"]["files_reused"]) == (3, 0)
    for key in ("violations", "warnings", "allowed", "rules", "passed"):
        assert inc[key] == full[key], key


def _contract_here(p: dict[str, Path]) -> None:
    assert invoke("schema", p["land"], "--to", "json-schema", "--out", p["contract"]).returncode == 0


def test_a_damaged_state_is_set_aside_with_a_note_and_everything_is_read(pipeline: dict[str, Path]):
    _contract_here(pipeline)
    cut = '{"format": "driftline-state", "version": 1, "files": ['
    pipeline["state"].write_text(cut, encoding="utf-8")
    base = ("check", pipeline["land"], "--baseline", pipeline["contract"], "--state", pipeline["state"])
    res = invoke(*base, "--json", "-", "--quiet")
    assert res.returncode == 0, res.stderr

    def bare(text: str) -> str:  # the terminal wraps long lines anywhere
        return "".join(text.split())

    note = bare(res.stderr)
    assert bare(f"warning: state file '{pipeline['state']}' is damaged at /files/0: expected JSON, found") in note
    assert bare(f"set aside as '{pipeline['state']}.damaged' and every file is read again") in note
    assert "Traceback" not in res.stderr
    assert json.loads(res.stdout)["counts"]["files_read"] == 1
    assert Path(f"{pipeline['state']}.damaged").read_text(encoding="utf-8") == cut
    res = invoke(*base, "--json", "-", "--quiet")
    assert res.returncode == 0 and res.stderr == "", res.stderr
    assert json.loads(res.stdout)["counts"]["files_reused"] == 1


def test_usage_errors_exit_2(pipeline: dict[str, Path]):
    _contract_here(pipeline)
    land, contract = pipeline["land"], pipeline["contract"]
    cases = [
        (("check", land, "--baseline", pipeline["dir"] / "missing.json"), "cannot read baseline"),
        (("check", land, "--baseline", contract, "--verify"), "--verify and --rebuild work on a state file"),
        (
            ("check", land, "--baseline", contract, "--json", "-", "--junit", "-"),
            "--json and --junit both write to standard output",
        ),
        (("check", pipeline["dir"] / "nope", "--baseline", contract), "does not exist"),
        (("diff", land), "diff takes two sides"),
        (("diff", land, "--by", "region"), "no partition key 'region'"),
    ]
    for args, message in cases:
        res = invoke(*args)
        assert res.returncode == 2, args
        assert message in res.stderr, (args, res.stderr)
        assert "Traceback" not in res.stderr


def test_help_teaches_the_policy_keys_and_exit_codes():
    res = invoke("check", "--help")
    assert res.returncode == 0
    for key in keys():
        assert f"\n    {key} " in res.stdout, key
    assert '    type_change          "fail"  ' in res.stdout and '    widening             "allow" ' in res.stdout
    assert "  0  passed: no policy violation (warnings are allowed)" in res.stdout
    assert "  1  a policy violation" in res.stdout and "  2  usage or input error" in res.stdout
    res = invoke("diff", "--help")
    assert res.returncode == 0
    for kind in DIFF_KINDS:
        assert f"  {kind} " in res.stdout, kind
    assert "Exit codes: 0 the diff was made" in res.stdout


def test_diff_a_report_against_a_partition_and_by_day(pipeline: dict[str, Path], tmp_path: Path):
    land = pipeline["land"]
    res = invoke("scan", land, "--json", tmp_path / "yesterday.json", "--quiet")
    assert res.returncode == 0, res.stderr
    _day(land, 2)
    _day(land, 3)
    res = invoke("diff", tmp_path / "yesterday.json", land / "day=2026-11-30")
    assert res.returncode == 0, res.stderr
    assert 'type-changed   seq: int64 → union<int64 | string>  (at part-0.jsonl row 17, e.g. "17b")' in res.stdout

    res = invoke("diff", land, "--by", "day", "--json", "-")
    assert res.returncode == 0, res.stderr
    doc = json.loads(res.stdout)
    assert (doc["format"], doc["by"]) == ("driftline-diff", "day")
    got = [(x["before"], x["after"], [(c["kind"], c["path"]) for c in x["changes"]]) for x in doc["diffs"]]
    assert got == [
        ("day=2026-11-28", "day=2026-11-29", [("widened", "temp")]),
        ("day=2026-11-29", "day=2026-11-30", [("type-changed", "seq"), ("narrowed", "temp")]),
    ]
    widened = doc["diffs"][0]["changes"][0]
    # source: RFC 8259 section 6: the example 25.25 is a JSON number, not the text "25.25".
    assert (widened["file"], widened["row"], widened["example"]) == ("day=2026-11-29/part-0.jsonl", 1, {"value": 25.25})
    assert "day=2026-11-28 → day=2026-11-29: 1 widened" in res.stderr  # the human view moved to stderr


def test_check_a_saved_report(pipeline: dict[str, Path], tmp_path: Path):
    _contract_here(pipeline)
    land = pipeline["land"]
    _day(land, 3)
    assert invoke("scan", land, "--json", tmp_path / "r.json", "--quiet").returncode == 0
    res = invoke("check", tmp_path / "r.json", "--baseline", pipeline["contract"], "--json", "-", "-q")
    assert res.returncode == 1
    doc = json.loads(res.stdout)
    assert (doc["counts"]["files_read"], doc["counts"]["files_reused"]) == (0, 2)
    assert [(v["rule"], v["field"], v["row"], v["example"]) for v in doc["violations"]] == [
        ("type_change", "seq", 17, {"value": "17b"})  # source: RFC 8259 section 7 (a JSON string)
    ]
    res = invoke("check", tmp_path / "r.json", "--baseline", pipeline["contract"], "--state", tmp_path / ".s")
    assert res.returncode == 2 and "give data paths, not a saved report" in res.stderr


def test_check_against_a_rules_file(pipeline: dict[str, Path], tmp_path: Path):
    land = pipeline["land"]
    assert invoke("schema", land, "--rules", tmp_path / "rules.json").returncode == 0
    _day(land, 2)
    _day(land, 3)
    res = invoke("check", land, "--baseline", tmp_path / "rules.json", "--junit", "-", "-q")
    assert res.returncode == 1
    suite = ET.fromstring(res.stdout).find("testsuite")
    failing = [c.get("name") for c in suite.findall("testcase") if c.find("failure") is not None]
    assert failing == ["type_change"]
    rules = {c.get("name"): c for c in suite.findall("testcase")}
    assert rules["cast_loss"].find("skipped") is None  # the rules file has a parse rule: cast_loss is checked
