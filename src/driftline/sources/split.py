"""Big files read as byte spans in the process pool: JSON Lines (jsonsplit) and CSV (csvsplit).

scan._read_split plans each splittable file into spans, reads them as pool tasks and
assembles the file's result; this module sends each step to the Splitter the registry gives
the file's format (sources/registry.py).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from driftline.core.fileref import FileRef
from driftline.core.files import FileResult
from driftline.core.options import ReadOptions
from driftline.sources.encoding import file_encoding
from driftline.sources.readers import read_file
from driftline.sources.registry import SPECS, Splitter


def _splitter(ref: FileRef) -> Splitter:
    split = SPECS[ref.format].split
    assert split is not None, ref.format  # can_split said yes
    return split


def can_split(ref: FileRef, opts: ReadOptions) -> bool:
    spec = SPECS[ref.format]
    if spec.split is None or not spec.split.can_split(ref, opts):
        return False
    # Spans are cut and read as UTF-8 bytes: a file in another encoding goes to the one
    # reader, which transcodes it as it streams.
    try:
        return file_encoding(ref.path, spec.json_text, opts.encoding).is_utf8
    except OSError:  # one reader reports why the file cannot be read
        return False


def plan(ref: FileRef, opts: ReadOptions, parts: int) -> list[Any]:
    return list(_splitter(ref).plan(ref, opts, parts))


def read_span(span: Any, opts: ReadOptions) -> Any:
    return _splitter(span.ref).read_span(span, opts)


def assemble(ref: FileRef, results: Sequence[Any], opts: ReadOptions) -> Any:
    """A FileResult, or (JSON Lines) the span to read again from, to the end of the file.

    Spans that do not make the file's result leave it to one reader."""
    got: FileResult | Any = _splitter(ref).assemble(ref, results, opts)
    return read_file(ref, opts) if got is None else got
