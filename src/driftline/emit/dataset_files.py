"""One output file per dataset in a folder: `driftline schema ROOT --out DIR/` names each file
after its dataset.

A dataset's name is its folder relative to the root ("crm/orders"), a lone file's its path
("stations.parquet"), the root's own table ".".  A file name takes the name with each "/" as
"." (as the HTML pages of `driftline scan --html` do: crm/orders → crm.orders.schema.json), the
root's own table the root folder's name.  Two names that would give the same file name (crm/orders
and crm.orders, or Readings and readings on a file system that ignores case) each get "~" and the
first 8 hex digits of the SHA-256 of the dataset's name, so neither overwrites the other and each
keeps its file name from run to run while the pair is there; a name too long for a file name (255
bytes) is cut and given the same mark.

>>> dataset_files("out", ["crm/orders", "crm.orders", "readings"], "json-schema", root="/data/landing")
{'crm/orders': 'out/crm.orders~afcae01c.schema.json', 'crm.orders': 'out/crm.orders~aed234bf.schema.json', \
'readings': 'out/readings.schema.json'}
"""

from __future__ import annotations

import hashlib
import os
from collections import Counter
from collections.abc import Sequence
from pathlib import Path

#: The file name ending of each output `driftline schema` writes per dataset ("rules": --rules).
SUFFIXES: dict[str, str] = {
    "json-schema": ".schema.json",
    "arrow": ".arrow-schema",
    "arrow-text": ".arrow-schema.txt",
    "sql": ".sql",
    "avro": ".avsc",
    "rules": ".rules.json",
}
SEPARATOR = "."  # a nested dataset's "/" in its file name
_MAX_NAME = 255  # bytes in a file name on common file systems (ext4, APFS, NTFS in UTF-16 units)


def _mark(name: str) -> str:
    return "~" + hashlib.sha256(name.encode("utf-8", "surrogateescape")).hexdigest()[:8]


def _stem(name: str, root: str) -> str:
    if name == ".":
        return Path(root).name or "root"
    return name.replace("/", SEPARATOR)


def _fit(stem: str, suffix: str, mark: str) -> str:
    """stem + mark + suffix, the stem cut (on a character) so the whole stays within a file name's bytes."""
    room = _MAX_NAME - len((mark + suffix).encode("utf-8", "surrogateescape"))
    while len(stem.encode("utf-8", "surrogateescape")) > room:
        stem = stem[:-1]
    return stem + mark + suffix


def dataset_files(folder: str, names: Sequence[str], to: str, *, root: str) -> dict[str, str]:
    """Each dataset's file in folder for output `to` (a key of SUFFIXES), distinct, case aside."""
    suffix = SUFFIXES[to]
    stems = {n: _stem(n, root) for n in names}
    clash = Counter(s.casefold() for s in stems.values())
    out = {}
    for n, stem in stems.items():
        plain = stem + suffix
        if clash[stem.casefold()] == 1 and len(plain.encode("utf-8", "surrogateescape")) <= _MAX_NAME:
            out[n] = os.path.join(folder, plain)
        else:
            out[n] = os.path.join(folder, _fit(stem, suffix, _mark(n)))
    return out


def is_folder_target(target: str | None) -> bool:
    """Whether an output names a folder: it ends with '/' or is an existing folder."""
    return target is not None and target != "-" and (target.endswith(("/", os.sep)) or os.path.isdir(target))
