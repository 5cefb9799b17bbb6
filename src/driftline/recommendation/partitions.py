"""Partition keys (``key=value`` folders) as the columns a table format partitions by.

A partition key's values live in folder names, not in the files, so the recommendation's
fields never hold them. Formats that partition (an Iceberg partition spec, Spark's
``partitionBy``) need them as columns with a type: every value read as a content class
(observe/textclass.py), all integers → int64, all calendar dates → date32, else string.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from driftline.core.files import FileResult
from driftline.core.lattice import DType
from driftline.observe.textclass import class_of


@dataclass(frozen=True, slots=True)
class PartitionColumn:
    """One partition key: its name, the type of its values, the values seen (sorted), and the
    rows of the files that carry it (the rest have no value for it)."""

    name: str
    type: DType
    values: tuple[str, ...]
    rows: int = 0


def partition_type(values: Sequence[str]) -> DType:
    """The type of a partition key's values (their content classes)."""
    classes = {class_of(v) for v in values}
    if classes == {"integer"}:
        return DType("int64")
    if classes == {"date"}:
        return DType("date32")
    return DType("string")


def partition_columns(files: Sequence[FileResult], keys: Sequence[str]) -> tuple[PartitionColumn, ...]:
    """The partition keys in their order, each typed by its values.

    >>> f = FileResult("day=2026-11-27/region=1/a", "jsonl", None, (("day", "2026-11-27"), ("region", "1")), 0, 0)
    >>> cols = partition_columns([f], ["day", "region"])
    >>> [(c.name, c.type.key(), c.values, c.rows) for c in cols]
    [('day', 'date32', ('2026-11-27',), 0), ('region', 'int64', ('1',), 0)]
    """
    out = []
    for key in keys:
        having = [(dict(f.partitions)[key], f.rows) for f in files if key in dict(f.partitions)]
        values = sorted({v for v, _ in having})
        out.append(PartitionColumn(key, partition_type(values), tuple(values), sum(n for _, n in having)))
    return tuple(out)
