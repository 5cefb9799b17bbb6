"""Compression detection, and opening a file as a decompressed byte stream.

Which data format a file holds is told by sources/registry.py (suffixes, sniffing).
"""

from __future__ import annotations

import bz2
import io
import lzma
import re
import zlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, BinaryIO

from driftline.core.dataformat import Compression
from driftline.core.options import RATIO_FLOOR_BYTES
from driftline.core.words import plural

COMPRESSION_BY_SUFFIX: dict[str, Compression] = {
    ".gz": "gzip",
    ".gzip": "gzip",
    ".bz2": "bz2",
    ".zst": "zstd",
    ".zstd": "zstd",
    ".xz": "xz",
}
# Magic numbers of the compressed containers, for files whose name says nothing.
_MAGIC: tuple[tuple[bytes, Compression], ...] = (
    (b"\x1f\x8b", "gzip"),
    (b"BZh", "bz2"),
    (b"\x28\xb5\x2f\xfd", "zstd"),
    (b"\xfd7zXZ\x00", "xz"),
)


def _suffixes(path: str) -> list[str]:
    name = path.replace("\\", "/").rsplit("/", 1)[-1].lower()
    return ["." + s for s in name.split(".")[1:]]


def detect_compression(path: str, head: bytes | None = None) -> Compression | None:
    """Compression from the last suffix, else from the file's magic number (in head, the file's
    first bytes when the caller has them already, or read here)."""
    sfx = _suffixes(path)
    if sfx and sfx[-1] in COMPRESSION_BY_SUFFIX:
        return COMPRESSION_BY_SUFFIX[sfx[-1]]
    if head is None:
        head = head_bytes(path, 8)
    for magic, name in _MAGIC:
        if head.startswith(magic):
            return name
    return None


_EXTENSION = re.compile(r"\.[a-z][a-z0-9]{0,9}")  # '.csv', '.sql', '.c000'; not '.1' nor '.2024-01-01'


def data_extension(path: str) -> str | None:
    """The extension that names a file's format: its last suffix before any compression suffix,
    or None when its name has none ('part-00000', 'data.gz', 'events.2024-01-01').

    >>> data_extension("a/b.CSV.gz"), data_extension("schema.sql"), data_extension("part-00000.gz")
    ('.csv', '.sql', None)
    """
    sfx = _suffixes(path)
    while sfx and sfx[-1] in COMPRESSION_BY_SUFFIX:
        sfx.pop()
    return sfx[-1] if sfx and _EXTENSION.fullmatch(sfx[-1]) else None


def head_bytes(path: str, n: int) -> bytes:
    """The first n bytes of a local file; b'' when it cannot be read."""
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

    def __init__(
        self,
        inner: BinaryIO,
        raw: BinaryIO,
        limit: int | None,
        ratio: float | None,
        taken: Callable[[], int] | None = None,
    ) -> None:
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


_RAW_IN = 64 * 1024  # compressed bytes fed to gzip, bzip2 and xz at a time (their output is capped by max_length)
# zstd's decompressobj has no max_length; one RLE block turns 4 bytes into 128 KiB (RFC 8878
# section 3.1.1.2), so feeding 1 KiB at a time caps one step's output near 32 MiB.
_ZSTD_IN = 1024
_XZ_MAGIC = b"\xfd7zXZ\x00"  # .xz file format 1.2.0, section 2.1.1.1
_ZSTD_MAGIC = b"\x28\xb5\x2f\xfd"  # RFC 8878 section 3.1.1; skippable frames: 0x184D2A5? (section 3.1.2)
_TOOL = {"gzip": "gzip -t", "bz2": "bzip2 -t", "xz": "xz -t", "zstd": "zstd -t"}


class CorruptStream(ValueError):
    """Bytes between or after compressed streams that the format's reference tool rejects."""


@dataclass(frozen=True, slots=True)
class IgnoredTail:
    """Data after the last complete stream that the reference tool also ignores, with a warning."""

    codec: str
    offset: int  # compressed byte offset where it starts

    def message(self, size: int | None) -> str:
        count = (
            f"{size - self.offset:,} {plural(size - self.offset, 'byte')}"
            if size is not None and size > self.offset
            else "the bytes"
        )
        name = "gzip member" if self.codec == "gzip" else "bzip2 stream"
        return (
            f"{count} from byte {self.offset:,} on are not a {name}: ignored, as `{_TOOL[self.codec]}` "
            "ignores trailing garbage; the data before them is complete"
        )


class _Streams(io.RawIOBase):
    """Concatenated gzip members, bzip2 streams, xz streams and zstd frames, judged as the reference
    tools judge them (`gzip -t`, `bzip2 -t`, `xz -t`, `zstd -t`), handing out every byte decoded
    before a problem; only then does the problem surface.

    - gzip: members follow one another (RFC 1952 section 2.2); null bytes up to the end of the
      file are padding and accepted silently (gzip(1) ignores trailing zeros); anything else after
      a member is trailing garbage, ignored with a warning (gzip -t exits 2, "decompression OK").
    - bzip2: streams follow one another; data that does not start as a stream ("BZh1".."BZh9") is
      trailing garbage that bzip2 -t ignores with a warning (exit 0); a cut-off magic is an error.
    - xz: streams may be separated and followed by Stream Padding, null bytes in a multiple of
      four (.xz file format 1.2.0, section 2.2); any other byte, or padding of another length, is
      an error, as for xz -t.
    - zstd: frames, skippable ones included, follow one another (RFC 8878 section 3.1); anything
      else is an error, as for zstd -t.

    The stdlib's GzipFile, BZ2File and LZMAFile differ: they raise on a cut-off file without the
    data decoded in that read, take any trailing bytes as a new member (gzip) or drop them and
    every stream after them without a word (bz2, xz); zstandard's stream_reader ends a cut-off
    frame silently, as if it were whole.
    """

    def __init__(self, raw: BinaryIO, codec: str, notes: list[IgnoredTail] | None) -> None:
        self._raw, self._codec, self._notes = raw, codec, notes
        self._dec = self._new(first=True)
        self._pending = b""
        self._done = False
        self._taken = 0  # compressed bytes read from raw

    def _new(self, first: bool = False) -> Any:
        if self._codec == "gzip":
            return zlib.decompressobj(wbits=31)
        if self._codec == "bz2":
            return bz2.BZ2Decompressor()
        if self._codec == "xz":  # the first stream may also be a legacy .lzma one, as xz -t accepts
            return lzma.LZMADecompressor(lzma.FORMAT_AUTO if first else lzma.FORMAT_XZ)
        import zstandard

        return zstandard.ZstdDecompressor().decompressobj()

    def _read(self) -> bytes:
        data = self._raw.read(_ZSTD_IN if self._codec == "zstd" else _RAW_IN)
        self._taken += len(data)
        return data

    def _more(self, rest: bytes, n: int) -> bytes:
        """rest extended from the file to at least n bytes, unless the file ends first."""
        while len(rest) < n and (data := self._read()):
            rest += data
        return rest

    def _step(self, data: bytes, want: int) -> bytes:
        if self._codec == "zstd":
            return self._dec.decompress(data)
        return self._dec.decompress(data, want)

    def _input(self) -> bytes | None:
        """The decoder's next input: held input first; None at the end of the file."""
        if self._codec == "gzip" and self._dec.unconsumed_tail:
            return self._dec.unconsumed_tail
        if self._codec in ("bz2", "xz") and not self._dec.needs_input:
            return b""  # output is still waiting inside the decoder
        return self._read() or None

    def readable(self) -> bool:
        return True

    def readinto(self, buf: memoryview) -> int:  # type: ignore[override]
        want = max(len(buf), 1)
        while not self._pending and not self._done:
            if self._dec.eof:
                rest = self._next(self._dec.unused_data)
                if rest is None:
                    self._done = True
                    break
                self._dec = self._new()
                self._pending = self._step(rest, want)
                continue
            data = self._input()
            if data is None:
                self._done = True
                raise EOFError("compressed file ended before the end-of-stream marker was reached")
            self._pending = self._step(data, want)
        n = min(len(buf), len(self._pending))
        buf[:n] = self._pending[:n]
        self._pending = self._pending[n:]
        return n

    def _next(self, rest: bytes) -> bytes | None:
        """After a complete stream: the start of the next one, or None when the data ends here."""
        at = self._taken - len(rest)  # compressed offset of rest[0]
        if self._codec == "zstd":
            rest = self._more(rest, 4)
            if not rest:
                return None
            if len(rest) < 4:
                raise EOFError(f"the file ends inside the magic number of a zstd frame at byte {at:,}")
            if rest[:4] != _ZSTD_MAGIC and (rest[0] & 0xF0 != 0x50 or rest[1:4] != b"\x2a\x4d\x18"):
                raise CorruptStream(
                    f"the bytes at byte {at:,} are not a zstd frame (RFC 8878 section 3.1); zstd -t rejects them"
                )
            return rest
        if self._codec == "xz":
            return self._after_xz(rest, at)
        rest = self._more(rest, 4)
        if not rest:
            return None
        if self._codec == "gzip":
            if rest[0] == 0:
                rest = rest.lstrip(b"\x00")
                while not rest and (data := self._read()):
                    rest = data.lstrip(b"\x00")
                if not rest:
                    return None  # null padding to the end: gzip(1) ignores trailing zeros silently
                self._ignore(at)
                return None
            if len(rest) < 2:  # gzip(1) reads both bytes of the magic number before it judges them
                raise EOFError(f"the file ends inside the header of a gzip member at byte {at:,}")
            magic: tuple[bytes, ...] = (b"\x1f", b"\x8b")
        else:
            magic = (b"B", b"Z", b"h", b"123456789")  # bzip2's stream header, block size 1 to 9
        for i, allowed in enumerate(magic):
            if i == len(rest):  # as the tools: a cut-off header is an unexpected end, not garbage
                raise EOFError(f"the file ends inside the header of a {self._codec} stream at byte {at:,}")
            if rest[i] not in allowed:
                self._ignore(at)
                return None
        return rest

    def _ignore(self, at: int) -> None:
        if self._notes is not None:
            self._notes.append(IgnoredTail(self._codec, at))

    def _after_xz(self, rest: bytes, at: int) -> bytes | None:
        zeros = 0
        while True:
            stripped = rest.lstrip(b"\x00")
            zeros += len(rest) - len(stripped)
            if stripped:
                rest = stripped
                break
            rest = self._read()
            if not rest:
                break
        if zeros % 4:
            raise CorruptStream(
                f"xz stream padding of {zeros:,} null bytes at byte {at:,} is not a multiple of "
                "four (.xz file format, section 2.2); xz -t rejects it"
            )
        if not rest:
            return None
        rest = self._more(rest, len(_XZ_MAGIC))
        if not rest.startswith(_XZ_MAGIC):
            raise CorruptStream(
                f"the bytes at byte {at + zeros:,} are neither stream padding nor an xz stream; xz -t rejects them"
            )
        return rest


def _decoder(raw: BinaryIO, compression: str | None, notes: list[IgnoredTail] | None) -> BinaryIO:
    if compression is None:
        return raw
    if compression in _TOOL:
        return _Streams(raw, compression, notes)  # type: ignore[return-value]
    raise ValueError(f"unknown compression {compression!r}")  # pragma: no cover - guarded by detect_compression


def open_stream(
    path: str,
    compression: str | None,
    *,
    limit: int | None,
    ratio: float | None = None,
    notes: list[IgnoredTail] | None = None,
) -> BinaryIO:
    """Open path for reading as decompressed bytes, never for writing; the caller closes it.

    limit caps the bytes that come out; ratio caps bytes out per byte read from the file;
    notes, when given, receives the trailing data the decoder ignored (as the reference tool does).
    """
    return wrap_stream(open(path, "rb"), compression, limit=limit, ratio=ratio, notes=notes)  # noqa: SIM115


def wrap_stream(
    raw: BinaryIO,
    compression: str | None,
    *,
    limit: int | None,
    ratio: float | None = None,
    taken: Callable[[], int] | None = None,
    notes: list[IgnoredTail] | None = None,
) -> BinaryIO:
    """Decompressed bytes of an open binary file (local or remote); closing the result closes raw.

    taken counts the bytes read from raw so far, for the ratio; raw.tell() when not given.
    """
    try:
        stream = _decoder(raw, compression, notes)
    except BaseException:
        raw.close()
        raise
    if compression is None and limit is None:
        return stream
    return io.BufferedReader(_Limited(stream, raw, limit, ratio, taken), buffer_size=1 << 20)
