"""Format and compression detection, and opening a file as a decompressed byte stream."""

from __future__ import annotations

import bz2
import io
import lzma
import zlib
from typing import BinaryIO

from driftline.sources.base import RATIO_FLOOR_BYTES

COMPRESSION_BY_SUFFIX = {".gz": "gzip", ".gzip": "gzip", ".bz2": "bz2", ".zst": "zstd", ".zstd": "zstd", ".xz": "xz"}
FORMAT_BY_SUFFIX = {
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
    ".jsonlines": "jsonl",
    ".json": "json",
    ".csv": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".parq": "parquet",
}
# Magic numbers of the compressed containers, for files whose name says nothing.
_MAGIC = ((b"\x1f\x8b", "gzip"), (b"BZh", "bz2"), (b"\x28\xb5\x2f\xfd", "zstd"), (b"\xfd7zXZ\x00", "xz"))


def _suffixes(path: str) -> list[str]:
    name = path.replace("\\", "/").rsplit("/", 1)[-1].lower()
    return ["." + s for s in name.split(".")[1:]]


def detect_compression(path: str) -> str | None:
    """Compression from the last suffix, else from the file's magic number."""
    sfx = _suffixes(path)
    if sfx and sfx[-1] in COMPRESSION_BY_SUFFIX:
        return COMPRESSION_BY_SUFFIX[sfx[-1]]
    head = _head(path, 8)
    for magic, name in _MAGIC:
        if head.startswith(magic):
            return name
    return None


def detect_format(path: str) -> str | None:
    """Format from the suffix before any compression suffix, else by sniffing the first bytes."""
    sfx = _suffixes(path)
    while sfx and sfx[-1] in COMPRESSION_BY_SUFFIX:
        sfx.pop()
    if sfx and sfx[-1] in FORMAT_BY_SUFFIX:
        return FORMAT_BY_SUFFIX[sfx[-1]]
    return sniff_format(path)


def sniff_format(path: str) -> str | None:
    """Guess the format of a file whose name says nothing, from its first 4 KiB."""
    raw = _head(path, 4)
    if raw in (b"PAR1", b"PARE"):  # PARE: a Parquet file with an encrypted footer
        return "parquet"
    try:
        with open_stream(path, detect_compression(path), limit=None) as stream:
            head = stream.read(4096)
    except decode_errors():
        return None
    text = head.lstrip(b"\xef\xbb\xbf").lstrip()
    if text.startswith(b"{"):
        return "jsonl"
    if text.startswith(b"["):
        return "json"
    if b"\x00" in head or not text:
        return None
    first = text.split(b"\n", 1)[0]
    if b"\t" in first:
        return "tsv"
    if b"," in first or b";" in first or b"|" in first:
        return "csv"
    return None


def _head(path: str, n: int) -> bytes:
    try:
        with open(path, "rb") as fh:
            return fh.read(n)
    except OSError:
        return b""


class LimitExceeded(ValueError):
    """More decompressed bytes than the limit allows (a decompression bomb, or a too-large file)."""


# What a decoder raises on corrupt input; none of them may escape a reader or discovery.
def decode_errors() -> tuple[type[BaseException], ...]:
    import zstandard

    return (OSError, EOFError, ValueError, zlib.error, lzma.LZMAError, zstandard.ZstdError)


class _Limited(io.RawIOBase):
    """Counts decompressed bytes and stops at a limit or a ratio, so a bomb cannot run on.

    The ratio is bytes out over bytes taken from the file, judged only once more than
    RATIO_FLOOR_BYTES came out, so small files that compress well are never stopped.
    """

    def __init__(self, inner: BinaryIO, raw: BinaryIO, limit: int | None, ratio: float | None) -> None:
        self._inner, self._raw = inner, raw
        self._limit, self._ratio = limit, ratio
        self.count = 0

    def readable(self) -> bool:
        return True

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        n = self._inner.readinto(buf) or 0  # type: ignore[attr-defined]
        self.count += n
        if self._limit is not None and self.count > self._limit:
            raise LimitExceeded(f"more than {self._limit:,} decompressed bytes (--max-decompressed-bytes)")
        if self._ratio is not None and self.count > RATIO_FLOOR_BYTES and self._raw is not self._inner:
            taken = max(self._raw.tell(), 1)
            if self.count > self._ratio * taken:
                raise LimitExceeded(
                    f"{self.count:,} bytes decompressed from {taken:,}, a ratio over {self._ratio:,g}:1 "
                    "(--max-decompression-ratio)"
                )
        return n

    def close(self) -> None:
        try:
            self._inner.close()
        finally:
            self._raw.close()
            super().close()


_GZIP_IN = 64 * 1024  # compressed bytes fed to zlib at a time


class _GzipStream(io.RawIOBase):
    """Streaming gzip (all members) that hands out every byte decoded before a truncation.

    gzip.GzipFile raises on a cut-off file without returning the data it had decoded in
    that read; here the decoded bytes come first and the EOFError only after them. Each
    call decodes at most len(buf) bytes (max_length), so a bomb never sits in memory whole.
    """

    def __init__(self, raw: BinaryIO) -> None:
        self._raw = raw
        self._dec = zlib.decompressobj(wbits=31)
        self._pending = b""
        self._done = False

    def readable(self) -> bool:
        return True

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        want = max(len(buf), 1)
        while not self._pending and not self._done:
            if self._dec.eof:  # a member ended: another one may follow (RFC 1952 section 2.2)
                rest = self._dec.unused_data or self._raw.read(_GZIP_IN)
                if not rest:
                    self._done = True
                    break
                self._dec = zlib.decompressobj(wbits=31)
                self._pending = self._dec.decompress(rest, want)
                continue
            data = self._dec.unconsumed_tail or self._raw.read(_GZIP_IN)
            if not data:
                self._done = True
                raise EOFError("compressed file ended before the end-of-stream marker was reached")
            self._pending = self._dec.decompress(data, want)
        n = min(len(buf), len(self._pending))
        buf[:n] = self._pending[:n]
        self._pending = self._pending[n:]
        return n


def _decoder(raw: BinaryIO, compression: str | None) -> BinaryIO:
    if compression is None:
        return raw
    if compression == "gzip":
        return _GzipStream(raw)  # type: ignore[return-value]
    if compression == "bz2":
        return bz2.BZ2File(raw, mode="rb")  # type: ignore[return-value]
    if compression == "xz":
        return lzma.LZMAFile(raw, mode="rb")  # type: ignore[return-value]
    if compression == "zstd":
        import zstandard

        return zstandard.ZstdDecompressor().stream_reader(raw, closefd=False)  # type: ignore[no-any-return]
    raise ValueError(f"unknown compression {compression!r}")  # pragma: no cover - guarded by detect_compression


def open_stream(path: str, compression: str | None, *, limit: int | None, ratio: float | None = None) -> BinaryIO:
    """Open path for reading as decompressed bytes, never for writing; the caller closes it.

    limit caps the bytes that come out; ratio caps bytes out per byte read from the file.
    """
    raw: BinaryIO = open(path, "rb")  # noqa: SIM115 - closed with the returned stream
    try:
        stream = _decoder(raw, compression)
    except BaseException:
        raw.close()
        raise
    if compression is None and limit is None:
        return stream
    return io.BufferedReader(_Limited(stream, raw, limit, ratio), buffer_size=1 << 20)  # type: ignore[return-value]
