"""apply's output on an object store (`--out s3://bucket/prefix`), through pyarrow.fs.

An object store has no rename: a copy and a delete are two requests, and a reader between
them sees both objects. What it does give is an atomic PUT: an object appears only when its
upload completes (a multipart upload too, at CompleteMultipartUpload), whole, and replaces
the previous version of the key at once; an upload cut short leaves no object. So each
partition's three files are written whole to a temporary local folder with the local writer
(the same bytes as a local run), then each is uploaded under its final key, and the
temporary folder removed. An interrupted run leaves every earlier object as it was and no
partial object; a partition whose data file was replaced but whose quarantine was not yet
is possible (three objects are not one transaction), and the marker, written last, still
names the run before until the run completes.

The marker claims the prefix as locally: a prefix that holds objects and no marker is refused.
"""

from __future__ import annotations

import contextlib
import shutil
import signal
import tempfile
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import orjson

from driftline.applying.output import MARKER_FORMAT, MARKER_NAME, PART_NAME, QUARANTINE_DIR, REJECTED_DIR
from driftline.core.options import StorageOptions
from driftline.errors import OutputError
from driftline.sources.remote import explain, filesystem, is_url, split_url

_CHUNK = 1 << 20


@contextlib.contextmanager
def signals_deferred() -> Iterator[None]:
    """SIGINT and SIGTERM held until the block ends, then acted on (KeyboardInterrupt).

    pyarrow's output stream completes its upload when it is closed, and closing is all a
    `with` block or the stream's destructor does when an exception leaves it: an interrupt
    between opening and the last write would complete an object holding part of the file
    (or none of it). Held here, the signal waits until the object is whole. Only the main
    thread receives signals in Python; elsewhere (a dask worker's thread) nothing changes.
    """
    caught: list[int] = []

    def hold(signum: int, frame: object) -> None:
        caught.append(signum)

    try:
        previous = {sig: signal.signal(sig, hold) for sig in (signal.SIGINT, signal.SIGTERM)}
    except ValueError:  # not the main thread
        yield
        return
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    if caught:
        raise KeyboardInterrupt


@dataclass(frozen=True)
class RemoteOut:
    """An s3:// output prefix and the settings to reach it (picklable: it travels to workers)."""

    bucket: str
    prefix: str
    storage: StorageOptions

    @classmethod
    def parse(cls, url: str, storage: StorageOptions) -> RemoteOut:
        bucket, prefix = split_url(url)
        return cls(bucket, prefix, storage)

    @property
    def url(self) -> str:
        return f"s3://{self.bucket}/{self.prefix}".rstrip("/")

    def path(self, rel: str) -> str:
        """The pyarrow.fs path (bucket/key) of a file relative to the prefix."""
        return "/".join(p for p in (self.bucket, self.prefix, rel) if p)

    def _fs(self) -> Any:
        return filesystem(self.storage)

    def _fail(self, what: str, rel: str, exc: BaseException) -> OutputError:
        return OutputError(f"cannot {what} s3://{self.path(rel)}: {explain(exc, self.storage)}")

    def read(self, rel: str) -> bytes | None:
        """A small object's bytes, or None when there is no such object."""
        try:
            with self._fs().open_input_stream(self.path(rel), compression=None) as fh:
                return bytes(fh.read())
        except FileNotFoundError:
            return None
        except OSError as exc:
            raise self._fail("read", rel, exc) from None

    def exists(self, rel: str) -> bool:
        from pyarrow import fs as pafs

        try:
            return bool(self._fs().get_file_info(self.path(rel)).type == pafs.FileType.File)
        except OSError as exc:
            raise self._fail("look up", rel, exc) from None

    def put(self, rel: str, payload: bytes) -> None:
        """A whole object in one upload: readers see the old object or this one, never a part."""
        try:
            with signals_deferred(), self._fs().open_output_stream(self.path(rel), compression=None) as fh:
                fh.write(payload)
        except OSError as exc:
            raise self._fail("write", rel, exc) from None

    def upload(self, local: Path, rel: str) -> None:
        """A local file uploaded under its final key (the object appears when the upload completes).
        A failure is an OSError naming the object, for the caller to say which partition it cut."""
        try:
            with (
                signals_deferred(),
                open(local, "rb") as src,
                self._fs().open_output_stream(self.path(rel), compression=None) as fh,
            ):
                for block in iter(lambda: src.read(_CHUNK), b""):
                    fh.write(block)
        except OSError as exc:
            raise OSError(exc.errno, explain(exc, self.storage), f"s3://{self.path(rel)}") from None

    def delete(self, rel: str) -> None:
        try:
            self._fs().delete_file(self.path(rel))
        except FileNotFoundError:
            pass
        except OSError as exc:
            raise self._fail("delete", rel, exc) from None

    def holds_objects(self) -> bool:
        """Whether any object lies below the prefix."""
        return self._holds_files("")

    def upload_tree(self, local: Path) -> None:
        """Every file below a local folder uploaded under the same relative key, in sorted order."""
        for path in sorted(p for p in local.rglob("*") if p.is_file()):
            self.upload(path, path.relative_to(local).as_posix())

    def remove_partition(self, partition: str) -> None:
        """A partition's three objects (data, quarantine, rejected rows), then the folder objects
        pyarrow.fs leaves in their place (an empty 'folder/' key keeps a folder a deleted file
        leaves empty), as locally the folders once empty."""
        for base in ("", QUARANTINE_DIR, REJECTED_DIR):
            self.delete("/".join(p for p in (base, partition, PART_NAME) if p))
            folder = partition
            while folder:
                where = "/".join(p for p in (base, folder) if p)
                if self._holds_files(where):
                    break
                try:
                    self._fs().delete_dir(self.path(where))
                except FileNotFoundError:
                    pass
                except OSError as exc:
                    raise self._fail("delete", where, exc) from None
                folder = folder.rpartition("/")[0]

    def _holds_files(self, rel: str) -> bool:
        from pyarrow import fs as pafs

        try:
            infos = self._fs().get_file_info(pafs.FileSelector(self.path(rel), recursive=True, allow_not_found=True))
        except OSError as exc:
            raise self._fail("list", rel, exc) from None
        return any(i.type == pafs.FileType.File for i in infos)


def check_remote_output(out: str, inputs: Sequence[str], storage: StorageOptions) -> RemoteOut:
    """The output prefix, refused when it is an input's prefix, lies inside or around one, or
    holds objects and no apply marker."""
    dest = RemoteOut.parse(out, storage)
    for given in inputs:
        if not is_url(given):
            continue
        bucket, prefix = split_url(given)
        a, b = dest.prefix + "/", prefix + "/"
        if bucket == dest.bucket and (a.startswith(b) or b.startswith(a) or not dest.prefix or not prefix):
            raise OutputError(
                f"refusing to write into {out!r}: it is the input {given!r}, inside it or around it; "
                "choose an output prefix apart from the landing prefix"
            )
    marker = dest.read(MARKER_NAME)
    if marker is None:
        if dest.holds_objects():
            raise OutputError(
                f"refusing to write into {out!r}: the prefix holds objects and was not written by driftline apply "
                f"(it has no {MARKER_NAME}); choose an empty or new prefix"
            )
        return dest
    try:
        doc = orjson.loads(marker)
    except orjson.JSONDecodeError:
        doc = None
    if not isinstance(doc, dict) or doc.get("format") != MARKER_FORMAT:
        raise OutputError(f"s3://{dest.path(MARKER_NAME)} is not a driftline apply marker; refusing to write")
    return dest


@contextlib.contextmanager
def local_stage() -> Iterator[Path]:
    """A temporary local folder that holds files until they are uploaded, removed at the end."""
    folder = Path(tempfile.mkdtemp(prefix="driftline-apply-"))
    try:
        yield folder
    finally:
        shutil.rmtree(folder, ignore_errors=True)
