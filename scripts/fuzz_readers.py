"""Coverage-guided fuzzing of the readers with atheris (libFuzzer for Python).

Each input is one file: its first byte picks the format (JSON Lines, JSON, CSV, TSV, Parquet,
compressed variants, a name without suffix), the rest is the file's bytes. The file is read
with small limits and these invariants are checked; a broken one is a finding:

* read_file never raises and never reports an 'internal' (unexpected) error;
* the rows add up: FileResult.rows is the sum of its batches, each at most batch_rows;
* every problem names the file; the report of it is valid JSON; the terminal summary
  shows no raw control character;
* no exception is swallowed on the way (sys.unraisablehook: pyarrow calls back into Python);
* the process neither aborts (a native crash), hangs (-timeout) nor runs out of memory.

Findings are written to --findings (libFuzzer's crash-*/timeout-*/oom-* files). Run it
through scripts/fuzz, which builds .venv with the fuzz extra first.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import sys
import tempfile
from pathlib import Path

import atheris

with atheris.instrument_imports(include=["driftline"]):
    from driftline.core.files import FileResult
    from driftline.core.options import ReadOptions
    from driftline.emit.terminal import render
    from driftline.results.profile import Profile
    from driftline.results.report import dumps
    from driftline.sources.discover import discover
    from driftline.sources.readers import read_file

import pyarrow as pa
import pyarrow.parquet as pq
from rich.console import Console

SUFFIXES = [".jsonl", ".json", ".csv", ".tsv", ".parquet", ".jsonl.gz", ".csv.zst", ".jsonl.bz2", ".json.xz", ""]
OPTIONS = ReadOptions(batch_rows=7, max_record_bytes=64 * 1024, max_decompressed_bytes=8 * 2**20, max_columns=500)
CONTROL = {chr(c) for c in range(32) if chr(c) not in "\n"} | {"\x7f", "\x9b", "\u202e"}
WORK = Path(tempfile.mkdtemp(prefix="driftline-fuzz-"))


class Finding(AssertionError):
    """An invariant the readers broke on this input."""


SWALLOWED: list[str] = []


def _unraisable(info: object) -> None:
    SWALLOWED.append(f"{getattr(info, 'exc_type', None)}: {getattr(info, 'exc_value', None)}")


sys.unraisablehook = _unraisable


def check(data: bytes) -> FileResult | None:
    """Read one fuzz input; raise Finding when an invariant breaks. None: discovery skipped it."""
    fdp = atheris.FuzzedDataProvider(data)
    suffix = SUFFIXES[fdp.ConsumeIntInRange(0, len(SUFFIXES) - 1)]
    body = fdp.ConsumeBytes(fdp.remaining_bytes())
    path = WORK / f"input{suffix}"
    path.write_bytes(body)
    found = discover([str(path)])
    if not found.files:
        return None  # skipped (e.g. unknown format): counted, nothing to read
    ref = found.files[0]
    SWALLOWED.clear()
    res = read_file(ref, OPTIONS)
    if SWALLOWED:
        raise Finding(f"an exception was swallowed while reading: {SWALLOWED[0]}")
    if any(i.kind == "internal" for i in res.issues):
        raise Finding(f"internal error on {suffix or 'no suffix'}: {[i.message for i in res.issues]}")
    if res.rows != sum(o.rows for o in res.observations):
        raise Finding("rows do not add up to the batches")
    if any(o.rows > OPTIONS.batch_rows for o in res.observations):
        raise Finding("a batch larger than batch_rows")
    if any(i.file != ref.rel for i in res.issues):
        raise Finding("a problem that does not name its file")
    profile = Profile(found.root, (res,), found.skipped)
    json.loads(dumps(profile))
    out = io.StringIO()
    render(profile, Console(file=out, width=120, color_system=None, highlight=False))
    shown = set(out.getvalue())
    if shown & CONTROL:
        raise Finding(f"raw control characters on the terminal: {sorted(map(repr, shown & CONTROL))}")
    return res


def seeds(folder: Path) -> None:
    """A small starting corpus: one valid file per format, so mutations start from structure."""
    if any(folder.iterdir()):
        return
    import bz2
    import gzip
    import lzma

    import zstandard

    lines = b'{"id": 1, "pm25": 12.5, "tags": ["a"], "s": {"x": null}}\n{"id": "2", "ts": "1985-04-12T23:20:50.52Z"}\n'
    text = b'id,name,value\n1,"a, b",2.5\n2,"say ""hi""",\n3,"multi\nline",n/a\n'
    buf = io.BytesIO()
    table = pa.table(
        {
            "i": pa.array([1, None, 3], pa.int64()),
            "m": pa.array([[("k", 1)], None, []], pa.map_(pa.string(), pa.int64())),
            "l": pa.array([[1, 2], [], None], pa.list_(pa.int32())),
            "s": pa.array([{"a": 1, "b": "x"}, None, {"a": None, "b": "y"}]),
            "t": pa.array([1, 2, 3], pa.timestamp("ns")),
            "d": pa.array(["x", "y", "x"]).dictionary_encode(),
        }
    )
    pq.write_table(table, buf, row_group_size=2)
    files = {
        0: lines,
        1: b"[" + lines.replace(b"}\n{", b"},{").rstrip(b"\n") + b"]",
        2: text,
        3: text.replace(b",", b"\t"),
        4: buf.getvalue(),
        5: gzip.compress(lines, mtime=0),
        6: zstandard.ZstdCompressor().compress(text),
        7: bz2.compress(lines),
        8: lzma.compress(lines[:60]),
        9: lines,
    }
    for k, body in files.items():
        (folder / f"seed-{k}").write_bytes(bytes([k]) + body)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--seconds", type=int, default=120, help="total fuzzing time (default 120)")
    ap.add_argument("--corpus", type=Path, default=Path("fuzz-corpus"), help="corpus folder, kept between runs")
    ap.add_argument("--findings", type=Path, default=Path("fuzz-findings"), help="where crashing inputs go")
    ap.add_argument("--replay", type=Path, nargs="*", help="run these inputs once each (no fuzzing)")
    args, rest = ap.parse_known_args()
    if args.replay:
        for f in args.replay:
            check(f.read_bytes())
            print(f"ok {f}")
        return
    args.corpus.mkdir(parents=True, exist_ok=True)
    args.findings.mkdir(parents=True, exist_ok=True)
    seeds(args.corpus)
    flags = [
        f"-max_total_time={args.seconds}",
        "-timeout=20",
        "-rss_limit_mb=3072",
        "-max_len=65536",
        f"-artifact_prefix={args.findings}{os.sep}",
        "-print_final_stats=1",
        *rest,
        str(args.corpus),
    ]
    atheris.Setup([sys.argv[0], *flags], check)
    atheris.Fuzz()


if __name__ == "__main__":
    main()
