"""The recommendation as an Arrow schema: an IPC schema message, and its text form.

The IPC form is the encapsulated Schema message of the Arrow IPC format (what
``pa.Schema.serialize`` writes); ``pyarrow.ipc.read_schema`` reads it back equal, field
and schema metadata (the cast rules) included.
"""

from __future__ import annotations

import pyarrow as pa

from driftline.core.marker import remark
from driftline.core.words import count
from driftline.recommendation.plan import Recommendation, target_schema


def ipc_bytes(rec: Recommendation) -> bytes:
    """The Arrow IPC schema message of the unified schema.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
    >>> rec = driftline.scan(d).recommend()
    >>> read_ipc(ipc_bytes(rec)).equals(rec.arrow_schema(), check_metadata=True)
    True
    """
    return target_schema(rec).serialize().to_pybytes()


def read_ipc(data: bytes) -> pa.Schema:
    return pa.ipc.read_schema(pa.py_buffer(data))


def schema_text(rec: Recommendation) -> str:
    """The schema as pyarrow prints it, each top-level field with its rule."""
    schema = target_schema(rec)
    rows = count(rec.rows, "row")
    head = f"# {remark(f'Arrow schema recommended by driftline for {rec.root} ({rows})')}\n"
    return head + schema.to_string(show_field_metadata=True, show_schema_metadata=False) + "\n"
