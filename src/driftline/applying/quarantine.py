"""What the rules did to single values, as rows with their provenance.

The quarantine holds every value a rule turned into null or changed (the effects the
recommendation counts as nulled or changed: kinds 'null' and 'change'); notes (a
lower-case 't', an assumed zone) change no value and are only counted. A row that cannot
be cast at all (a required field left null, a kind the schema has no place for) goes whole
to the rejected rows, with the reason.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc

from driftline.recommendation.apply import Touched
from driftline.recommendation.plan import CAUSES, FieldPlan
from driftline.recommendation.raw import json_text, json_value, jsonable, plain_value

#: Causes whose values keep their meaning (only counted, never quarantined).
NOTE_CAUSES = frozenset({"lowercase", "assumed_zone"})
NULL_CAUSES = frozenset({"null_token", "empty", "unparsed"})

_PROVENANCE = [
    pa.field("file", pa.string(), nullable=False),
    pa.field("partition", pa.string(), nullable=False),
    pa.field("row", pa.int64(), nullable=False),
    pa.field("line", pa.int64()),
]
QUARANTINE_SCHEMA = pa.schema(
    [
        *_PROVENANCE,
        pa.field("path", pa.string(), nullable=False),
        pa.field("value", pa.string()),
        pa.field("rule", pa.string(), nullable=False),
        pa.field("cause", pa.string(), nullable=False),
        pa.field("kind", pa.string(), nullable=False),
        pa.field("reason", pa.string(), nullable=False),
    ]
)
REJECTED_SCHEMA = pa.schema(
    [*_PROVENANCE, pa.field("record", pa.string()), pa.field("reason", pa.string(), nullable=False)]
)


def effect_kind(cause: str) -> str:
    """'null', 'change' or 'note', as the recommendation's effects name them."""
    return "note" if cause in NOTE_CAUSES else "null" if cause in NULL_CAUSES else "change"


def _text(v: Any) -> str | None:
    """A raw value as text: a string as it is, anything else as its JSON text."""
    if v is None:
        return None
    return v if isinstance(v, str) else json_text(v)


def raw_texts(raw: pa.Array) -> list[str | None]:
    """Each raw value as text (strings and CSV cells as they are; numbers, lists, ... as JSON)."""
    if pa.types.is_string(raw.type) or pa.types.is_large_string(raw.type):
        return raw.to_pylist()
    if pa.types.is_struct(raw.type):  # a variant (wrapped scalars, values kept as JSON text): typed raws are scalars
        return [_text(plain_value(v)) for v in jsonable(raw).to_pylist()]
    return [_text(json_value(v)) for v in jsonable(raw).to_pylist()]


@dataclass(frozen=True, slots=True)
class Origin:
    """Where a batch came from: its file, its partition folder and its first row."""

    file: str
    partition: str
    row_start: int


def _constant(value: str, n: int) -> pa.Array:
    return pc.fill_null(pa.nulls(n, pa.string()), value)


def _lines_of(rows: pa.Array, origin: Origin, starts: Sequence[int] | None) -> pa.Array:
    """The line each row (of the file) starts on: starts holds the batch's rows' lines, if known."""
    if starts is None:
        return pa.nulls(len(rows), pa.int64())
    at = pc.subtract(rows, origin.row_start)
    if isinstance(starts, range) and starts.step == 1:  # one line a row (the common CSV case)
        return pc.add(at, starts.start)
    return pa.array(starts, pa.int64()).take(at)


def quarantine_rows(
    touched: Sequence[Touched], origin: Origin, plans: Mapping[str, FieldPlan], starts: Sequence[int] | None
) -> pa.RecordBatch:
    """The quarantined values of one batch, ordered by row, then field path order, then cause
    (built column by column: a batch can quarantine every value of a column); starts: the
    line each row of the batch starts on, when the reader knows it."""
    order = {path: i for i, path in enumerate(plans)}
    parts = []
    for t in touched:
        n = len(t.rows)
        if effect_kind(t.cause) == "note" or not n:
            continue
        text = t.raw if pa.types.is_string(t.raw.type) else pa.array(raw_texts(t.raw), pa.string())
        parts.append(
            pa.table(
                {
                    "row": pc.add(pc.cast(t.rows, pa.int64()), origin.row_start),
                    "order": pc.fill_null(pa.nulls(n, pa.int64()), order.get(t.path, len(order))),
                    "path": _constant(t.path, n),
                    "value": text,
                    "rule": _constant(plans[t.path].rule if t.path in plans else "", n),
                    "cause": _constant(t.cause, n),
                    "kind": _constant(effect_kind(t.cause), n),
                    "reason": _constant(CAUSES.get(t.cause, t.cause), n),
                }
            )
        )
    if not parts:
        return pa.RecordBatch.from_pylist([], schema=QUARANTINE_SCHEMA)
    table = pa.concat_tables(parts).sort_by([("row", "ascending"), ("order", "ascending"), ("cause", "ascending")])
    n = table.num_rows
    rows = table.column("row").combine_chunks()
    line = _lines_of(rows, origin, starts)
    columns = {
        "file": _constant(origin.file, n),
        "partition": _constant(origin.partition, n),
        "row": rows,
        "line": line,
        **{k: table.column(k).combine_chunks() for k in ("path", "value", "rule", "cause", "kind", "reason")},
    }
    return pa.RecordBatch.from_arrays([columns[f.name] for f in QUARANTINE_SCHEMA], schema=QUARANTINE_SCHEMA)


def rejected_rows(
    batch: pa.RecordBatch, rejected: Sequence[tuple[int, str]], origin: Origin, starts: Sequence[int] | None
) -> pa.RecordBatch:
    """The rows that could not be cast, each whole as the JSON text of its raw values."""
    records = []
    for i, _ in rejected:
        rec = {name: plain_value(batch.column(name)[i].as_py()) for name in batch.schema.names}
        records.append(json_text(rec))
    rows = [origin.row_start + i for i, _ in rejected]
    cols = {
        "file": [origin.file] * len(rows),
        "partition": [origin.partition] * len(rows),
        "row": rows,
        "line": [starts[i] if starts is not None else None for i, _ in rejected],
        "record": records,
        "reason": [why for _, why in rejected],
    }
    return pa.RecordBatch.from_pydict(cols, schema=REJECTED_SCHEMA)
