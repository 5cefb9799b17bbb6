"""What the CLI says: 'error: message' on stderr (the class only with --debug), exit 2."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, cwd=cwd)


def test_an_error_reads_error_colon_message(tmp_path: Path):
    res = run("scan", "nope", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == "error: 'nope' does not exist; give a file, a folder or a glob\n"


def test_debug_names_the_class_and_shows_the_traceback(tmp_path: Path):
    res = run("--debug", "scan", "nope", cwd=tmp_path)
    assert res.returncode == 2
    assert res.stderr.startswith("Traceback (most recent call last):\n")
    assert res.stderr.endswith("error (InputPathError): 'nope' does not exist; give a file, a folder or a glob\n")


def test_diff_with_one_side_says_what_it_takes(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"a": 1}\n')
    res = run("diff", "a.jsonl", cwd=tmp_path)
    assert (res.returncode, res.stderr) == (
        2,
        "error: diff takes two sides (reports or paths), or one with --by KEY; got 1\n",
    )


def test_an_unknown_target_lists_the_choices(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"a": 1}\n')
    res = run("schema", "a.jsonl", "--to", "yaml", cwd=tmp_path)
    assert res.returncode == 2
    assert res.stderr == (
        "error: unknown --to 'yaml'; choose one of json-schema, arrow, arrow-text, sql, avro, iceberg, spark\n"
    )


def test_every_file_failed_says_the_only_file_for_one(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text("{not json\n")
    res = run("scan", "a.jsonl", "-q", cwd=tmp_path)
    assert res.returncode == 2
    assert res.stderr.endswith("error: nothing readable: the only file failed (run without -q to see the problems)\n")
