"""The names of the data formats and compressions driftline reads: shared values, no behaviour.

`Format` is a Literal, so a misspelt format name is a type error (mypy) rather than a branch
that never runs.  What each format means to the readers (suffixes, sniffing, reader, splitting)
is told once, in sources/registry.py.
"""

from __future__ import annotations

from typing import Literal, get_args

Format = Literal["jsonl", "json", "csv", "tsv", "parquet"]
Compression = Literal["gzip", "bz2", "zstd", "xz"]

FORMATS: tuple[Format, ...] = get_args(Format)
COMPRESSIONS: tuple[Compression, ...] = get_args(Compression)
