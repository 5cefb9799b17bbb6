"""The typed rows as a Delta Lake table, written only through the deltalake package's own writer.

The batches stream into write_deltalake (memory bounded by the batch, as for Parquet); the
partition columns are the input's key=value folder keys, added to each batch with their
types, since Delta partitions by columns. Delta's transaction log makes the write atomic: an
interrupted run leaves the earlier table version as it was. The log records the time of each
commit, so a re-run is not byte-identical (the table's rows are).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from pathlib import Path

import pyarrow as pa

from driftline.core.lattice import parse_key, to_arrow
from driftline.errors import OptionError


def delta_schema(schema: pa.Schema, columns: Sequence[dict[str, str]]) -> pa.Schema:
    """The table's schema: the recommended one, then the partition columns with their types."""
    fields = [*schema, *(pa.field(c["name"], to_arrow(parse_key(c["type"]))) for c in columns)]
    return pa.schema(fields, metadata=schema.metadata)


def with_partitions(batch: pa.RecordBatch, values: dict[str, str], schema: pa.Schema) -> pa.RecordBatch:
    """A batch with its file's folder values as typed columns (null where the file has no such key)."""
    n = batch.num_rows
    extra = []
    for f in schema:
        if f.name in batch.schema.names:
            continue
        text = values.get(f.name)
        extra.append(pa.array([text] * n, pa.string()).cast(f.type))
    return pa.RecordBatch.from_arrays([*batch.columns, *extra], schema=schema)


def write_delta(
    target: Path, schema: pa.Schema, keys: Sequence[str], batches: Callable[[], Iterator[pa.RecordBatch]]
) -> None:
    """write_deltalake over the batches, overwriting the table's previous version."""
    try:
        from deltalake import write_deltalake
    except ImportError:
        raise OptionError("--table-format delta needs the deltalake package: pip install 'driftline[delta]'") from None
    reader = pa.RecordBatchReader.from_batches(schema, batches())
    write_deltalake(str(target), reader, mode="overwrite", partition_by=list(keys) or None, schema_mode="overwrite")
