"""How a text file is written, as found (or pinned) for one file: its CSV dialect and its
text encoding. Values only: sources/dialect.py and sources/encoding.py find them."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from driftline.core.codecnames import UTF8
from driftline.core.dialectpin import PIN_KEYS
from driftline.core.words import count

# How the encoding was found (the report's "evidence").
BY_BOM, BY_NULS, BY_SAMPLE, BY_FALLBACK, BY_PIN = "bom", "nul-pattern", "sample", "fallback", "pinned"


@dataclass(frozen=True, slots=True)
class Dialect:
    """How a delimited text file is written, as found (or pinned) for one file.

    header is 'yes', 'no' (columns get positional names) or 'row-names' (the header has one
    name fewer than the rows: the first column holds row names); skip counts the preamble
    lines before the header; comment starts lines that are skipped wherever they are;
    confidence is in [0, 1]; pinned lists the keys the user fixed.
    """

    delimiter: str
    quote: str | None
    escape: str | None
    line_end: str
    header: str
    skip: int = 0
    confidence: float = 1.0
    rows_sampled: int = 0
    pinned: tuple[str, ...] = ()
    comment: str | None = None  # a line starting with it (after blanks) is a comment, skipped

    def describe(self) -> str:
        """One line for a person, e.g. `'|' no quotes, header, CR (confidence 0.97)`."""
        return f"{self.shape()} ({self.certainty()})"

    def shape(self) -> str:
        """The dialect without its confidence: `'|' no quotes, header, CR`."""
        quote = "no quotes" if self.quote is None else f"{self.quote}-quoted"
        if self.escape is not None:
            quote += f", {self.escape!r}-escaped"
        header = {"yes": "header", "no": "no header", "row-names": "header + row names"}[self.header]
        parts = [f"{_show(self.delimiter)} {quote}", header, self.line_end]
        if self.comment is not None:
            parts.append(f"{self.comment!r} comments")
        if self.skip:
            parts.append(f"{count(self.skip, 'preamble line')} skipped")
        return ", ".join(parts)

    def certainty(self) -> str:
        if len(self.pinned) == len(PIN_KEYS):
            return "pinned"
        pinned = f", {'/'.join(self.pinned)} pinned" if self.pinned else ""
        return f"confidence {self.confidence:.2f}{pinned}"

    def to_json(self) -> dict[str, Any]:
        return {
            "delimiter": self.delimiter,
            "quote": self.quote,
            "escape": self.escape,
            "line_end": self.line_end,
            "header": self.header,
            "skip": self.skip,
            "confidence": self.confidence,
            "rows_sampled": self.rows_sampled,
            "pinned": list(self.pinned),
            "comment": self.comment,
        }

    @staticmethod
    def from_json(d: Mapping[str, Any]) -> Dialect:
        return Dialect(
            d["delimiter"],
            d.get("quote"),
            d.get("escape"),
            d["line_end"],
            d["header"],
            d.get("skip", 0),
            d.get("confidence", 1.0),
            d.get("rows_sampled", 0),
            tuple(d.get("pinned", ())),
            d.get("comment"),
        )


def _show(delimiter: str) -> str:
    return {"\t": "TAB", " ": "SPACE"}.get(delimiter, repr(delimiter))


@dataclass(frozen=True, slots=True)
class TextEncoding:
    """How a text file's bytes are decoded: the encoding's name, how it was found, and the
    length of the byte order mark skipped before decoding (UTF-16/32; a UTF-8 mark is left
    to the readers, which skip it; the JSON readers report it, RFC 8259 section 8.1)."""

    name: str
    evidence: str  # BY_BOM | BY_NULS | BY_SAMPLE | BY_FALLBACK | BY_PIN
    bom: int = 0

    @property
    def is_utf8(self) -> bool:
        return self.name == UTF8

    def describe(self) -> str:
        """The encoding and its evidence in a few words, for the terminal.

        >>> TextEncoding("utf-16-le", BY_BOM, 2).describe()
        'utf-16-le (byte order mark)'
        """
        how = {
            BY_BOM: "byte order mark",
            BY_NULS: "NUL bytes of ASCII text, no byte order mark",
            BY_SAMPLE: "valid in the first bytes",
            BY_FALLBACK: "not UTF-8",
            BY_PIN: "pinned",
        }
        return f"{self.name} ({how.get(self.evidence, self.evidence)})"

    def to_json(self) -> dict[str, Any]:
        return {"name": self.name, "evidence": self.evidence, "bom": self.bom}

    @staticmethod
    def from_json(d: Any) -> TextEncoding | None:
        if not d:
            return None
        return TextEncoding(d["name"], d["evidence"], d.get("bom", 0))
