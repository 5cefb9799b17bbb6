"""--help speaks a person's words: metavars like PATH... and BYTES, byte defaults like 64 GiB."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

EXE = [sys.executable, "-m", "driftline.cli"]


def _help(verb: str) -> str:
    env = {**os.environ, "COLUMNS": "100"}
    res = subprocess.run([*EXE, verb, "--help"], capture_output=True, text=True, timeout=120, env=env)
    assert res.returncode == 0, res.stderr
    return res.stdout


@pytest.mark.parametrize(
    ("verb", "usage"),
    [
        ("scan", "Usage: driftline scan [OPTIONS] PATH..."),
        ("schema", "Usage: driftline schema [OPTIONS] PATH..."),
        ("check", "Usage: driftline check [OPTIONS] PATH..."),
        ("diff", "Usage: driftline diff [OPTIONS] BEFORE [AFTER]"),
        ("apply", "Usage: driftline apply [OPTIONS] LANDING..."),
    ],
)
def test_help_shows_no_internals(verb, usage):
    text = _help(verb)
    assert text.splitlines()[0] == usage
    for internal in ("{paths}", "{sides}", "<list[str]>", "<int range>", "<float range>", "<str>", "<int>", "<float>"):
        assert internal not in text


def test_byte_sizes_show_their_default_in_binary_units():
    text = " ".join(_help("scan").split())
    assert "--batch-bytes BYTES" in text and "[default: 64 MiB]" in text
    assert "--max-decompressed-bytes BYTES" in text and "[default: 64 GiB]" in text
    assert "68719476736" not in text and "67108864" not in text


def test_a_byte_size_is_read_with_its_unit(tmp_path):
    (tmp_path / "a.jsonl").write_text('{"a": 1}\n')
    ok = subprocess.run(
        [*EXE, "scan", "a.jsonl", "-q", "--batch-bytes", "1MiB", "--max-record-bytes", "1048576"],
        capture_output=True,
        text=True,
        timeout=120,
        cwd=tmp_path,
    )
    assert ok.returncode == 0, ok.stderr
    bad = subprocess.run(
        [*EXE, "scan", "a.jsonl", "-q", "--batch-bytes", "2GiB"],
        capture_output=True,
        text=True,
        timeout=120,
        cwd=tmp_path,
    )
    assert bad.returncode == 2
    # 2 GiB is past the batch limit of 1 GiB (core/ranges.py: Arrow's 32-bit offsets)
    assert "error: invalid value for '--batch-bytes': 2,147,483,648 bytes is outside 1 B..1 GiB" in bad.stderr
