"""Faults and limits: each hostile file gets a clear per-file error while the others are profiled.

Every case scans a folder holding the hostile file next to a good one (`good.jsonl`, three
rows) and checks both: the problem is named for that file, and nothing else is lost.
"""

from __future__ import annotations

import bz2
import json
import lzma
import os
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
from hostile_inputs import SUFFIX, compress, jsonl_lines

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
