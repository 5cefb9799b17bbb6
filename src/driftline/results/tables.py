"""A Profile's fields and drift events as Arrow tables (and polars frames), for notebooks.

The tables have fixed schemas (FIELDS_SCHEMA, EVENTS_SCHEMA) so that an empty profile
gives empty tables of the same shape, and code written against one scan works on the next.
Counts with a name (types, content classes, partition values) are lists of
{name, count} / {key, value} structs: they keep their order and polars reads them
without the map type, which it does not support.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any, Generic, NamedTuple, TypeVar

import pyarrow as pa

if TYPE_CHECKING:
    import polars as pl

    from driftline.results.profile import Profile

_COUNTS = pa.list_(pa.struct([("name", pa.string()), ("count", pa.int64())]))

FIELDS_SCHEMA = pa.schema(
    [
        ("path", pa.string()),
        ("types", _COUNTS),  # non-null values per type key, sorted by key
        ("container", pa.int64()),  # places the field could have held a value
        ("present", pa.int64()),
        ("nulls", pa.int64()),
        ("absent", pa.int64()),
        ("null_share", pa.float64()),
        ("absent_share", pa.float64()),
        ("nullable", pa.bool_()),
        ("classes", _COUNTS),  # string content classes, sorted by name
    ]
)

EVENTS_SCHEMA = pa.schema(
    [
        ("kind", pa.string()),
        ("level", pa.string()),  # breaking, widening or info (results/levels.py)
        ("path", pa.string()),
        ("before", pa.string()),
        ("after", pa.string()),
        ("file", pa.string()),
        ("partitions", pa.list_(pa.struct([("key", pa.string()), ("value", pa.string())]))),
        ("batch", pa.int64()),
        ("row", pa.int64()),
        ("line", pa.int64()),
        ("example", pa.string()),
        ("count", pa.int64()),
        # the episode's reach (docs/drift.md); ended_* are null while it is still going
        ("values", pa.int64()),
        ("rows", pa.int64()),
        ("batches", pa.int64()),
        ("files", pa.int64()),
        ("last_file", pa.string()),
        ("last_row", pa.int64()),
        ("still_going", pa.bool_()),
        ("ended_file", pa.string()),
        ("ended_batch", pa.int64()),
        ("ended_row", pa.int64()),
        ("recurrences", pa.int64()),
        # the partition kinds only (null for the others): the key, the values that differ, of how many
        ("partition_key", pa.string()),
        ("partition_values", pa.list_(pa.string())),
        ("partition_compared", pa.int64()),
    ]
)


T = TypeVar("T")


class Tables(NamedTuple, Generic[T]):
    """The two tables of a profile: one row per field path, one row per drift event.

    Tables[pyarrow.Table] from to_arrow, Tables[polars.DataFrame] from to_polars.
    """

    fields: T
    events: T


def _counts(m: Mapping[str, int]) -> list[dict[str, Any]]:
    return [{"name": k, "count": v} for k, v in sorted(m.items())]


def fields_table(profile: Profile) -> pa.Table:
    """One row per field path, in the profile's field order.

    >>> import driftline
    >>> fields_table(driftline.Profile("r", ())).num_rows
    0
    """
    rows = []
    for path, s in profile.fields.items():
        st = s.stats
        rows.append(
            {
                "path": path,
                "types": _counts(st.types),
                "container": s.container,
                "present": st.present,
                "nulls": st.nulls,
                "absent": s.absent,
                "null_share": s.share(st.nulls),
                "absent_share": s.share(s.absent),
                "nullable": s.nullable,
                "classes": _counts(st.classes),
            }
        )
    return pa.Table.from_pylist(rows, schema=FIELDS_SCHEMA)


def events_table(profile: Profile) -> pa.Table:
    """One row per drift event, in scan order.

    >>> import driftline
    >>> events_table(driftline.Profile("r", ())).column_names[:3]
    ['kind', 'level', 'path']
    """
    rows = []
    for e in profile.events:
        d = e.to_json()
        d["partitions"] = [{"key": k, "value": v} for k, v in e.partitions]
        d.pop("ended")
        d["example"] = e.example  # the JSON text: the table's column is a string
        d.update(ended_file=e.ended_file, ended_batch=e.ended_batch, ended_row=e.ended_row)
        rows.append(d)
    return pa.Table.from_pylist(rows, schema=EVENTS_SCHEMA)


def to_arrow(profile: Profile) -> Tables[pa.Table]:
    """Fields and events as pyarrow Tables."""
    return Tables(fields_table(profile), events_table(profile))


def to_polars(profile: Profile) -> Tables[pl.DataFrame]:
    """Fields and events as polars DataFrames (converted from the Arrow tables)."""
    import polars as pl

    frames: list[pl.DataFrame] = [pl.from_arrow(t) for t in to_arrow(profile)]  # type: ignore[misc]
    return Tables(*frames)
