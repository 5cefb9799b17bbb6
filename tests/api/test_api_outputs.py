"""The files the library writes are the files the command writes, byte for byte.

Profile.write_json / write_html against `driftline scan --json/--html`, and every
Recommendation output (schema, rules, to_json_schema, to_sql, to_avro, to_arrow_ipc,
write) against `driftline schema --to ... / --rules`, on the demo landing directory. Each
output is also read by its reference reader (pyarrow, jsonschema, the Apache avro
package, DuckDB), and the README's Python example runs as written.
"""

from __future__ import annotations

import ast
import json
import re
import subprocess
import sys
from pathlib import Path

import avro.schema
import duckdb
import pyarrow as pa
import pytest
from jsonschema import Draft202012Validator

import driftline
from conftest import ROOT, _load_make_demo

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str) -> None:
    res = subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=180)
    assert res.returncode == 0, res.stderr


@pytest.fixture(scope="module")
def scanned(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One `driftline scan` run that wrote both its JSON report and its HTML page."""
    out = tmp_path_factory.mktemp("cli")
    run("scan", str(demo_dir / "landing"), "--json", str(out / "r.json"), "--html", str(out / "r.html"), "-q")
    return out


# -- Profile ------------------------------------------------------------------------------------


def test_profile_writes_what_scan_writes(scanned: Path, tmp_path: Path):
    # The report keeps everything the page is made from (the duration too), so the
    # profile read back from the command's report writes the command's two files again.
    profile = driftline.load_report(scanned / "r.json")
    profile.write_json(tmp_path / "r.json")
    profile.write_html(str(tmp_path / "r.html"))  # a str or a PathLike
    assert (tmp_path / "r.json").read_bytes() == (scanned / "r.json").read_bytes()
    assert (tmp_path / "r.html").read_bytes() == (scanned / "r.html").read_bytes()


def test_a_fresh_scan_writes_the_command_report_but_its_duration(demo_dir: Path, scanned: Path, tmp_path: Path):
    driftline.scan(demo_dir / "landing").write_json(tmp_path / "r.json")
    api, cli = (json.loads((d / "r.json").read_bytes()) for d in (tmp_path, scanned))
    assert api.pop("duration_s") >= 0 and cli.pop("duration_s") >= 0
    assert api == cli
    # source: the demo manifest (tests/test_make_demo.py): 4,694 rows in 15 files
    assert (api["summary"]["rows"], len(api["files"])) == (4694, 15)


def test_profile_writes_replace_a_file_atomically_and_go_to_stdout(demo_dir: Path, tmp_path: Path):
    target = tmp_path / "r.json"
    target.write_text("earlier")
    link = tmp_path / "link.json"
    link.symlink_to(target)
    profile = driftline.scan(demo_dir / "landing" / "readings" / "region=south")
    profile.write_json(link)  # a symlink stays; its target gets the report
    assert link.is_symlink() and driftline.load_report(target) == profile
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []
    code = "import sys, driftline; driftline.load_report(sys.argv[1]).write_json('-')"
    res = subprocess.run([sys.executable, "-c", code, str(target)], capture_output=True, timeout=120)
    assert res.returncode == 0 and res.stdout == target.read_bytes()


# -- Recommendation ---------------------------------------------------------------------------

# (--to, extra CLI flags, the library call that must write the same bytes)
CASES = [
    ("json-schema", [], lambda r: r.to_json_schema().encode()),
    ("json-schema", ["--json-mode", "strict"], lambda r: r.to_json_schema(mode="strict").encode()),
    ("json-schema", ["--table", "raw"], lambda r: r.to_json_schema(title="raw").encode()),
    ("sql", [], lambda r: r.to_sql().encode()),
    ("sql", ["--table", "raw_readings"], lambda r: r.to_sql(table="raw_readings").encode()),
    (
        "sql",
        ["--dialect", "postgres", "--flatten", "__"],
        lambda r: r.to_sql(dialect="postgres", flatten="__").encode(),
    ),
    ("sql", ["--dialect", "bigquery"], lambda r: r.to_sql(dialect="bigquery").encode()),
    ("avro", [], lambda r: r.to_avro().encode()),
    ("avro", ["--table", "pm2.5 readings"], lambda r: r.to_avro(name="pm2.5 readings").encode()),
    ("arrow", [], lambda r: r.to_arrow_ipc()),
    ("iceberg", [], lambda r: r.to_iceberg().encode()),
    ("spark", [], lambda r: r.to_spark().encode()),
    ("json-schema", ["--bounds-from-sample"], lambda r: r.to_json_schema(bounds_from_sample=True).encode()),
]


@pytest.mark.parametrize(("to", "flags", "call"), CASES, ids=[f"{c[0]}{''.join(c[1])}" for c in CASES])
def test_recommendation_gives_the_file_schema_writes(scanned: Path, tmp_path: Path, to, flags, call):
    out = tmp_path / "cli.out"
    run("schema", str(scanned / "r.json"), "--to", to, "--out", str(out), *flags, "-q")
    rec = driftline.load_report(scanned / "r.json").recommend()
    assert call(rec) == out.read_bytes()
    bounds = "--bounds-from-sample" in flags
    flags = [f for f in flags if f != "--bounds-from-sample"]
    given = dict(zip(flags[::2], flags[1::2], strict=True))
    rec.write(
        tmp_path / "api.out",
        to,
        table=given.get("--table"),
        json_mode=given.get("--json-mode"),
        dialect=given.get("--dialect"),
        flatten=given.get("--flatten"),
        bounds_from_sample=bounds,
    )
    assert (tmp_path / "api.out").read_bytes() == out.read_bytes()


def test_rules_and_arrow_text_are_what_schema_writes(scanned: Path, tmp_path: Path):
    run("schema", str(scanned / "r.json"), "--rules", str(tmp_path / "cli.rules.json"), "-q")
    run("schema", str(scanned / "r.json"), "--to", "arrow-text", "--out", str(tmp_path / "cli.txt"), "-q")
    rec = driftline.load_report(scanned / "r.json").recommend()
    assert rec.rules == json.loads((tmp_path / "cli.rules.json").read_bytes())
    rec.write(tmp_path / "api.rules.json", "rules")
    rec.write(tmp_path / "api.txt", "arrow-text")
    for name in ("rules.json", "txt"):
        assert (tmp_path / f"api.{name}").read_bytes() == (tmp_path / f"cli.{name}").read_bytes()
    rec.rules["fields"].clear()  # a new dict each time: the recommendation is a value
    assert rec.rules == json.loads((tmp_path / "cli.rules.json").read_bytes())


def test_recommend_options_give_the_same_files_as_the_flags(scanned: Path, tmp_path: Path):
    flags = ["--prefer-decimal", "--timestamp-unit", "ms", "--null-tokens", "never"]
    run("schema", str(scanned / "r.json"), "--to", "json-schema", "--out", str(tmp_path / "s.json"), *flags, "-q")
    rec = driftline.load_report(scanned / "r.json").recommend(
        prefer_decimal=True, timestamp_unit="ms", null_tokens="never"
    )
    assert rec.to_json_schema().encode() == (tmp_path / "s.json").read_bytes()


def test_each_output_passes_its_reference_reader(demo_profile: driftline.Profile):
    rec = demo_profile.recommend()
    # source: pyarrow 26 ipc.read_schema reads the IPC schema message back, metadata included
    assert pa.ipc.read_schema(pa.py_buffer(rec.to_arrow_ipc())).equals(rec.schema, check_metadata=True)
    assert isinstance(rec.schema, pa.Schema) and rec.schema.names == [p.name for p in rec.fields]
    assert rec.schema.equals(rec.arrow_schema(), check_metadata=True)
    # source: JSON Schema 2020-12 meta-schema, as the jsonschema package checks it
    Draft202012Validator.check_schema(json.loads(rec.to_json_schema()))
    # source: Apache Avro 1.12 specification, as the avro package parses it
    parsed = avro.schema.parse(rec.to_avro(name="readings"))
    assert parsed.name == "readings" and [f.name for f in parsed.fields] == [p.name for p in rec.fields]
    # source: DuckDB runs the whole script (CREATE TABLE, staging table, INSERT ... SELECT)
    con = duckdb.connect()
    con.execute(rec.to_sql(table="readings"))
    columns = {c[0]: c[1] for c in con.execute('DESCRIBE "readings"').fetchall()}
    assert columns["pm25"] == "DOUBLE" and columns["station_id"] == "VARCHAR"
    # source: docs/rules.schema.json (JSON Schema 2020-12), checked with the jsonschema package
    rules_schema = json.loads((ROOT / "docs" / "rules.schema.json").read_text(encoding="utf-8"))
    Draft202012Validator(rules_schema).validate(rec.rules)


# -- the README's Python example, as written --------------------------------------------------


def _readme_python_blocks() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## From Python", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```python\n(.*?)```", section, flags=re.S)


def _claims(code: str) -> list[tuple[str, object]]:
    """Lines `EXPR  # VALUE` whose comment is a Python literal: the value EXPR must have."""
    out = []
    for line in code.splitlines():
        expr, sep, comment = line.partition("  # ")
        if not sep:
            continue
        try:
            out.append((expr.strip(), ast.literal_eval(comment.strip())))
        except (ValueError, SyntaxError):
            continue  # a comment in words
    return out


def test_readme_python_example_runs_as_written(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    blocks = _readme_python_blocks()
    assert blocks, "README.md has a Python example under 'From Python'"
    _load_make_demo().build(tmp_path)  # demo/landing/, as scripts/demo writes it
    monkeypatch.chdir(tmp_path)
    ns: dict[str, object] = {}
    for code in blocks:
        exec(compile(code, "README.md", "exec"), ns)  # literally, as a user pastes it
    claims = [c for code in blocks for c in _claims(code)]
    assert len(claims) >= 3
    for expr, value in claims:
        assert eval(expr, ns) == value, expr
    # What the example wrote is what the command writes for the same data.
    run("scan", "landing/", "--batch-rows", "50000", "--html", str(tmp_path / "cli.html"), "-q", "--write-inside")
    page, cli_page = (tmp_path / "report.html").read_text(), (tmp_path / "cli.html").read_text()
    without_duration = re.compile(r"duration: [0-9.]+ s</span>")
    assert without_duration.sub("", page) == without_duration.sub("", cli_page)
    profile = ns["profile"]
    assert isinstance(profile, driftline.Profile)
    assert json.loads(ns["schema"]) == json.loads(profile.recommend().to_json_schema())  # type: ignore[arg-type]
