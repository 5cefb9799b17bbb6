"""Where apply writes, and how: partitions renamed into place, a marker that claims the folder.

Each output partition is one Parquet file per table (data, quarantine, rejected rows),
written under a hidden temporary name beside its final one and renamed over it when the
partition is complete: an interrupted run (SIGINT, SIGTERM, a full disk) leaves the earlier
partition whole and no partial one. The output folder carries MARKER_NAME; a non-empty
folder without it is refused, as is a folder inside an input or holding one.
"""

from __future__ import annotations

import contextlib
import decimal
import os
import signal
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import orjson
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from driftline.errors import OutputError

MARKER_NAME = "_driftline_apply.json"
MARKER_FORMAT = "driftline-apply"
RECONCILIATION_NAME = "_reconciliation.json"
QUARANTINE_DIR = "_quarantine"
REJECTED_DIR = "_rejected"
PART_NAME = "part-0.parquet"
_TMP = ".tmp-"
# Fixed writer options: the same batches give the same bytes (no time in Parquet's metadata).
_WRITER = {
    "compression": "zstd",
    "compression_level": 3,
    "write_statistics": True,
    "use_dictionary": True,
    "use_compliant_nested_type": False,  # a list's item keeps the name the schema gives it
}


def _inside(a: Path, b: Path) -> bool:
    return a == b or b in a.parents


def check_output(out: str | os.PathLike[str], inputs: Sequence[str | os.PathLike[str]]) -> Path:
    """The output folder, refused when it is an input, lies inside or around one, or is a
    non-empty folder driftline did not write (no marker)."""
    target = Path(os.path.abspath(out))
    real = Path(os.path.realpath(out))
    for given in inputs:
        src = Path(os.path.realpath(given))
        if _inside(real, src) or _inside(src, real):
            raise OutputError(
                f"refusing to write into {str(out)!r}: it is the input {str(given)!r}, inside it or around it; "
                "choose an output folder apart from the landing folder"
            )
    if target.exists() and not target.is_dir():
        raise OutputError(f"{str(out)!r} is not a folder")
    if target.is_dir() and any(target.iterdir()) and not (target / MARKER_NAME).is_file():
        raise OutputError(
            f"refusing to write into {str(out)!r}: the folder is not empty and was not written by driftline apply "
            f"(it has no {MARKER_NAME}); choose an empty or new folder"
        )
    if (target / MARKER_NAME).is_file():
        try:
            doc = orjson.loads((target / MARKER_NAME).read_bytes())
        except (OSError, orjson.JSONDecodeError):
            doc = None
        if not isinstance(doc, dict) or doc.get("format") != MARKER_FORMAT:
            raise OutputError(f"{str(target / MARKER_NAME)!r} is not a driftline apply marker; refusing to write")
    return target


def json_bytes(doc: object) -> bytes:
    """Indented JSON in the document's own key order ("format" first: core/marker.py)."""
    return orjson.dumps(doc, option=orjson.OPT_INDENT_2) + b"\n"


def replace_file(path: Path, payload: bytes) -> None:
    """A small file written whole under a temporary name, then renamed over path."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}{_TMP}{os.getpid()}")
    try:
        with open(tmp, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)


def remove_leftovers(root: Path) -> None:
    """Temporary files a killed run left behind (hidden, named .<name>.tmp-<pid>)."""
    for p in root.rglob(f".*{_TMP}*"):
        with contextlib.suppress(OSError):
            p.unlink()


def _blank(t: pa.DataType) -> Any:
    """The value a required child holds where its parent is null (never read: the parent is null)."""
    if pa.types.is_struct(t):
        return {t.field(i).name: _blank(t.field(i).type) for i in range(t.num_fields)}
    if pa.types.is_list(t) or pa.types.is_map(t):
        return []
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        return ""
    if pa.types.is_binary(t) or pa.types.is_large_binary(t):
        return b""
    if pa.types.is_boolean(t):
        return False
    if pa.types.is_floating(t):
        return 0.0
    if pa.types.is_decimal(t):
        return decimal.Decimal(0)
    return None if pa.types.is_null(t) else 0


def _storable(arr: pa.Array) -> pa.Array:
    """arr with a placeholder, never a null, in each required struct field under a null parent:
    Parquet writers refuse a null in a non-nullable column even where its parent is null."""
    t = arr.type
    mask = pc.is_null(arr) if arr.null_count else None
    if pa.types.is_struct(t) and t.num_fields:
        valid = pc.is_valid(arr)
        kids = []
        for i in range(t.num_fields):
            f, child = t.field(i), _storable(arr.field(i))
            if not f.nullable and child.null_count:
                blank = pa.array([_blank(f.type)], f.type).take(pa.array([0] * len(arr), pa.int64()))
                child = pc.if_else(valid, child, blank)
            kids.append(child)
        return pa.StructArray.from_arrays(kids, fields=list(t), mask=mask)
    if pa.types.is_list(t):
        return pa.ListArray.from_arrays(arr.offsets, _storable(arr.values), type=t, mask=mask)
    if pa.types.is_map(t):
        return pa.MapArray.from_arrays(arr.offsets, _storable(arr.keys), _storable(arr.items), type=t, mask=mask)
    return arr


def storable(batch: pa.RecordBatch) -> pa.RecordBatch:
    """The batch as a Parquet writer takes it (the same values wherever a parent is not null)."""
    return pa.RecordBatch.from_arrays([_storable(c) for c in batch.columns], schema=batch.schema)


class Staged:
    """One Parquet file written batch by batch under a temporary name; commit() renames it into place."""

    def __init__(self, final: Path, schema: pa.Schema) -> None:
        self.final = final
        final.parent.mkdir(parents=True, exist_ok=True)
        self.tmp = final.with_name(f".{final.name}{_TMP}{os.getpid()}")
        self.writer: pq.ParquetWriter | None = pq.ParquetWriter(str(self.tmp), schema, **_WRITER)
        self.rows = 0

    def write(self, batch: pa.RecordBatch) -> None:
        if batch.num_rows and self.writer is not None:
            self.writer.write_batch(storable(batch))
            self.rows += batch.num_rows

    def close(self) -> None:
        if self.writer is not None:
            self.writer.close()
            self.writer = None

    def commit(self) -> None:
        self.close()
        os.replace(self.tmp, self.final)

    def discard(self) -> None:
        self.close()
        with contextlib.suppress(FileNotFoundError):
            os.unlink(self.tmp)


@contextlib.contextmanager
def staged(files: Sequence[tuple[Path, pa.Schema]]) -> Iterator[list[Staged]]:
    """Several Staged files of one partition: all renamed into place when the block ends well,
    all discarded when it raises (a KeyboardInterrupt from SIGINT or SIGTERM too)."""
    opened: list[Staged] = []
    try:
        for path, schema in files:
            opened.append(Staged(path, schema))
        yield opened
        for s in opened:
            s.close()
        for s in opened:
            s.commit()
    except BaseException:
        for s in opened:
            s.discard()
        raise


@contextlib.contextmanager
def terminate_as_interrupt() -> Iterator[None]:
    """SIGTERM takes the clean-up path of Ctrl-C, so temporary files are removed."""

    def raise_interrupt(signum: int, frame: object) -> None:
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, raise_interrupt)
    except ValueError:  # not the main thread
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def remove_partition(root: Path, partition: str) -> None:
    """A partition's files (data, quarantine, rejected rows), and its folders once empty."""
    for base in (root, root / QUARANTINE_DIR, root / REJECTED_DIR):
        folder = base / partition if partition else base
        with contextlib.suppress(FileNotFoundError):
            (folder / PART_NAME).unlink()
        while folder != base and folder.is_dir() and not any(folder.iterdir()):
            folder.rmdir()
            folder = folder.parent
