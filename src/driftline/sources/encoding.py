"""The text encoding of a CSV/TSV or JSON file, decided from its first bytes, and a stream of
its text as UTF-8 for the readers.

The decision looks at a head of at most SAMPLE_BYTES (linear cost, bounded memory), in order:

1. a byte order mark: UTF-32 LE/BE, UTF-8, UTF-16 LE/BE (UTF-32 LE first: its mark begins
   with UTF-16 LE's);
2. without a mark, the NUL bytes of ASCII text in UTF-32 or UTF-16: the head decodes
   strictly in that encoding, a whole file is whole code units, and more than half its
   characters are ASCII other than NUL (UTF-32 before UTF-16, whose ASCII text is not valid
   UTF-32).  RFC 4627 section 3 found the encoding of JSON text the same way, from the NULs
   of its first four bytes; a majority of the head is less easily fooled;
3. UTF-8 when the head decodes as UTF-8, or when its valid multi-byte sequences are at
   least as many as its invalid bytes: a few stray bad bytes in UTF-8 text stay what they
   are, invalid UTF-8 reported on their lines;
4. otherwise (high bytes, and more of them invalid than valid UTF-8) windows-1252, with a
   warning naming it; except for JSON, which must be UTF-8 when it is not UTF-16/32 (RFC
   8259 section 8.1): its invalid bytes stay malformed JSON, as JSON parsers report them.

Why windows-1252 and not ISO-8859-1 (Latin-1): both give the same characters for bytes
0x00-0x7F and 0xA0-0xFF.  They differ on 0x80-0x9F, which Latin-1 maps to C1 control
characters that text never holds, and windows-1252 to the characters real files hold there
(euro sign, curly quotes, dashes).  Text labelled Latin-1 is so often windows-1252 in
practice that the WHATWG Encoding Standard decodes the label "iso-8859-1" as windows-1252.
Its windows-1252 maps the five bytes the code page leaves
unassigned (0x81 0x8D 0x8F 0x90 0x9D) to the C1 controls of the same number, so every byte
decodes; that is the decoding used here (Python's cp1252 codec rejects those five).

A file not in UTF-8 is transcoded to UTF-8 as it streams (an incremental decoder, a chunk
at a time), so the readers see UTF-8 and count lines exactly.  Their byte offsets would
count bytes of that UTF-8 text, not of the file, so they are left out for such a file
(readers.py); the line numbers stay exact.  Bytes the encoding cannot decode become
U+FFFD, each line that held some reported once.

JSON between systems must be UTF-8 (RFC 8259 section 8.1); a JSON file found in UTF-16 or
UTF-32 is still read (the practitioner's choice, as Python's json.loads does from bytes),
with a warning that says so.
"""

from __future__ import annotations

import codecs
import io
import re
from collections.abc import Iterator
from typing import Any, BinaryIO

from driftline.core.codecnames import UTF8, codec_name
from driftline.core.files import FileIssue
from driftline.core.textfile import BY_BOM, BY_FALLBACK, BY_NULS, BY_PIN, BY_SAMPLE, TextEncoding

SAMPLE_BYTES = 64 * 1024  # the head the decision is made from (as much as the CSV sniffer reads)
_STEP = 1 << 20  # bytes of the file transcoded at a time
_MAX_LINE_ISSUES = 20  # undecodable lines reported one by one per file; the rest as a count
_CARRY = "driftline-carry"  # error handler: an undecodable sequence becomes one lone surrogate

FALLBACK = "windows-1252"

_BOMS = (
    (codecs.BOM_UTF32_LE, "utf-32-le"),
    (codecs.BOM_UTF32_BE, "utf-32-be"),
    (codecs.BOM_UTF8, UTF8),
    (codecs.BOM_UTF16_LE, "utf-16-le"),
    (codecs.BOM_UTF16_BE, "utf-16-be"),
)
_WIDE = ("utf-32-le", "utf-32-be", "utf-16-le", "utf-16-be")  # tried in this order on NUL bytes
_SURROGATE = re.compile("[\ud800-\udfff]")  # what the carry handler leaves; never valid in UTF-8


def _carry(exc: UnicodeError) -> tuple[str, int]:
    if not isinstance(exc, UnicodeDecodeError):
        raise exc
    return "\udcff", exc.end


codecs.register_error(_CARRY, _carry)


def _windows_1252_table() -> str:
    # source: WHATWG Encoding Standard, index-windows-1252 (Python's cp1252 table, with the
    # five unassigned bytes mapped to the C1 controls of the same value)
    from encodings import cp1252

    return "".join(chr(b) if c == "\ufffe" else c for b, c in enumerate(cp1252.decoding_table))


_WINDOWS_1252 = _windows_1252_table()


class _Windows1252Decoder(codecs.IncrementalDecoder):
    """A single-byte decoder that decodes every byte (no state: one byte is one character)."""

    def decode(self, input: Any, final: bool = False) -> str:  # noqa: A002 - the codecs signature
        return codecs.charmap_decode(bytes(input), "strict", _WINDOWS_1252)[0]


def decoder(encoding: TextEncoding) -> codecs.IncrementalDecoder:
    """The incremental decoder of an encoding: every byte decodes (undecodable ones carried as
    lone surrogates, reported per line; Windows-1252 found by fallback takes all 256 bytes)."""
    if encoding.name == FALLBACK and encoding.evidence != BY_PIN:
        return _Windows1252Decoder()
    return codecs.getincrementaldecoder(encoding.name)(_CARRY)


def pinned(name: str) -> TextEncoding:
    """The encoding the user named (ReadOptions.encoding), whatever the bytes say."""
    return TextEncoding(codec_name(name), BY_PIN)


def decide(head: bytes, *, whole: bool, fallback: bool = True) -> TextEncoding:
    """The encoding of a file from its first bytes; whole says that head is the whole file.
    fallback False keeps UTF-8 for text that is not (JSON: invalid UTF-8 is malformed JSON).

    >>> decide(b"\\xff\\xfea\\x00,\\x00b\\x00", whole=True)
    TextEncoding(name='utf-16-le', evidence='bom', bom=2)
    >>> decide("a,b\\n1,é\\n".encode("utf-16-be"), whole=True).name
    'utf-16-be'
    >>> decide("a,b\\n1,é\\n".encode("utf-8"), whole=True).name
    'utf-8'
    >>> decide("a,b\\n1,é\\n".encode("latin-1"), whole=True)
    TextEncoding(name='windows-1252', evidence='fallback', bom=0)
    """
    for mark, name in _BOMS:
        if head.startswith(mark):
            return TextEncoding(name, BY_BOM, 0 if name == UTF8 else len(mark))
    if b"\x00" in head:
        for name in _WIDE:
            if _ascii_in(head, name, whole):
                return TextEncoding(name, BY_NULS)
    if fallback:
        bad, multi = utf8_evidence(head, whole=whole)
        if bad and bad > multi:
            return TextEncoding(FALLBACK, BY_FALLBACK)
    return TextEncoding(UTF8, BY_SAMPLE)


def _ascii_in(head: bytes, name: str, whole: bool) -> bool:
    """Whether head is valid in a UTF-16/32 encoding and more than half its characters are
    ASCII other than NUL (the NUL pattern of ASCII text); a whole file must be whole units."""
    unit = 4 if "32" in name else 2
    if whole and len(head) % unit:
        return False
    try:  # a unit cut short by the end is left out: the transcoding reports it if the file ends so
        text = codecs.getincrementaldecoder(name)("strict").decode(head[: len(head) - len(head) % unit])
    except UnicodeDecodeError:
        return False
    ascii_chars = len(text.encode("ascii", "ignore")) - text.count("\x00")
    return 2 * ascii_chars > len(text)


def utf8_evidence(head: bytes, *, whole: bool) -> tuple[int, int]:
    """(invalid bytes, valid multi-byte sequences) of head read as UTF-8; a sequence cut by
    the end of a head that is not the whole file is neither.

    >>> utf8_evidence("caf\\u00e9 \\u20ac".encode() + b"\\xff", whole=True)
    (1, 2)
    """
    if head.isascii():
        return 0, 0
    text = codecs.getincrementaldecoder(UTF8)("surrogateescape").decode(head, whole)
    bad = len(_SURROGATE.findall(text))
    return bad, len(text) - len(text.encode("ascii", "ignore")) - bad


def file_encoding(path: str, json: bool, pin: str | None = None) -> TextEncoding:
    """The encoding TextStream finds for an uncompressed local file (the split readers').

    json: the text is JSON (FormatSpec.json_text), which must be Unicode: never read as a
    single-byte fallback (RFC 8259 section 8.1)."""
    if pin:
        return pinned(pin)
    try:
        with open(path, "rb") as fh:
            head = fh.read(SAMPLE_BYTES)
    except OSError:  # gone since: file_changed reports it; the spans read it as UTF-8
        return TextEncoding(UTF8, BY_SAMPLE)
    return decide(head, whole=len(head) < SAMPLE_BYTES, fallback=not json)


class Transcoded(io.RawIOBase):
    """A byte stream in some encoding, handed out as UTF-8 a chunk at a time.

    Memory stays bounded by a chunk (the head, then _STEP bytes at a time) whatever the
    file holds.  Undecodable bytes become U+FFFD; the lines holding them are noted.
    """

    def __init__(self, inner: BinaryIO, head: bytes, encoding: TextEncoding) -> None:
        self._inner = inner
        self._head: bytes | None = head[encoding.bom :]
        self._dec = decoder(encoding)
        self._out = memoryview(b"")
        self._eof = False
        self.lines = 0  # newlines handed out so far
        self.bad_lines: list[int] = []  # the first _MAX_LINE_ISSUES lines holding undecodable bytes
        self.bad_count = 0

    def readable(self) -> bool:
        return True

    def _next(self) -> bytes:
        if self._head is not None:
            data, self._head = self._head, None
            if data:
                return data
        return self._inner.read(_STEP)

    def _text(self, text: str) -> bytes:
        if _SURROGATE.search(text) is not None:
            seen = 0
            for m in _SURROGATE.finditer(text):
                line = self.lines + 1 + text.count("\n", 0, m.start())
                if line != seen:
                    seen = line
                    self.bad_count += 1
                    if len(self.bad_lines) < _MAX_LINE_ISSUES:
                        self.bad_lines.append(line)
            text = _SURROGATE.sub("\ufffd", text)
        self.lines += text.count("\n")
        return text.encode(UTF8)

    def readinto(self, buf: Any) -> int:
        while not self._out and not self._eof:
            data = self._next()
            self._eof = not data
            self._out = memoryview(self._text(self._dec.decode(data, self._eof)))
        n = min(len(buf), len(self._out))
        buf[:n] = self._out[:n]
        self._out = self._out[n:]
        return n

    def close(self) -> None:
        try:
            self._inner.close()
        finally:
            super().close()


class _Prefixed(io.BufferedIOBase):
    """The head already read, then the rest of the stream, unchanged: after the head, every
    read goes straight to the stream below (no further copy or buffer)."""

    def __init__(self, inner: BinaryIO, head: bytes) -> None:
        self._inner, self._head = inner, head

    def readable(self) -> bool:
        return True

    def read(self, n: int | None = -1) -> bytes:
        head = self._head
        if not head:
            return self._inner.read(-1 if n is None else n)
        if n is not None and 0 <= n <= len(head):
            self._head = head[n:]
            return head[:n]
        self._head = b""
        return head + self._inner.read(-1 if n is None or n < 0 else n - len(head))

    def read1(self, n: int = -1) -> bytes:
        return self.read(n)

    def readinto(self, buf: Any) -> int:
        data = self.read(len(buf))
        buf[: len(data)] = data
        return len(data)

    def close(self) -> None:
        try:
            self._inner.close()
        finally:
            super().close()


class TextStream:
    """A file's bytes as UTF-8 for the readers (`stream`), with the encoding they were in.

    json: the text is JSON (FormatSpec.json_text): Unicode only, as file_encoding says.
    pin, when given, is the encoding to use whatever the bytes say (ReadOptions.encoding).
    """

    def __init__(self, inner: BinaryIO, json: bool, pin: str | None = None) -> None:
        head = inner.read(SAMPLE_BYTES)
        self.json = json
        self.encoding = pinned(pin) if pin else decide(head, whole=len(head) < SAMPLE_BYTES, fallback=not json)
        self._transcoded: Transcoded | None = None
        self.stream: BinaryIO
        if self.encoding.is_utf8:
            self.stream = _Prefixed(inner, head)  # type: ignore[assignment]
        else:
            self._transcoded = Transcoded(inner, head, self.encoding)
            self.stream = io.BufferedReader(self._transcoded, buffer_size=_STEP)

    @property
    def transcoded(self) -> bool:
        return self._transcoded is not None

    def issues(self, rel: str) -> Iterator[FileIssue]:
        """A warning when the encoding was a guess, or is one JSON does not allow."""
        enc, json = self.encoding, self.json
        note = None
        if enc.evidence == BY_FALLBACK:
            note = (
                f"not UTF-8 (more invalid bytes than valid multi-byte characters within the first "
                f"{SAMPLE_BYTES >> 10} KiB); read as {enc.name}"
            )
        elif enc.evidence == BY_NULS:
            note = f"no byte order mark; read as {enc.name} from the NUL bytes of its ASCII text"
        elif json and not enc.is_utf8 and enc.evidence != BY_PIN:
            note = f"JSON text in {enc.name}; read as such"
        if note is not None:
            if json:
                note += " (JSON between systems must be UTF-8: RFC 8259 section 8.1)"
            yield FileIssue(
                rel, "encoding", note + ". Pin the encoding with --encoding if this is wrong", "warning", line=1
            )

    def transcoding_issues(self, rel: str) -> Iterator[FileIssue]:
        """The lines that held bytes the encoding cannot decode (once the stream was read)."""
        t, enc = self._transcoded, self.encoding
        if t is None:
            return
        for line in t.bad_lines:
            yield FileIssue(
                rel, "invalid-text", f"bytes not valid in {enc.name} on this line; read as U+FFFD", line=line
            )
        if t.bad_count > len(t.bad_lines):
            yield FileIssue(
                rel,
                "invalid-text",
                f"{t.bad_count - len(t.bad_lines):,} more lines hold bytes not valid in {enc.name}; read as U+FFFD",
            )
