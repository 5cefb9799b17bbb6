"""Outputs go where a person expects, never onto an input, and never come back as data.

Every case runs the real console script in a process of its own and checks the exit code,
the message, and that every input is byte for byte what it was. Device nodes and FIFOs
are made inside the test's own temporary folder (the tests run as root), never on the
machine's /dev.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
import sys
import threading
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import duckdb
import fastavro
import pyarrow as pa
import pytest
from jsonschema import Draft202012Validator

from _measured import _WRAPPER as WRAPPER
from driftline.emit.atomic import write_output
from driftline.errors import OutputError

EXE = [sys.executable, "-m", "driftline.cli"]
MAX_RSS_BYTES = 1536 * 2**20  # the bound for every case


def run(*args: str | Path, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    env = dict(os.environ)
    if "PYTHONPATH" in env:  # a relative src/ must still point at this checkout from another folder
        env["PYTHONPATH"] = os.pathsep.join(os.path.abspath(p) for p in env["PYTHONPATH"].split(os.pathsep))
    # A small wrapper process runs the CLI and reports its peak (getrusage(2), RUSAGE_CHILDREN:
    # the largest waited-for descendant), so the children of earlier tests do not count.
    cmd = [*EXE, *map(str, args)]
    proc = subprocess.run(
        [sys.executable, "-c", WRAPPER, *cmd], capture_output=True, text=True, timeout=120, cwd=cwd, env=env
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(proc.stdout)
    assert got["peak"] < MAX_RSS_BYTES
    return subprocess.CompletedProcess(cmd, got["rc"], got["out"], got["err"])


def flat(text: str) -> str:
    """Messages without the terminal's line wrapping."""
    return " ".join(text.split())


def snapshot(folder: Path) -> dict[str, bytes]:
    """Every regular file below folder (links followed) with its bytes."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture
def land(tmp_path: Path) -> Path:
    d = tmp_path / "data"
    d.mkdir()
    (d / "a.jsonl").write_text('{"id": 1, "name": "x"}\n{"id": 2, "name": "y"}\n', encoding="utf-8")
    (d / "b.csv").write_text("id,name\n3,z\n", encoding="utf-8")
    return d


# -- devices, FIFOs, standard output and links -------------------------------------------------------


def test_a_character_device_is_written_into_never_replaced(tmp_path: Path, land: Path):
    before = snapshot(land)
    null = tmp_path / "null"
    # source: Linux devices.txt — character major 1, minor 3 is /dev/null (mem devices)
    os.mknod(null, 0o666 | stat.S_IFCHR, os.makedev(1, 3))
    res = run("scan", land, "--json", null, "--html", tmp_path / "r.html", "--quiet")
    assert res.returncode == 0, res.stderr
    st = os.lstat(null)
    assert stat.S_ISCHR(st.st_mode) and st.st_rdev == os.makedev(1, 3)  # still the device, not a file
    assert snapshot(land) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["data", "null", "r.html"]  # no temporary left


def test_a_fifo_is_written_into_and_its_reader_gets_the_report(tmp_path: Path, land: Path):
    before = snapshot(land)
    fifo = tmp_path / "report.pipe"
    os.mkfifo(fifo)
    got: list[bytes] = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_bytes()))
    reader.start()
    res = run("scan", land, "--json", fifo, "--quiet")
    reader.join(timeout=60)
    assert res.returncode == 0, res.stderr
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
    report = json.loads(got[0])  # source: RFC 8259 — what came through the pipe is one JSON document
    assert (report["format"], report["summary"]["rows"], report["summary"]["files"]) == ("driftline-report", 3, 2)
    assert snapshot(land) == before


@pytest.mark.parametrize("name", ["/dev/stdout", "/dev/fd/1", "/proc/self/fd/1", "link-to-stdout"])
def test_standard_output_by_name_is_written_into(tmp_path: Path, land: Path, name: str):
    before = snapshot(land)
    target = name
    if name == "link-to-stdout":
        os.symlink("/dev/stdout", tmp_path / name)
        target = str(tmp_path / name)
    res = run("scan", land, "--json", target)
    assert res.returncode == 0, res.stderr
    report = json.loads(res.stdout)  # the report alone on stdout: the summary moved to stderr
    assert report["summary"]["rows"] == 3 and "driftline scan" in res.stderr
    assert "report written to" not in res.stderr
    if name == "link-to-stdout":
        assert os.readlink(tmp_path / name) == "/dev/stdout"
    assert snapshot(land) == before


def test_a_symlink_keeps_its_link_and_its_target_gets_the_report(tmp_path: Path, land: Path):
    before = snapshot(land)
    out = tmp_path / "out"
    out.mkdir()
    (out / "real.json").write_text("old", encoding="utf-8")
    os.symlink("real.json", out / "latest.json")
    res = run("scan", land, "--json", out / "latest.json", "--quiet")
    assert res.returncode == 0, res.stderr
    assert os.readlink(out / "latest.json") == "real.json"
    assert json.loads((out / "real.json").read_text(encoding="utf-8"))["format"] == "driftline-report"
    assert sorted(p.name for p in out.iterdir()) == ["latest.json", "real.json"]
    assert snapshot(land) == before


def test_a_block_device_a_socket_and_a_folder_are_refused(tmp_path: Path):
    import socket

    # An unassigned block major (devices.txt: 240-254 are for local/experimental use): never opened.
    blk = tmp_path / "blk"
    os.mknod(blk, 0o600 | stat.S_IFBLK, os.makedev(240, 0))
    with pytest.raises(OutputError, match="it is a block device"):
        write_output(str(blk), "x")
    sock = socket.socket(socket.AF_UNIX)
    try:
        sock.bind(str(tmp_path / "sock"))
        with pytest.raises(OutputError, match="it is a socket"):
            write_output(str(tmp_path / "sock"), "x")
    finally:
        sock.close()
    with pytest.raises(OutputError, match="it is a folder"):
        write_output(str(tmp_path), "x")
    assert stat.S_ISBLK(os.lstat(blk).st_mode)


# -- inputs are sacred ---------------------------------------------------------------------------------


def test_outputs_aimed_at_inputs_are_refused(tmp_path: Path, land: Path):
    (tmp_path / "hard.json").hardlink_to(land / "a.jsonl")
    os.symlink(land / "b.csv", tmp_path / "soft.json")
    outside = tmp_path / "elsewhere.json"
    outside.write_text('{"kept": true}\n', encoding="utf-8")
    os.symlink(outside, land / "linked.jsonl")  # an input that is a link out of the folder
    before, kept = snapshot(land), outside.read_bytes()
    cases = [
        (
            ("scan", land, "--json", land / "a.jsonl"),
            f"--json '{land / 'a.jsonl'}': it would replace the file 'a.jsonl' of the scanned folder '{land}'",
        ),
        (
            ("scan", land, "--html", land / "b.csv"),
            f"--html '{land / 'b.csv'}': it would replace the file 'b.csv' of the scanned folder '{land}'",
        ),
        (
            ("scan", land, "--json", tmp_path / "hard.json"),  # a hard link: same device and inode
            f"--json '{tmp_path / 'hard.json'}': it would replace the file 'a.jsonl' of the scanned folder",
        ),
        (
            ("scan", land, "--json", tmp_path / "soft.json"),  # a symlink to an input
            f"--json '{tmp_path / 'soft.json'}': it would replace the file 'b.csv' of the scanned folder",
        ),
        (
            ("scan", land, "--json", outside),  # the target of a link the scan reads
            f"--json '{outside}': it would replace the file 'linked.jsonl' of the scanned folder",
        ),
        (
            ("scan", land / "a.jsonl", "--json", land / "a.jsonl", "--write-inside"),  # a named input, flag or not
            f"--json '{land / 'a.jsonl'}': it is '{land / 'a.jsonl'}', an input of this run",
        ),
        (
            ("schema", land, "--to", "sql", "--out", land / "c.sql"),
            f"--out '{land / 'c.sql'}' lies inside the scanned folder '{land}', where a later scan would read it "
            "as data; write it elsewhere, or pass --write-inside",
        ),
        (
            ("schema", land, "--to", "sql", "--out", land / "b.csv", "--write-inside"),  # never over data
            f"--out '{land / 'b.csv'}': it would replace the file 'b.csv' of the scanned folder",
        ),
        (("schema", land, "--rules", land / "sub" / ".." / "r.json"), "lies inside the scanned folder"),
        (
            ("scan", str(land / "*.jsonl"), "--json", land / "a.jsonl"),  # matched by a scanned glob
            f"--json '{land / 'a.jsonl'}': it would replace the file 'a.jsonl' of the scanned folder '{land}'",
        ),
        (
            ("diff", land / "a.jsonl", land / "b.csv", "--json", land / "b.csv"),
            f"--json '{land / 'b.csv'}': it is '{land / 'b.csv'}', an input of this run",
        ),
    ]
    (land / "sub").mkdir()
    for args, message in cases:
        res = run(*args, "--quiet")
        assert res.returncode == 2, (args, res.stderr)
        assert message in flat(res.stderr), (args, res.stderr)
        assert res.stderr.startswith("error: ") and "Traceback" not in res.stderr
        assert snapshot(land) == before and outside.read_bytes() == kept
    assert sorted(p.name for p in land.iterdir()) == ["a.jsonl", "b.csv", "linked.jsonl", "sub"]


def test_check_refuses_to_write_over_its_baseline_and_policy(tmp_path: Path, land: Path):
    contract, gate = tmp_path / "contract.schema.json", tmp_path / "gate.toml"
    assert run("schema", land, "--to", "json-schema", "--out", contract, "--quiet").returncode == 0
    gate.write_text('new_field = "fail"\n', encoding="utf-8")
    before, base, pol = snapshot(land), contract.read_bytes(), gate.read_bytes()
    for option, target in (("--json", contract), ("--junit", gate), ("--state", contract)):
        res = run("check", land, "--baseline", contract, "--policy", gate, option, target)
        assert res.returncode == 2, res.stderr
        assert f"{option} '{target}': it is '{target}', an input of this run" in flat(res.stderr)
    res = run("schema", contract, "--to", "sql", "--out", contract)  # a saved schema is not a side; still refused
    assert res.returncode == 2 and "an input of this run" in flat(res.stderr)
    assert (snapshot(land), contract.read_bytes(), gate.read_bytes()) == (before, base, pol)


def test_a_report_inside_the_folder_with_write_inside_is_never_read_back(tmp_path: Path, land: Path):
    before = snapshot(land)
    first = run("scan", land, "--json", land / "report.json", "--write-inside", "--quiet")
    assert first.returncode == 0, first.stderr
    again = run("scan", land, "--json", "-", "--write-inside", "--quiet")
    report = json.loads(again.stdout)
    # The first report has 2 fields (id, name); reading it as data would add its 79 keys.
    assert (report["summary"]["rows"], report["summary"]["fields"]) == (3, 2)
    assert report["skipped"] == [{"path": "report.json", "reason": "own-output"}]
    assert {k: v for k, v in snapshot(land).items() if k != "report.json"} == before


# -- every output carries the marker, and stays valid for its consumers ----------------------------------


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.comments: list[str] = []
        self.doctype: str | None = None

    def handle_comment(self, data: str) -> None:
        self.comments.append(data)

    def handle_decl(self, decl: str) -> None:
        self.doctype = self.doctype or decl


def test_every_output_inside_the_folder_is_skipped_as_own_output(tmp_path: Path, land: Path):
    before = snapshot(land)
    out = {
        name: land / name
        for name in (
            "report.json",
            "report.html",
            "contract.json",
            "schema.avsc.json",
            "create.sql",
            "schema.arrow",
            "schema.arrow.txt",
            "schema.iceberg.json",
            "schema.spark.json",
            "rules.json",
            "verdict.json",
            "verdict.xml",
            "diff.json",
            "state.json",
        )
    }
    w = "--write-inside"
    steps = [
        ("scan", land, "--json", out["report.json"], "--html", out["report.html"], w),
        ("schema", land, "--to", "json-schema", "--out", out["contract.json"], "--rules", out["rules.json"], w),
        ("schema", land, "--to", "avro", "--out", out["schema.avsc.json"], w),
        ("schema", land, "--to", "sql", "--table", "t", "--out", out["create.sql"], w),
        ("schema", land, "--to", "arrow", "--out", out["schema.arrow"], w),
        ("schema", land, "--to", "arrow-text", "--out", out["schema.arrow.txt"], w),
        ("schema", land, "--to", "iceberg", "--out", out["schema.iceberg.json"], w),
        ("schema", land, "--to", "spark", "--out", out["schema.spark.json"], w),
        (
            "check",
            land,
            "--baseline",
            out["contract.json"],
            "--json",
            out["verdict.json"],
            "--junit",
            out["verdict.xml"],
            "--state",
            out["state.json"],
            w,
        ),
        ("diff", land / "a.jsonl", land / "b.csv", "--json", out["diff.json"], w),
    ]
    for args in steps:
        res = run(*args, "--quiet")
        assert res.returncode == 0, (args, res.stderr)
    res = run("scan", land, "--json", "-", "--quiet")
    report = json.loads(res.stdout)
    assert report["summary"]["rows"] == 3 and report["summary"]["files"] == 2
    assert sorted((s["path"], s["reason"]) for s in report["skipped"]) == sorted((n, "own-output") for n in out)
    assert {k: v for k, v in snapshot(land).items() if k not in out} == before
    # Each output still reads as its format's consumers read it:
    # source: JSON Schema 2020-12 Core 8.3 — "$comment" is for notes to maintainers; checked by jsonschema
    contract = json.loads(out["contract.json"].read_text(encoding="utf-8"))
    Draft202012Validator.check_schema(contract)
    assert Draft202012Validator(contract).is_valid({"id": 1, "name": "x"})
    # source: Avro 1.12 specification, "Schema Declaration" — "doc" is a documentation attribute; fastavro parses it
    avro = fastavro.parse_schema(json.loads(out["schema.avsc.json"].read_text(encoding="utf-8")))
    assert [f["name"] for f in avro["fields"]] == ["id", "name"]
    # source: SQL comments ('--' to the end of the line); duckdb runs the script
    con = duckdb.connect()
    con.execute(out["create.sql"].read_text(encoding="utf-8"))
    assert [
        r[0]
        for r in con.execute(
            "SELECT column_name FROM information_schema.columns WHERE table_name = 't' ORDER BY ordinal_position"
        ).fetchall()
    ] == ["id", "name"]
    assert pa.ipc.read_schema(pa.py_buffer(out["schema.arrow"].read_bytes())).names == ["id", "name"]
    # source: Iceberg table spec, Appendix C (JSON serialization); pyiceberg's model loads the schema
    from pyiceberg.schema import Schema

    iceberg = json.loads(out["schema.iceberg.json"].read_text(encoding="utf-8"))
    assert [f.name for f in Schema.model_validate(iceberg["schema"]).fields] == ["id", "name"]
    # source: Delta protocol "Schema Serialization Format" (Spark's DataType.json); delta-rs parses it
    import deltalake

    spark = deltalake.Schema.from_json(out["schema.spark.json"].read_text(encoding="utf-8"))
    assert [f.name for f in spark.fields] == ["id", "name"]
    # source: XML 1.0 section 2.8 — the declaration first, then comments; ElementTree parses it
    assert ET.parse(out["verdict.xml"]).getroot().tag == "testsuites"
    # source: HTML Living Standard 13.1 — comments may come before the DOCTYPE
    tags = _Tags()
    tags.feed(out["report.html"].read_text(encoding="utf-8"))
    assert tags.comments[0].strip().startswith("driftline-output: ") and tags.doctype == "DOCTYPE html"
    for name in ("report.json", "rules.json", "verdict.json", "diff.json", "state.json"):
        assert json.loads(out[name].read_bytes())["format"].startswith("driftline-"), name


# -- two outputs, two targets ----------------------------------------------------------------------------


def test_two_outputs_on_one_target_are_a_usage_error(tmp_path: Path, land: Path):
    before = snapshot(land)
    x = tmp_path / "x.out"
    os.symlink(x, tmp_path / "x-link")
    cases = [
        (("scan", land, "--json", x, "--html", x), f"--json and --html both write to '{x}'"),
        (("scan", land, "--json", x, "--html", tmp_path / "x-link"), "--json and --html both write to"),
        (("scan", land, "--json", "-", "--html", "-"), "--json and --html both write to standard output"),
        (("scan", land, "--json", "-", "--html", "/dev/stdout"), "--json and --html both write to standard output"),
        (("schema", land, "--to", "sql", "--out", x, "--rules", x), f"--out and --rules both write to '{x}'"),
        (("schema", land, "--to", "sql", "--rules", "-"), "--out and --rules both write to standard output"),
        (
            ("check", land, "--baseline", land / "a.jsonl", "--json", x, "--state", x),
            f"--json and --state both write to '{x}'",
        ),
    ]
    for args, message in cases:
        res = run(*args)
        assert res.returncode == 2, (args, res.stderr)
        assert message in flat(res.stderr) and "Traceback" not in res.stderr, (args, res.stderr)
        assert res.stdout == ""
    assert not x.exists() and snapshot(land) == before


def test_a_report_set_and_its_pages_inside_a_root_of_datasets_are_skipped_as_own_output(tmp_path: Path):
    root = tmp_path / "landing"
    (root / "a").mkdir(parents=True)
    (root / "b").mkdir()
    (root / "a" / "x.jsonl").write_text('{"x": 1}\n', encoding="utf-8")
    (root / "b" / "y.csv").write_text("y,z\n2,3\n", encoding="utf-8")
    res = run("scan", root, "--json", root / "set.json", "--html", root / "page.html", "--write-inside", "--quiet")
    assert res.returncode == 0, res.stderr
    assert sorted(p.name for p in root.iterdir() if p.is_file()) == ["page.a.html", "page.b.html", "set.json"]
    again = json.loads(run("scan", root, "--json", "-", "--quiet").stdout)
    assert again["format"] == "driftline-report-set" and list(again["datasets"]) == ["a", "b"]
    assert sorted((s["path"], s["reason"]) for s in again["skipped"]) == [
        ("page.a.html", "own-output"),
        ("page.b.html", "own-output"),
        ("set.json", "own-output"),
    ]
    # A dataset's page that would land on a data file (through a link) is refused before any is written.
    out = tmp_path / "out"
    out.mkdir()
    (out / "page.b.html").symlink_to(root / "b" / "y.csv")
    before = snapshot(root)
    clash = run("scan", root, "--html", out / "page.html")
    assert clash.returncode == 2 and "it would replace the file 'b/y.csv' of the scanned folder" in clash.stderr
    assert not (out / "page.a.html").exists() and snapshot(root) == before
