"""Faults and limits: each hostile file gets a clear per-file error while the others are profiled.

Every case scans a folder holding the hostile file next to a good one (`good.jsonl`, three
rows) and checks both: the problem is named for that file, and nothing else is lost.
"""

from __future__ import annotations

import bz2
import json
import lzma
import os
import subprocess
import sys
import tempfile
import zlib
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import zstandard

from driftline.profile import Profile
from driftline.scan import scan_paths
from driftline.sources.base import ReadOptions
from hostile_inputs import SUFFIX, bomb, compress, jsonl_lines

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
            out = {"files": {f.rel: [f.rows, [[i.kind, i.message] for i in f.issues]] for f in p.files},
                   "skipped": [[s.rel, s.reason] for s in p.skipped]}
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
            got = {"files": {f.rel: [f.rows, [[i.kind, i.message] for i in f.issues]] for f in p.files},
                   "skipped": [[s.rel, s.reason] for s in p.skipped]}
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
    res = subprocess.run([sys.executable, "-m", "driftline.cli", "scan", str(d), "--json", str(out), "-q",
                          "--jobs", "1", "--max-decompressed-bytes", str(2**20)],
                         capture_output=True, text=True, timeout=120)
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
