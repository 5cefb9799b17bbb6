"""Format and compression detection, and opening a file as a decompressed byte stream."""

from __future__ import annotations

import bz2
import io
import lzma
import zlib
from collections.abc import Callable
from typing import Any, BinaryIO

from driftline.sources.base import RATIO_FLOOR_BYTES
from driftline.sources.encoding import decide

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
    enc = decide(head, whole=len(head) < 4096, fallback=False)
    if not enc.is_utf8:  # UTF-16/32 (sources/encoding.py): sniff the text, not its NUL bytes
        head = head[enc.bom :].decode(enc.name, "ignore").encode()
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


class CountingRaw(io.RawIOBase):
    """Any object with read(n) as a Python raw stream, counting the bytes it passed on.

    Decoders (gzip, bz2, lzma, zstd) and buffered readers can then wrap it.
    """

    def __init__(self, inner: Any) -> None:
        self._inner = inner
        self.count = 0

    def readable(self) -> bool:
        return True

    def _read(self, n: int) -> bytes:
        return self._inner.read(n)

    def readinto(self, buf: Any) -> int:
        data = self._read(len(buf))
        n = len(data)
        buf[:n] = data
        self.count += n
        return n

    def close(self) -> None:
        try:
            self._inner.close()
        finally:
            super().close()


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

    def __init__(self, inner: BinaryIO, raw: BinaryIO, limit: int | None, ratio: float | None,
                 taken: Callable[[], int] | None = None) -> None:
        self._inner, self._raw = inner, raw
        self._limit, self._ratio = limit, ratio
        self._taken = taken or raw.tell  # bytes read from the file so far
        self.count = 0
        self._stop: LimitExceeded | None = None  # raised on the read after the one that reached a limit

    def readable(self) -> bool:
        return True

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        # The bytes up to a limit are handed out first and the error comes on the next read,
        # so every whole record before the limit is kept.
        if self._stop is not None:
            raise self._stop
        # readinto1: one decode step. BZ2File/LZMAFile.readinto fill the whole buffer and,
        # when the file is cut short, raise and drop the bytes already decoded in that call.
        fill = getattr(self._inner, "readinto1", None) or self._inner.readinto  # type: ignore[attr-defined]
        n = fill(buf) or 0
        self.count += n
        if self._limit is not None and self.count > self._limit:
            n -= self.count - self._limit
            self.count = self._limit
            self._stop = LimitExceeded(f"more than {self._limit:,} decompressed bytes (--max-decompressed-bytes)")
        elif self._ratio is not None and self.count > RATIO_FLOOR_BYTES and self._raw is not self._inner:
            taken = max(self._taken(), 1)
            if self.count > self._ratio * taken:
                self._stop = LimitExceeded(
                    f"{self.count:,} bytes decompressed from {taken:,}, a ratio over {self._ratio:,g}:1 "
                    "(--max-decompression-ratio)"
                )
        if n == 0 and self._stop is not None:
            raise self._stop  # 0 would read as a clean end of file
        return n

    def close(self) -> None:
        try:
            self._inner.close()
        finally:
            self._raw.close()
            super().close()


_GZIP_IN = 64 * 1024  # compressed bytes fed to zlib at a time (its output is capped by max_length)
# zstd's decompressobj has no max_length; one RLE block turns 4 bytes into 128 KiB (RFC 8878
# section 3.1.1.2), so feeding 1 KiB at a time caps one step's output near 32 MiB.
_ZSTD_IN = 1024


class _FrameStream(io.RawIOBase):
    """Streaming gzip members / zstd frames, one after another, handing out every byte decoded
    before a truncation; only then does EOFError say the last member or frame was cut short.

    gzip.GzipFile raises on a cut-off file without returning the data it had decoded in that
    read, and zstandard's stream_reader ends a cut-off frame silently, as if it were whole.
    """

    def __init__(self, raw: BinaryIO, codec: str) -> None:
        self._raw, self._codec = raw, codec
        self._dec = self._new()
        self._pending = b""
        self._done = False

    def _new(self) -> Any:
        if self._codec == "gzip":
            return zlib.decompressobj(wbits=31)
        import zstandard

        return zstandard.ZstdDecompressor().decompressobj()

    def _step(self, data: bytes, want: int) -> bytes:
        if self._codec == "gzip":
            return self._dec.decompress(data, want)  # type: ignore[no-any-return]
        return self._dec.decompress(data)  # type: ignore[no-any-return]

    def _feed(self) -> bytes:
        tail = self._dec.unconsumed_tail if self._codec == "gzip" else b""
        return tail or self._raw.read(_GZIP_IN if self._codec == "gzip" else _ZSTD_IN)

    def readable(self) -> bool:
        return True

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        want = max(len(buf), 1)
        while not self._pending and not self._done:
            if self._dec.eof:  # a member / frame ended: another may follow (RFC 1952 §2.2, RFC 8878 §3.1)
                rest = self._dec.unused_data or self._raw.read(_ZSTD_IN)
                if not rest:
                    self._done = True
                    break
                self._dec = self._new()
                self._pending = self._step(rest, want)
                continue
            data = self._feed()
            if not data:
                self._done = True
                raise EOFError("compressed file ended before the end-of-stream marker was reached")
            self._pending = self._step(data, want)
        n = min(len(buf), len(self._pending))
        buf[:n] = self._pending[:n]
        self._pending = self._pending[n:]
        return n


def _decoder(raw: BinaryIO, compression: str | None) -> BinaryIO:
    if compression is None:
        return raw
    if compression in ("gzip", "zstd"):
        return _FrameStream(raw, compression)  # type: ignore[return-value]
    if compression == "bz2":
        return bz2.BZ2File(raw, mode="rb")  # type: ignore[return-value]
    if compression == "xz":
        return lzma.LZMAFile(raw, mode="rb")  # type: ignore[return-value]
    raise ValueError(f"unknown compression {compression!r}")  # pragma: no cover - guarded by detect_compression


def open_stream(path: str, compression: str | None, *, limit: int | None, ratio: float | None = None) -> BinaryIO:
    """Open path for reading as decompressed bytes, never for writing; the caller closes it.

    limit caps the bytes that come out; ratio caps bytes out per byte read from the file.
    """
    return wrap_stream(open(path, "rb"), compression, limit=limit, ratio=ratio)  # noqa: SIM115 - closed with it


def wrap_stream(raw: BinaryIO, compression: str | None, *, limit: int | None, ratio: float | None = None,
                taken: Callable[[], int] | None = None) -> BinaryIO:
    """Decompressed bytes of an open binary file (local or remote); closing the result closes raw.

    taken counts the bytes read from raw so far, for the ratio; raw.tell() when not given.
    """
    try:
        stream = _decoder(raw, compression)
    except BaseException:
        raw.close()
        raise
    if compression is None and limit is None:
        return stream
    return io.BufferedReader(_Limited(stream, raw, limit, ratio, taken), buffer_size=1 << 20)  # type: ignore[return-value]
