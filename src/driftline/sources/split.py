"""Big files read as byte spans in the process pool: JSON Lines (jsonsplit) and CSV (csvsplit).

scan._read_split plans each splittable file into spans, reads them as pool tasks and
assembles the file's result; this module sends each step to the module of the file's format.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from driftline.sources import csvsplit, jsonsplit
from driftline.sources.base import FileResult, ReadOptions
from driftline.sources.discover import FileRef
from driftline.sources.encoding import file_encoding


def _module(ref: FileRef) -> Any:
    return csvsplit if ref.format in csvsplit.FORMATS else jsonsplit


def can_split(ref: FileRef, opts: ReadOptions) -> bool:
    # Spans are cut and read as UTF-8 bytes: a file in another encoding goes to the one
    # reader, which transcodes it as it streams.
    if not _module(ref).can_split(ref, opts):
        return False
    try:
        return file_encoding(ref.path, ref.format, opts.encoding).is_utf8
    except OSError:  # one reader reports why the file cannot be read
        return False


def plan(ref: FileRef, opts: ReadOptions, parts: int) -> list[Any]:
    return list(_module(ref).plan(ref, opts, parts))


def read_span(span: Any, opts: ReadOptions) -> Any:
    return _module(span.ref).read_span(span, opts)


def assemble(ref: FileRef, results: Sequence[Any], opts: ReadOptions) -> Any:
    """A FileResult, or (JSON Lines) the span to read again from, to the end of the file."""
    got: FileResult | Any = _module(ref).assemble(ref, results, opts)
    return got
