"""The root is a boundary: symbolic links that lead out of the scanned paths are skipped and
listed (link-outside-root) unless --follow-links; devices and loops are never read either way.

Whether a link leads out is what os.path.realpath says of it (POSIX symlink resolution).
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

import driftline

SECRET = "root:x:0:0:root:/root:/bin/bash"
PASSWORD = "hunter2-secret"


def digests(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and not p.is_symlink()
    }


@pytest.fixture
def landing(tmp_path: Path) -> Path:
    """A landing folder with links out (to a file, to a folder, through a chain) and links within."""
    outside = tmp_path / "outside"
    (outside / "team").mkdir(parents=True)
    (outside / "passwd.csv").write_text(f"line\n{SECRET}\n")
    (outside / "team" / "users.jsonl").write_text(json.dumps({"user": "a", "password": PASSWORD}) + "\n")
    d = tmp_path / "landing"
    (d / "day=1").mkdir(parents=True)
    (d / "day=1" / "a.jsonl").write_text('{"id": 1}\n{"id": 2}\n')
    os.symlink(outside / "passwd.csv", d / "passwd.csv")  # to a file out of the root
    os.symlink(outside / "team", d / "team")  # to a folder out of the root
    os.symlink("passwd.csv", d / "chain.csv")  # within, then out: resolved to the end
    os.symlink("day=1/a.jsonl", d / "same.jsonl")  # within the root: followed
    os.symlink("day=1", d / "day=2")  # a folder within the root: followed, found already walked
    return d


def test_links_out_of_the_root_are_skipped_and_listed(landing: Path):
    p = driftline.scan(landing)
    assert [f.rel for f in p.files] == ["day=1/a.jsonl", "same.jsonl"]
    assert {(s.rel, s.reason) for s in p.skipped} == {
        ("passwd.csv", "link-outside-root"),
        ("team", "link-outside-root"),
        ("chain.csv", "link-outside-root"),
        ("day=2", "symlink-loop"),
    }
    assert p.rows == 4


def test_follow_links_reads_them(landing: Path):
    p = driftline.scan(landing, follow_links=True)
    assert [f.rel for f in p.files] == ["chain.csv", "day=1/a.jsonl", "passwd.csv", "same.jsonl", "team/users.jsonl"]
    assert [(s.rel, s.reason) for s in p.skipped] == [("day=2", "symlink-loop")]
    assert p.options["follow_links"] is True


def test_cli_reports_carry_no_value_from_outside(landing: Path, tmp_path: Path):
    before = digests(tmp_path / "outside") | digests(landing)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path), COLUMNS="200")
    cli = [sys.executable, "-m", "driftline.cli", "scan", str(landing)]
    res = subprocess.run(
        [*cli, "--json", str(tmp_path / "r.json"), "--html", str(tmp_path / "r.html")],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert res.returncode == 0, res.stderr
    for out in (tmp_path / "r.json", tmp_path / "r.html"):
        text = out.read_text()
        assert SECRET not in text and PASSWORD not in text and "root:x:0:0" not in text
    assert SECRET not in res.stdout and PASSWORD not in res.stdout
    report = json.loads((tmp_path / "r.json").read_text())
    assert sorted(s["path"] for s in report["skipped"] if s["reason"] == "link-outside-root") == [
        "chain.csv",
        "passwd.csv",
        "team",
    ]
    assert digests(tmp_path / "outside") | digests(landing) == before
    res = subprocess.run(
        [*cli, "--follow-links", "--json", "-", "-q"], capture_output=True, text=True, env=env, timeout=120
    )
    assert res.returncode == 0 and PASSWORD in res.stdout  # followed when asked


def test_a_glob_does_not_lead_out_either(landing: Path):
    p = driftline.scan(str(landing / "*"))
    assert "passwd.csv" not in [f.rel for f in p.files]
    assert ("passwd.csv", "link-outside-root") in {(s.rel, s.reason) for s in p.skipped}


def test_a_link_named_by_the_user_is_followed(landing: Path, tmp_path: Path):
    os.symlink(tmp_path / "outside" / "team", tmp_path / "named")
    p = driftline.scan(tmp_path / "named")
    assert [f.rel for f in p.files] == ["users.jsonl"]


def test_devices_and_loops_stay_out_with_follow_links(tmp_path: Path):
    d = tmp_path / "d"
    d.mkdir()
    (d / "a.jsonl").write_text('{"id": 1}\n')
    os.symlink("/dev/zero", d / "zeros.jsonl")  # a device out of the root
    os.symlink(tmp_path, d / "up")  # a folder out of the root that holds the root: a loop
    for follow in (False, True):
        p = driftline.scan(d, follow_links=follow)
        reasons = {s.rel: s.reason for s in p.skipped}
        assert reasons["zeros.jsonl"] == ("special" if follow else "link-outside-root")
        assert p.file("a.jsonl").rows == 1
        if follow:
            assert reasons["up/d"] == "symlink-loop"  # the root again, through the link
        else:
            assert reasons["up"] == "link-outside-root"
