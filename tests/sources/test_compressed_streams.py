"""Compressed streams are judged as the reference tools judge them.

Multi-member, padded and concatenated files that `gzip -t`, `bzip2 -t`, `xz -t` and `zstd -t`
accept are complete; what they reject is reported; what they ignore with a warning
(trailing garbage after gzip members or bzip2 streams) is a warning, the data before it whole.

Each case carries the verdict the tool gives (checked against the installed tool below) and
the rows, counted from the tool's own decompressed output (`-dc`).
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import shutil
import subprocess
from pathlib import Path

import pytest
import zstandard

from driftline.core.options import ReadOptions
from driftline.sources.discover import discover
from driftline.sources.readers import read_file

HEAD = b"a,b\n1,2\n3,4\n"  # 2 rows
MORE = b"5,6\n7,8\n"  # 2 more rows, no header: the second stream continues the first
BIG = [b"".join(b"%d,%d\n" % (i, k * i) for i in range(40_000)) for k in range(3)]  # ~0.4 MB each


def gz(data: bytes) -> bytes:
    return gzip.compress(data, mtime=0)


def zst(data: bytes) -> bytes:
    return zstandard.ZstdCompressor().compress(data)


def skippable(payload: bytes, nibble: int = 0) -> bytes:
    # source: RFC 8878 section 3.1.2: magic 0x184D2A5?, 4-byte little-endian size, user data
    return bytes([0x50 | nibble, 0x2A, 0x4D, 0x18]) + len(payload).to_bytes(4, "little") + payload


def bad_crc(member: bytes) -> bytes:
    # source: RFC 1952 section 2.3: CRC32 then ISIZE end the member; flip a bit of the CRC
    return member[:-8] + bytes([member[-8] ^ 1]) + member[-7:]


# (name, codec suffix, file bytes, verdict of the tool: 'ok' | 'warn' | 'error', rows; or rows as (ours, the tool's))
CASES = [
    # gzip: source: RFC 1952 section 2.2 (a file is a series of members); gzip(1) ADVANCED USAGE
    ("gz-one", "gz", gz(HEAD), "ok", 2),
    ("gz-members", "gz", gz(HEAD) + gz(MORE), "ok", 4),
    ("gz-zeros-after", "gz", gz(HEAD) + bytes(100), "ok", 2),  # gzip(1) CAVEATS: tape block padding
    ("gz-three-zeros", "gz", gz(HEAD) + bytes(3), "ok", 2),
    ("gz-members-zeros", "gz", gz(HEAD) + gz(MORE) + bytes(1000), "ok", 4),
    ("gz-big-members", "gz", gz(b"a,b\n" + BIG[0]) + gz(BIG[1]) + gz(BIG[2]) + bytes(512), "ok", 120_000),
    ("gz-garbage", "gz", gz(HEAD) + b"garbage", "warn", 2),  # "decompression OK, trailing garbage ignored"
    ("gz-zeros-then-member", "gz", gz(HEAD) + bytes(10) + gz(MORE), "warn", 2),  # gzip ignores the member
    ("gz-one-byte-after", "gz", gz(HEAD) + b"\x1f", "error", 2),  # "unexpected end of file"
    ("gz-magic-only-after", "gz", gz(HEAD) + b"\x1f\x8b", "error", 2),
    # gzip -dc writes the member's 2 rows before it checks the CRC (then exits 1); zlib checks
    # the CRC in the same call that decodes them and keeps nothing of that call
    ("gz-bad-crc-second", "gz", gz(HEAD) + bad_crc(gz(MORE)), "error", (2, 4)),
    ("gz-empty", "gz", b"", "error", 0),
    # bzip2: concatenated streams; bzip2 -t exits 0 on trailing garbage, with a warning
    ("bz2-one", "bz2", bz2.compress(HEAD), "ok", 2),
    ("bz2-streams", "bz2", bz2.compress(HEAD) + bz2.compress(MORE), "ok", 4),
    (
        "bz2-big-streams",
        "bz2",
        bz2.compress(b"a,b\n" + BIG[0]) + bz2.compress(BIG[1]) + bz2.compress(BIG[2]),
        "ok",
        120_000,
    ),
    ("bz2-garbage", "bz2", bz2.compress(HEAD) + b"garbage", "warn", 2),  # "trailing garbage after EOF ignored"
    ("bz2-zeros", "bz2", bz2.compress(HEAD) + bytes(8), "warn", 2),
    ("bz2-not-a-block-size", "bz2", bz2.compress(HEAD) + b"BZh0xxxx", "warn", 2),
    ("bz2-cut-magic", "bz2", bz2.compress(HEAD) + b"BZ", "error", 2),  # "file ends unexpectedly"
    ("bz2-magic-only", "bz2", bz2.compress(HEAD) + b"BZh9", "error", 2),
    ("bz2-empty", "bz2", b"", "error", 0),
    # xz: source: .xz file format 1.2.0 section 2.2 (Stream Padding: null bytes, a multiple of
    # four, between and after streams); xz(1) "Concatenation and padding with .xz files"
    ("xz-one", "xz", lzma.compress(HEAD), "ok", 2),
    ("xz-streams", "xz", lzma.compress(HEAD) + lzma.compress(MORE), "ok", 4),
    ("xz-padding", "xz", lzma.compress(HEAD) + bytes(4), "ok", 2),
    ("xz-padding-between-and-after", "xz", lzma.compress(HEAD) + bytes(8) + lzma.compress(MORE) + bytes(12), "ok", 4),
    (
        "xz-big-padded",
        "xz",
        lzma.compress(b"a,b\n" + BIG[0])
        + bytes(65_536 - 4)
        + lzma.compress(BIG[1])
        + bytes(4)
        + lzma.compress(BIG[2])
        + bytes(512),
        "ok",
        120_000,
    ),
    ("xz-padding-3", "xz", lzma.compress(HEAD) + bytes(3), "error", 2),
    ("xz-padding-6", "xz", lzma.compress(HEAD) + bytes(6), "error", 2),
    ("xz-garbage", "xz", lzma.compress(HEAD) + b"garb", "error", 2),
    ("xz-padding-then-garbage", "xz", lzma.compress(HEAD) + bytes(4) + b"abcd", "error", 2),
    ("xz-padding-first", "xz", bytes(4) + lzma.compress(HEAD), "error", 0),  # "File format not recognized"
    ("xz-empty", "xz", b"", "error", 0),
    # zstd: source: RFC 8878 section 3.1 (frames one after another; skippable frames 3.1.2)
    ("zst-one", "zst", zst(HEAD), "ok", 2),
    ("zst-frames", "zst", zst(HEAD) + zst(MORE), "ok", 4),
    ("zst-skippable", "zst", skippable(b"abcd") + zst(HEAD) + skippable(b"xy", 0xE) + zst(MORE), "ok", 4),
    (
        "zst-big-frames",
        "zst",
        zst(b"a,b\n" + BIG[0]) + skippable(bytes(70_000)) + zst(BIG[1]) + zst(BIG[2]),
        "ok",
        120_000,
    ),
    ("zst-zeros", "zst", zst(HEAD) + bytes(4), "error", 2),  # "unsupported format"
    ("zst-garbage", "zst", zst(HEAD) + b"garbage", "error", 2),
    ("zst-cut-skippable", "zst", zst(HEAD) + skippable(b"abcd")[:-2], "error", 2),
    ("zst-cut-magic", "zst", zst(HEAD) + b"\x50\x2a\x4d", "error", 2),
    ("zst-empty", "zst", b"", "error", 0),
]
IDS = [c[0] for c in CASES]
TOOLS = {"gz": "gzip", "bz2": "bzip2", "xz": "xz", "zst": "zstd"}


def ours(tmp_path: Path, name: str, suffix: str, data: bytes) -> tuple[str, int, list[str]]:
    path = tmp_path / f"{name}.csv.{suffix}"
    path.write_bytes(data)
    res = read_file(discover([str(path)]).files[0], ReadOptions(batch_rows=50_000))
    kinds = [i.kind for i in res.issues if i.kind != "empty"]
    if res.errors:
        verdict = "error"
    elif any(i.kind == "trailing-data" for i in res.issues):
        verdict = "warn"
    else:
        verdict = "ok"
    assert res.complete is (verdict != "error")
    return verdict, res.rows, kinds


def tool_verdict(tool: str, path: Path) -> str:
    res = subprocess.run([tool, "-t", str(path)], capture_output=True, text=True, timeout=60)
    if tool == "gzip":  # gzip(1): exit status 2 is a warning
        return {0: "ok", 2: "warn"}.get(res.returncode, "error")
    if tool == "bzip2":  # bzip2(1): 0 ok (trailing garbage only warned about), 2 corrupt
        if res.returncode == 0:
            return "warn" if "trailing garbage" in res.stderr else "ok"
        return "error"
    return "ok" if res.returncode == 0 else "error"  # xz(1), zstd(1): 1 is an error


@pytest.mark.parametrize(("name", "suffix", "data", "verdict", "rows"), CASES, ids=IDS)
def test_our_verdict_and_rows(tmp_path, name, suffix, data, verdict, rows):
    got, got_rows, kinds = ours(tmp_path, name, suffix, data)
    assert (got, got_rows) == (verdict, rows[0] if isinstance(rows, tuple) else rows)
    expected_kinds = {"ok": [], "warn": ["trailing-data"]}.get(verdict)
    if expected_kinds is not None:
        assert kinds == expected_kinds
    else:
        assert len(kinds) == 1 and kinds[0] in ("truncated", "corrupt", "unreadable")


@pytest.mark.parametrize(("name", "suffix", "data", "verdict", "rows"), CASES, ids=IDS)
def test_the_reference_tool_gives_the_same_verdict_and_rows(tmp_path, name, suffix, data, verdict, rows):
    tool = TOOLS[suffix]
    if shutil.which(tool) is None:
        pytest.skip(f"{tool} is not installed")
    path = tmp_path / f"{name}.{suffix}"
    path.write_bytes(data)
    assert tool_verdict(tool, path) == verdict, f"source: `{tool} -t`"
    out = subprocess.run([tool, "-dc", str(path)], capture_output=True, timeout=60).stdout
    # the rows are the whole lines the tool decodes (less the header), errors included
    assert max(out.count(b"\n") - 1, 0) == (rows[1] if isinstance(rows, tuple) else rows), f"source: `{tool} -dc`"


@pytest.mark.parametrize(
    ("name", "suffix", "data", "verdict", "rows"),
    [c for c in CASES if c[3] == "ok" and c[1] != "zst"],
    ids=[c[0] for c in CASES if c[3] == "ok" and c[1] != "zst"],
)
def test_pythons_modules_decode_the_accepted_files_alike(tmp_path, name, suffix, data, verdict, rows):
    # source: CPython's gzip, bz2 and lzma modules, a second reference for the files all accept.
    # (They part from the tools elsewhere: lzma rejects Stream Padding, see below, and
    # gzip.decompress reads a member after zero bytes, which gzip ignores as garbage.)
    if suffix == "xz" and "padd" in name:
        pytest.skip("CPython's lzma does not take Stream Padding; xz -t is the reference here")
    module = {"gz": gzip, "bz2": bz2, "xz": lzma}[suffix]
    assert module.decompress(data).count(b"\n") - 1 == rows


def test_pythons_lzma_misjudges_padding_and_we_do_not(tmp_path):
    # Why the reading is our own: CPython's lzma (and LZMAFile, which
    # the reader used) calls padding at the end a truncation, and takes padding followed by
    # another stream as trailing garbage: it stops there without an error, and the stream is lost.
    padded = lzma.compress(HEAD) + bytes(4)
    with pytest.raises(lzma.LZMAError, match="ended before the end-of-stream marker"):
        lzma.decompress(padded)  # source: CPython lzma
    assert ours(tmp_path, "p", "xz", padded)[:2] == ("ok", 2)
    between = lzma.compress(HEAD) + bytes(8) + lzma.compress(MORE)
    assert lzma.decompress(between) == HEAD  # source: CPython lzma
    assert ours(tmp_path, "b", "xz", between)[:2] == ("ok", 4)


def test_the_warning_names_the_ignored_bytes(tmp_path):
    path = tmp_path / "t.csv.gz"
    member = gz(HEAD)
    path.write_bytes(member + b"garbage")
    res = read_file(discover([str(path)]).files[0], ReadOptions())
    (issue,) = res.issues
    assert (issue.kind, issue.severity) == ("trailing-data", "warning")
    assert issue.message == (
        f"7 bytes from byte {len(member)} on are not a gzip member: ignored, as `gzip -t` "
        "ignores trailing garbage; the data before them is complete"
    )


def test_a_padding_error_names_its_length_and_offset(tmp_path):
    stream = lzma.compress(HEAD)
    path = tmp_path / "t.csv.xz"
    path.write_bytes(stream + bytes(6))
    res = read_file(discover([str(path)]).files[0], ReadOptions())
    (issue,) = res.issues
    assert (issue.kind, issue.severity, res.rows) == ("corrupt", "error", 2)
    assert issue.message == (
        f"xz stream padding of 6 null bytes at byte {len(stream)} is not a multiple of four "
        "(.xz file format, section 2.2); xz -t rejects it; rows before it were profiled"
    )
