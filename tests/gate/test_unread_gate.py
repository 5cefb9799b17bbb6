"""A gate never passes what it could not read (policy key unread_rows, default fail)."""

from __future__ import annotations

import csv
import gzip
import hashlib
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import driftline
from driftline.gate.baseline import baseline_from_json_schema
from driftline.gate.compare import compare
from driftline.gate.policy import Policy, load_policy

SCHEMA = {"type": "object", "properties": {"id": {"type": "integer"}, "name": {"type": "string"}}}
STRAY = b'id,"name\n1,a\n2,b\n3,c\n'  # the header's quote is never closed
RAGGED = b"id,name\n1,a\n2,b,extra\n3,c\n"  # a row of three fields under two names: set aside


def digests(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir()) if p.is_file()}


def check_cli(*args: str) -> subprocess.CompletedProcess[str]:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path), COLUMNS="200")
    return subprocess.run(
        [sys.executable, "-m", "driftline.cli", "check", *args], capture_output=True, text=True, env=env, timeout=120
    )


def test_a_stray_quote_in_the_header_is_reported_not_silent(tmp_path: Path):
    (tmp_path / "a.csv").write_bytes(STRAY)
    # source: Python's csv module (RFC 4180 section 2, rule 6: a quote opens a field that runs to the
    # next quote): the whole file is one header row whose last cell holds every line.
    rows = list(csv.reader(io.StringIO(STRAY.decode(), newline="")))
    assert len(rows) == 1 and rows[0][1].count("\n") == 4
    # The dialect finder sees that quoting explains nothing in this file (the quote opens a
    # field it never closes), so it reads it without quotes: every row is read.
    f = driftline.scan(tmp_path).files[0]
    assert (f.rows, f.complete, f.dialect.quote, f.issues) == (3, True, None, ())


def test_header_only_files_are_not_flagged(tmp_path: Path):
    (tmp_path / "a.csv").write_text("id,name\n")
    (tmp_path / "b.csv").write_text("id,name\n\n\n")
    (tmp_path / "c.tsv").write_text("id\tname")
    p = driftline.scan(tmp_path)
    assert [(f.rel, f.rows, f.issues, f.complete) for f in p.files] == [
        ("a.csv", 0, (), True),
        ("b.csv", 0, (), True),
        ("c.tsv", 0, (), True),
    ]
    assert compare(p, baseline_from_json_schema(SCHEMA)).passed


def test_check_fails_on_rows_set_aside_and_leaves_the_input_alone(tmp_path: Path):
    data = tmp_path / "data"
    data.mkdir()
    (data / "a.csv").write_bytes(RAGGED)
    (tmp_path / "schema.json").write_text(json.dumps(SCHEMA))
    before = digests(data)
    res = check_cli(str(data), "--baseline", str(tmp_path / "schema.json"), "--json", str(tmp_path / "v.json"))
    assert res.returncode == 1, res.stderr  # source: docs/gate.md, exit 1 = a policy violation
    assert res.stdout.startswith("FAIL")
    assert "unread_rows       rows not read: ragged-row" in res.stdout
    verdict = json.loads((tmp_path / "v.json").read_text())
    assert {v["rule"] for v in verdict["violations"]} == {"file_errors", "unread_rows"}
    assert digests(data) == before


def test_against_a_saved_report_too(tmp_path: Path):
    good, bad = tmp_path / "good", tmp_path / "bad"
    good.mkdir()
    bad.mkdir()
    (good / "a.csv").write_text("id,name\n1,a\n2,b\n")
    (bad / "a.csv").write_bytes(RAGGED)
    report = tmp_path / "base.json"
    report.write_bytes(__import__("driftline.results.report", fromlist=["dumps"]).dumps(driftline.scan(good)))
    v = driftline.check(bad, baseline=report)
    assert not v.passed and "unread_rows" in {x.rule for x in v.violations}
    assert driftline.check(good, baseline=report).passed


def test_rows_set_aside_fail_whatever_the_error_rate(tmp_path: Path):
    (tmp_path / "a.csv").write_text("id,name\n1,a\n2,b,extra\n3,c\n")  # a ragged row is set aside
    p = driftline.scan(tmp_path)
    assert p.rows == 2 and [i.kind for i in p.issues] == ["ragged-row"]
    lenient = compare(p, baseline_from_json_schema(SCHEMA), Policy(max_file_error_rate=100))
    assert [(v.rule, v.change, v.file, v.line) for v in lenient.violations] == [
        ("unread_rows", "rows not read: ragged-row", "a.csv", 3)
    ]
    assert compare(p, baseline_from_json_schema(SCHEMA), Policy(max_file_error_rate=100, unread_rows="allow")).passed


def test_a_truncated_file_counts(tmp_path: Path):
    whole = gzip.compress(b"".join(b'{"id": %d, "name": "n"}\n' % i for i in range(2000)))
    (tmp_path / "a.jsonl.gz").write_bytes(whole[: len(whole) // 2])
    p = driftline.scan(tmp_path)
    # The cut line is malformed, then the stream ends early: the file was not read whole.
    assert [i.kind for i in p.issues] == ["malformed-json", "truncated"] and not p.files[0].complete
    v = compare(p, baseline_from_json_schema(SCHEMA), Policy(max_file_error_rate=100))
    assert [(x.rule, x.change, x.count) for x in v.violations] == [("unread_rows", "rows not read: malformed-json", 2)]


def test_the_key_reads_from_a_policy_file(tmp_path: Path):
    (tmp_path / "gate.toml").write_text('unread_rows = "warn"\nfile_errors = "allow"\n')
    pol = load_policy(tmp_path / "gate.toml")
    assert pol.unread_rows == "warn"
    data = tmp_path / "data"
    data.mkdir()
    (data / "a.csv").write_bytes(RAGGED)
    (tmp_path / "schema.json").write_text(json.dumps(SCHEMA))
    res = check_cli(str(data), "-b", str(tmp_path / "schema.json"), "-p", str(tmp_path / "gate.toml"))
    assert res.returncode == 0 and "WARN  unread_rows" in res.stdout, res.stdout
