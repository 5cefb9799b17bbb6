"""`driftline schema` through the real console script: each format's file passes its
reference reader, the lines a person reads, and exit codes for bad input."""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import avro.schema
import duckdb
import pyarrow as pa
import pytest
from jsonschema import Draft202012Validator

EXE = [sys.executable, "-m", "driftline.cli"]
PM25_LINE = (
    "pm25: parse_float → float64; 122 strings and 599 CSV cells, 6 would become null (null tokens) "
    "('n/a' at readings/region=east/day=2026-11-29/part-0000.jsonl.gz row 185, "
    "'n/a' at readings/region=east/day=2026-11-29/part-0000.jsonl.gz row 250, …)"
)


def run(*args: str) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "COLUMNS": "400"}  # no wrapping: the lines are checked whole
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, env=env)


@pytest.fixture(scope="module")
def report(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("report") / "report.json"
    res = run("scan", str(demo_dir / "landing"), "--json", str(out), "-q", "--jobs", "1")
    assert res.returncode == 0, res.stderr
    return out


def test_terminal_shows_the_schema_and_each_rule_with_its_loss(report: Path):
    res = run("schema", str(report))
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert "Unified schema" in out and "Cast rules (9 fields need one)" in out
    assert PM25_LINE in out
    assert "    does: parses decimal strings as float64; null tokens ('n/a', 'null', '-', ...) become null" in out
    assert "    why:  715 of 721 strings parse as float64" in out
    assert (
        "ts: parse_timestamp → timestamp[us, UTC]; 3,960 strings and 599 CSV cells, 1,117 local times read as UTC"
    ) in out


def test_each_format_passes_its_reference_reader(report: Path, tmp_path: Path):
    files = {fmt: tmp_path / f"out.{fmt}" for fmt in ("json-schema", "arrow", "sql", "avro")}
    for fmt, path in files.items():
        res = run("schema", str(report), "--to", fmt, "--out", str(path), "--table", "raw_readings")
        assert res.returncode == 0, res.stderr
        assert f"{fmt} written to {path}" in res.stdout
    Draft202012Validator.check_schema(json.loads(files["json-schema"].read_text()))
    schema = pa.ipc.read_schema(pa.py_buffer(files["arrow"].read_bytes()))
    assert schema.field("pm25").type == pa.float64()
    # the default dialect is DuckDB's, which runs it; --dialect sqlite flattened, sqlite's
    con = duckdb.connect()
    con.execute(files["sql"].read_text())
    assert [r[0] for r in con.execute('DESCRIBE "raw_readings"').fetchall()][:2] == ["battery", "battery_level"]
    lite = tmp_path / "lite.sql"
    res = run(
        "schema",
        str(report),
        "--to",
        "sql",
        "--dialect",
        "sqlite",
        "--flatten",
        "__",
        "--table",
        "raw_readings",
        "--out",
        str(lite),
        "-q",
    )
    assert res.returncode == 0, res.stderr
    con3 = sqlite3.connect(":memory:")
    con3.executescript(lite.read_text())
    columns = [r[1] for r in con3.execute('PRAGMA table_info("raw_readings")')]
    assert columns[:2] == ["battery__charge_cycles", "battery__level"]
    lite.unlink()
    parsed = avro.schema.parse(files["avro"].read_text())
    assert parsed.name == "raw_readings"
    assert sorted(os.listdir(tmp_path)) == sorted(p.name for p in files.values())  # no temporary files left


def test_paths_and_a_saved_report_give_the_same_schema(demo_dir: Path, report: Path):
    from_paths = run("schema", str(demo_dir / "landing"), "--to", "json-schema", "--jobs", "1")
    from_report = run("schema", str(report), "--to", "json-schema")
    assert from_paths.returncode == from_report.returncode == 0
    assert json.loads(from_paths.stdout) == json.loads(from_report.stdout)
    assert "Unified schema" in from_report.stderr  # stdout carries the schema, the summary moves


def test_rules_to_stdout_and_options_from_a_config_file(report: Path, tmp_path: Path):
    config = tmp_path / "recommend.toml"
    config.write_text('[recommend]\nprefer_decimal = true\ntimestamp_unit = "ms"\n')
    res = run("schema", str(report), "--rules", "-", "--config", str(config), "--timestamp-zone", "+01:00", "-q")
    assert res.returncode == 0, res.stderr
    doc = json.loads(res.stdout)
    assert doc["format"] == "driftline-rules"
    assert (doc["options"]["prefer_decimal"], doc["options"]["timestamp_unit"], doc["options"]["timestamp_zone"]) == (
        True,
        "ms",
        "+01:00",
    )
    voltage = next(f for f in doc["fields"] if f["path"] == "battery_voltage")
    assert (voltage["rule"], voltage["target"]) == ("parse_decimal", "decimal(3,2)")


def test_strict_mode_exits_1_and_lists_the_conflicts(report: Path, tmp_path: Path):
    out = tmp_path / "s.json"
    res = run("schema", str(report), "--strict", "--to", "json-schema", "--out", str(out), "-q")
    assert res.returncode == 1
    assert (
        "error: strict mode: 2 fields need a lossy or conflicting cast rule: "
        "tags (wrap_scalar_in_list), ts (parse_timestamp)" in res.stderr
    )
    assert "  tags: wrap_scalar_in_list → list<string>; 6 strings and 510 CSV cells, 516 would change" in res.stderr
    assert not out.exists()


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--to", "xml"], "error: unknown --to 'xml'; choose one of json-schema, arrow, arrow-text, sql, avro"),
        (
            ["--to", "sql", "--out", "/nonexistent-folder/x.sql"],
            "error: cannot write '/nonexistent-folder/x.sql'",
        ),
        (["--timestamp-unit", "m"], "error: timestamp_unit must be one of s, ms, us, ns; got 'm'"),
        (["--json-mode", "loose"], "error: unknown --json-mode 'loose'"),
    ],
)
def test_bad_options_exit_2_with_a_clear_message(report: Path, args: list[str], message: str):
    res = run("schema", str(report), *args)
    assert res.returncode == 2
    assert message in res.stderr and "Traceback" not in res.stderr


def test_bad_inputs_exit_2(report: Path, tmp_path: Path):
    other = tmp_path / "v3.json"
    other.write_text(report.read_text().replace('"version": 2', '"version": 3', 1))
    res = run("schema", str(other), "--to", "sql")
    assert res.returncode == 2
    assert res.stderr.startswith("error: ") and "has report version 3" in res.stderr
    assert "has report version 3 (at /version); this driftline reads versions 1 and 2" in res.stderr
    config = tmp_path / "bad.toml"
    config.write_text("[recommend]\nstrictness = 1\n")
    res = run("schema", str(report), "--config", str(config))
    assert res.returncode == 2 and "unknown option 'strictness'" in res.stderr
    res = run("schema", str(tmp_path / "missing"))
    assert res.returncode == 2 and res.stderr.startswith("error: ")
    broken = tmp_path / "broken"
    broken.mkdir()
    (broken / "bad.jsonl").write_text("{nope\n")
    res = run("schema", str(broken))
    assert res.returncode == 2 and "error: nothing readable: the only file failed" in res.stderr


def test_leading_zeros_flag(tmp_path: Path):
    # common practice: US ZIP codes keep their leading zeros (06390 is not 6390)
    (tmp_path / "zips.csv").write_text("zip\n06390\n10001\n02134\n")
    keep = run("schema", str(tmp_path), "--rules", "-", "-q")
    assert keep.returncode == 0, keep.stderr
    [field] = json.loads(keep.stdout)["fields"]
    assert (field["rule"], field["target"], field["effects"]) == ("identity", "string", [])
    parse = run("schema", str(tmp_path), "--rules", "-", "-q", "--leading-zeros", "parse")
    doc = json.loads(parse.stdout)
    assert doc["options"]["leading_zeros"] == "parse"
    [field] = doc["fields"]
    assert (field["rule"], field["target"]) == ("parse_integer", "int64")
    assert [(e["cause"], e["count"]) for e in field["effects"]] == [("leading_zeros", 2)]
    shown = run("schema", str(tmp_path), "--leading-zeros", "parse")
    assert "2 would change (leading zeros dropped)" in shown.stdout + shown.stderr
    bad = run("schema", str(tmp_path), "--leading-zeros", "drop")
    assert bad.returncode == 2 and "error: leading_zeros must be one of keep, parse; got 'drop'" in bad.stderr


@pytest.mark.parametrize("columns", [80, 60])
def test_the_schema_table_never_cuts_a_field_name(report: Path, columns: int):
    # common practice: a table shrinks its free-text column first and keeps identifiers whole.
    # At 80 columns 'battery.charge_cycles' was cut to 'battery.charge_cyc…'.
    res = run_at(columns, "schema", str(report))
    assert res.returncode == 0, res.stderr
    lines = res.stdout.split("Unified schema", 1)[1].split("\n\n", 1)[0].splitlines()
    assert max(len(ln) for ln in lines) <= columns  # nothing spills past the edge
    cells = [ln.split("│")[1].strip() for ln in lines if ln.startswith("│")]
    folded = " ".join(cells).replace(" ", "")  # a name folded over two lines reads whole again
    for path in ("battery.charge_cycles", "battery.voltage", "battery_voltage", "ingested_at", "tags[]"):
        assert path in folded
    assert "…" not in res.stdout.split("Cast rules", 1)[0]


def run_at(columns: int, *args: str) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "COLUMNS": str(columns)}
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, env=env)
