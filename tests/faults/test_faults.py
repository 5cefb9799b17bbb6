"""Faults and limits: each hostile file gets a clear per-file error while the others are profiled.

Every case scans a folder holding the hostile file next to a good one (`good.jsonl`, three
rows) and checks both: the problem is named for that file, and nothing else is lost.
"""

from __future__ import annotations

import bz2
import json
import lzma
import os
import stat
import subprocess
import sys
import tempfile
import zlib
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import zstandard

from driftline.core.options import ReadOptions
from driftline.results.profile import Profile
from driftline.scanning.run import scan_paths
from hostile_inputs import SUFFIX, bomb, compress, jsonl_lines, parquet_absurd_footers

GOOD = b'{"id": 1}\n{"id": 2}\n{"id": 3}\n'


def folder_with_good(tmp_path: Path) -> Path:
    d = tmp_path / "landing"
    d.mkdir()
    (d / "good.jsonl").write_bytes(GOOD)
    return d


def scan(d: Path, **opts: object) -> Profile:
    return scan_paths([d], read=ReadOptions(**opts), jobs=1)  # type: ignore[arg-type]


def kinds(profile: Profile, rel: str) -> list[str]:
    return [i.kind for i in profile.file(rel).issues]


def assert_good_profiled(profile: Profile) -> None:
    good = profile.file("good.jsonl")
    assert good.rows == 3 and good.issues == ()


# -- files that vanish or change ---------------------------------------------------------


def test_files_removed_between_discovery_and_reading_are_reported(tmp_path):
    d = folder_with_good(tmp_path)
    (d / "gone.jsonl").write_bytes(GOOD)
    pq.write_table(pa.table({"a": [1]}), d / "gone.parquet")

    def remove_all_but_good(done: int, total: int, current: str) -> None:
        if done == 0:  # the scan has found every file and not yet read any
            (d / "gone.jsonl").unlink()
            (d / "gone.parquet").unlink()

    profile = scan_paths([d], read=ReadOptions(), jobs=1, progress=remove_all_but_good)
    assert kinds(profile, "gone.jsonl") == ["vanished"] == kinds(profile, "gone.parquet")
    assert "removed after it was found" in profile.file("gone.jsonl").issues[0].message
    assert str(d) not in profile.file("gone.parquet").issues[0].message  # no absolute paths in reports
    assert_good_profiled(profile)


def test_a_file_appended_to_before_or_while_it_is_read_is_reported(tmp_path, monkeypatch):
    d = folder_with_good(tmp_path)
    (d / "growing.jsonl").write_bytes(GOOD)
    (d / "zz-rewritten.jsonl").write_bytes(GOOD)

    def rewrite(done: int, total: int, current: str) -> None:
        if current == "zz-rewritten.jsonl":  # between discovery and its read
            (d / current).write_bytes(GOOD + GOOD)

    import driftline.sources.readers as readers

    real_open = readers.open_stream

    def open_then_append(path: str, *args: object, **kw: object):  # while the read is under way
        stream = real_open(path, *args, **kw)
        if path.endswith("growing.jsonl"):
            with open(path, "ab") as fh:
                fh.write(b'{"id": 4}\n')
        return stream

    monkeypatch.setattr(readers, "open_stream", open_then_append)
    profile = scan_paths([d], read=ReadOptions(), jobs=1, progress=rewrite)
    assert kinds(profile, "growing.jsonl") == ["changed"] == kinds(profile, "zz-rewritten.jsonl")
    assert f"size {len(GOOD)} then {len(GOOD) + 10} bytes" in profile.file("growing.jsonl").issues[0].message
    assert profile.file("zz-rewritten.jsonl").complete is False
    assert_good_profiled(profile)


# -- permission denied ---------------------------------------------------------------------


def _scan_as_nobody(d: str) -> dict:
    """Scan d in a forked child that dropped root (setuid 65534): the kernel then really
    refuses files mode 0600 and folders mode 0700, which root itself could always read.
    Everything the child needs is imported before the fork (it cannot read /root's Python)."""
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # pragma: no cover - runs in the child
        os.close(r)
        try:
            os.setgroups([])
            os.setgid(65534)
            os.setuid(65534)
            p = scan_paths([d], read=ReadOptions(), jobs=1)
            out = {
                "files": {f.rel: [f.rows, [[i.kind, i.message] for i in f.issues]] for f in p.files},
                "skipped": [[s.rel, s.reason] for s in p.skipped],
            }
        except BaseException as exc:  # noqa: BLE001 - reported to the parent
            out = {"error": repr(exc)}
        os.write(w, json.dumps(out).encode())
        os._exit(0)
    os.close(w)
    data = b""
    while chunk := os.read(r, 1 << 16):
        data += chunk
    os.close(r)
    os.waitpid(pid, 0)
    return json.loads(data)


def test_permission_denied_files_and_folders_are_reported(tmp_path):
    d = tempfile.mkdtemp(prefix="driftline-perm-")  # /tmp itself: nobody can reach it
    try:
        os.chmod(d, 0o755)
        Path(d, "good.jsonl").write_bytes(GOOD)
        for name, data in (("secret.jsonl", GOOD), ("secret.csv.gz", compress(b"a\n1\n", "gzip"))):
            Path(d, name).write_bytes(data)
        pq.write_table(pa.table({"a": [1]}), Path(d, "secret.parquet"))
        Path(d, "locked").mkdir()
        Path(d, "locked", "inside.jsonl").write_bytes(GOOD)
        for name in ("secret.jsonl", "secret.csv.gz", "secret.parquet"):
            os.chmod(Path(d, name), 0o600)
        os.chmod(Path(d, "locked"), 0o700)
        if os.geteuid() == 0:
            got = _scan_as_nobody(d)
        else:  # an ordinary user: the modes alone refuse
            os.chmod(Path(d, "secret.jsonl"), 0)
            p = scan_paths([d], read=ReadOptions(), jobs=1)
            got = {
                "files": {f.rel: [f.rows, [[i.kind, i.message] for i in f.issues]] for f in p.files},
                "skipped": [[s.rel, s.reason] for s in p.skipped],
            }
    finally:
        os.chmod(Path(d, "locked"), 0o755)
        import shutil

        shutil.rmtree(d)
    assert "error" not in got, got
    files = got["files"]
    assert files["good.jsonl"] == [3, []]
    for name in ("secret.jsonl", "secret.csv.gz", "secret.parquet"):
        rows, issues = files[name]
        assert rows == 0 and [k for k, _ in issues] == ["unreadable"], name
        assert "ermission denied" in issues[0][1], name
        assert d not in issues[0][1]
    assert got["skipped"] == [["locked", "cannot list: Permission denied"]]


# -- truncated compressed files --------------------------------------------------------------

REFERENCE_DECODER = {  # source: CPython zlib / bz2 / lzma and zstandard 0.25, the reference
    "gzip": lambda cut: zlib.decompressobj(wbits=31).decompress(cut),
    "bz2": lambda cut: bz2.BZ2Decompressor().decompress(cut),
    "zstd": lambda cut: zstandard.ZstdDecompressor().decompressobj().decompress(cut),
    "xz": lambda cut: lzma.LZMADecompressor().decompress(cut),
}


@pytest.mark.parametrize("codec", ["gzip", "bz2", "zstd", "xz"])
@pytest.mark.parametrize("keep", [0.3, 0.9])
def test_truncated_compressed_file_keeps_the_rows_before_the_cut(tmp_path, codec, keep):
    d = folder_with_good(tmp_path)
    data = jsonl_lines(20_000)
    packed = lzma.compress(data, preset=1) if codec == "xz" else compress(data, codec)
    cut = packed[: int(len(packed) * keep)]
    (d / f"cut.jsonl{SUFFIX.get(codec, '.xz')}").write_bytes(cut)
    expected = REFERENCE_DECODER[codec](cut).count(b"\n")
    profile = scan(d)
    fr = profile.files[0]
    assert fr.rows == expected and fr.complete is False
    assert kinds(profile, fr.rel)[-1] == "truncated"
    assert set(kinds(profile, fr.rel)) <= {"truncated", "malformed-json"}  # the cut-off last line
    assert_good_profiled(profile)


# -- decompression bombs ---------------------------------------------------------------------


def test_decompression_bombs_stop_at_the_limits_through_the_cli(tmp_path):
    d = folder_with_good(tmp_path)
    (d / "lines.jsonl.gz").write_bytes(compress(jsonl_lines(200_000), "gzip"))  # 5.2 MB of lines
    (d / "zeros.jsonl.zst").write_bytes(bomb("zstd", 40 * 2**20))
    (d / "zeros.jsonl.bz2").write_bytes(bomb("bz2", 20 * 2**20))
    out = tmp_path / "report.json"
    res = subprocess.run(
        [
            sys.executable,
            "-m",
            "driftline.cli",
            "scan",
            str(d),
            "--json",
            str(out),
            "-q",
            "--jobs",
            "1",
            "--max-decompressed-bytes",
            str(2**20),
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert res.returncode == 0, res.stderr
    files = {f["path"]: f for f in json.loads(out.read_text())["files"]}
    # 1 MiB of decompressed lines: the whole lines before the limit, then a clear stop
    lines = files["lines.jsonl.gz"]
    assert lines["rows"] == jsonl_lines(200_000)[: 2**20].count(b"\n")
    assert [i["kind"] for i in lines["issues"]][-1] == "too-large" and lines["complete"] is False
    assert "--max-decompressed-bytes" in lines["issues"][-1]["message"]
    # the run-of-one-line bombs pass 1 MiB too, long before their ratio would be judged
    for name in ("zeros.jsonl.zst", "zeros.jsonl.bz2"):
        assert [i["kind"] for i in files[name]["issues"]][-1] == "too-large", name
        assert files[name]["rows"] == 2**20 // 9, name  # whole 9-byte lines in the first MiB
    assert files["good.jsonl"]["rows"] == 3 and files["good.jsonl"]["issues"] == []


@pytest.mark.parametrize("codec", ["bz2", "zstd"])
def test_a_bomb_past_the_ratio_keeps_its_rows_and_the_other_files(tmp_path, codec):
    d = folder_with_good(tmp_path)
    (d / f"bomb.jsonl{SUFFIX[codec]}").write_bytes(bomb(codec, 24 * 2**20))
    profile = scan(d)
    fr = profile.files[0]
    assert kinds(profile, fr.rel)[-1] == "too-large"
    assert "ratio over 1,000:1" in fr.issues[-1].message
    # judged past 16 MiB out; every whole line handed out before the stop was profiled
    import re

    out = int(re.match(r"([\d,]+) bytes decompressed", fr.issues[-1].message).group(1).replace(",", ""))
    whole, rest = divmod(out, 9)
    # a last fragment that is whole JSON without its newline ('{"a": 1}') counts as a record
    assert out > 16 * 2**20 and fr.rows == whole + (rest == 8)
    assert_good_profiled(profile)


# -- limits: long lines, deep nesting, wide files ------------------------------------------------


def _memory_probe(path: Path, **opts: object) -> dict:
    """Read one file in a fresh process; report rows, issues, and peak memory (pyarrow's pool
    and Python's tracemalloc), which a long-lived test process could not measure."""
    probe = (
        "import json, sys, tracemalloc, pyarrow as pa\n"
        "from driftline.sources.discover import discover\n"
        "from driftline.sources.readers import read_file\n"
        "from driftline.core.options import ReadOptions\n"
        "tracemalloc.start()\n"
        "res = read_file(discover([sys.argv[1]]).files[0], ReadOptions(**json.loads(sys.argv[2])))\n"
        "print(json.dumps({'rows': res.rows, 'issues': [[i.kind, i.line, i.byte_offset] for i in res.issues],\n"
        "  'py': tracemalloc.get_traced_memory()[1], 'arrow': pa.default_memory_pool().max_memory()}))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", probe, str(path), json.dumps(opts)],
        check=True,
        capture_output=True,
        text=True,
        timeout=120,
    )
    return json.loads(done.stdout)


@pytest.mark.parametrize("fmt", ["jsonl", "csv"])
def test_a_single_huge_line_is_reported_and_memory_stays_bounded(tmp_path, fmt):
    big = 24 * 2**20  # a few MB stand in for the 1 GB line: the limit, not the size, bounds memory
    if fmt == "jsonl":
        data = GOOD + b'{"blob": "' + b"x" * big + b'"}\n' + GOOD
        expect_rows, expect = 6, [["too-large", 4, len(GOOD)]]  # skipped; the lines after it are read
    else:
        data = b"id,blob\n1,a\n2,b\n3," + b"x" * big + b"\n4,d\n"
        expect_rows, expect = 2, [["too-large", 4, len(b"id,blob\n1,a\n2,b\n")]]  # the read stops there
    f = tmp_path / f"huge.{fmt}"
    f.write_bytes(data)
    got = _memory_probe(f, max_record_bytes=2**20)
    assert got["rows"] == expect_rows and got["issues"] == expect
    assert got["py"] < 16 * 2**20 and got["arrow"] < 24 * 2**20, got
    d = folder_with_good(tmp_path)
    (d / f.name).write_bytes(data)
    assert_good_profiled(scan(d, max_record_bytes=2**20))


@pytest.mark.parametrize("shape", ["jsonl-line", "json-document", "object-in-arrays"])
def test_nesting_100000_levels_deep_is_reported_without_recursion_error(tmp_path, shape):
    depth = 100_000
    deep = {
        "jsonl-line": b"[" * depth + b"]" * depth,
        "json-document": b"[" * depth + b"]" * depth,
        "object-in-arrays": b'{"a":' * depth + b"1" + b"}" * depth,
    }[shape]
    d = folder_with_good(tmp_path)
    name = "deep.json" if shape == "json-document" else "deep.jsonl"
    (d / name).write_bytes(deep if shape == "json-document" else GOOD + deep + b"\n" + GOOD)
    profile = scan(d)
    fr = profile.file(name)
    assert kinds(profile, name) == ["malformed-json"]
    message = fr.issues[0].message.lower()
    assert "depth" in message or "recursion" in message  # a depth limit (orjson's is 1,024 levels)
    assert fr.issues[0].line == (1 if shape == "json-document" else 4)
    assert fr.rows == (0 if shape == "json-document" else 6)
    assert_good_profiled(profile)


def test_a_csv_with_100000_columns_is_reported_and_the_others_profiled(tmp_path):
    d = folder_with_good(tmp_path)
    n = 100_000
    (d / "wide.csv").write_text(",".join(f"c{i}" for i in range(n)) + "\n" + ",".join("1" * n) + "\n")
    profile = scan(d)
    fr = profile.file("wide.csv")
    assert [(i.kind, i.line) for i in fr.issues] == [("too-wide", 1)] and fr.rows == 0
    assert "100,000 columns, more than 10,000 (--max-columns)" in fr.issues[0].message
    assert_good_profiled(profile)


def test_parquet_footers_claiming_absurd_sizes_are_reported(tmp_path):
    d = folder_with_good(tmp_path)
    for name, data in parquet_absurd_footers().items():
        (d / f"{name}.parquet").write_bytes(data)
    profile = scan(d)
    # source: apache/parquet-format: the 4 bytes before the closing "PAR1" give the footer length
    assert kinds(profile, "footer-length-4GiB.parquet") == ["unreadable"]
    assert "smaller than the size reported by footer" in profile.file("footer-length-4GiB.parquet").issues[0].message
    assert kinds(profile, "chunks-past-end-of-file.parquet") == ["unreadable"]
    rows = profile.file("rows-2^62.parquet")
    assert kinds(profile, "rows-2^62.parquet") == ["row-count"] and rows.rows == 12_345
    assert_good_profiled(profile)


# -- what a folder can hold besides files ---------------------------------------------------


def test_symlink_loops_dangling_links_fifos_and_devices_are_skipped_and_counted(tmp_path):
    d = folder_with_good(tmp_path)
    (d / "sub").mkdir()
    (d / "sub" / "in.jsonl").write_bytes(GOOD)
    os.symlink("..", d / "sub" / "up")  # a loop back to the root
    os.symlink(".", d / "here")  # a loop onto itself
    os.symlink("self.jsonl", d / "self.jsonl")  # a link to itself: ELOOP
    os.symlink("nowhere.jsonl", d / "dangling.jsonl")
    os.mkfifo(d / "pipe.jsonl")  # opening it would block forever
    os.symlink("/dev/zero", d / "zeros.jsonl")  # reading it would never end
    try:
        os.mknod(d / "dev.jsonl", 0o600 | stat.S_IFCHR, os.makedev(1, 3))  # a character device
        devices = ["dev.jsonl"]
    except (PermissionError, OSError):  # no CAP_MKNOD: the /dev/zero link covers devices
        devices = []
    profile = scan(d)
    assert [f.rel for f in profile.files] == ["good.jsonl", "sub/in.jsonl"]
    reasons = {s.rel: s.reason for s in profile.skipped}
    assert reasons["here"] == "symlink-loop" and reasons["sub/up"] == "symlink-loop"
    assert reasons["self.jsonl"] == "cannot stat: Too many levels of symbolic links"
    assert reasons["dangling.jsonl"] == "cannot stat: No such file or directory"
    for name in ["pipe.jsonl", *devices]:
        assert reasons[name] == "special", name
    assert reasons["zeros.jsonl"] == "link-outside-root"  # /dev/zero is outside the scanned folder
    assert profile.rows == 6
    # Following links out of the root, devices and loops are still never read.
    followed = scan_paths([d], read=ReadOptions(), jobs=1, follow_links=True)
    assert [f.rel for f in followed.files] == ["good.jsonl", "sub/in.jsonl"]
    assert {s.rel: s.reason for s in followed.skipped}["zeros.jsonl"] == "special"


def test_file_names_that_are_not_utf8_are_profiled_and_never_collide_silently(tmp_path):
    d = folder_with_good(tmp_path)
    raw = os.fsencode(d)
    os.mkdir(raw + b"/region=\xff")
    Path(os.fsdecode(raw + b"/region=\xff/caf\xe9.jsonl")).write_bytes(GOOD)
    Path(os.fsdecode(raw + b"/caf\xe9.jsonl")).write_bytes(GOOD)
    (d / "caf\\xe9.jsonl").write_bytes(GOOD)  # a real backslash: the same name once escaped
    profile = scan(d)
    rels = [f.rel for f in profile.files]
    assert "region=\\xff/caf\\xe9.jsonl" in rels
    assert profile.file("region=\\xff/caf\\xe9.jsonl").partitions == (("region", "\\xff"),)
    assert rels.count("caf\\xe9.jsonl") == 1
    assert [(s.rel, s.reason) for s in profile.skipped] == [("caf\\xe9.jsonl", "name-collision")]
    assert profile.rows == 9
    from driftline.results.report import dumps

    json.loads(dumps(profile))  # the report is valid JSON: no lone surrogates
