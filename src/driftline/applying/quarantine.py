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


def quarantine_rows(
    touched: Sequence[Touched], origin: Origin, plans: Mapping[str, FieldPlan], lines: Mapping[int, int]
) -> pa.RecordBatch:
    """The quarantined values of one batch, ordered by row, then field path order, then cause."""
    order = {path: i for i, path in enumerate(plans)}
    rows: list[tuple[int, int, str, str, str | None]] = []
    for t in touched:
        if effect_kind(t.cause) == "note":
            continue
        for r, v in zip(pc.cast(t.rows, pa.int64()).to_pylist(), raw_texts(t.raw), strict=True):
            rows.append((origin.row_start + r, order.get(t.path, len(order)), t.path, t.cause, v))
    rows.sort(key=lambda x: (x[0], x[1], x[3]))
    cols = {
        "file": [origin.file] * len(rows),
        "partition": [origin.partition] * len(rows),
        "row": [r[0] for r in rows],
        "line": [lines.get(r[0]) for r in rows],
        "path": [r[2] for r in rows],
        "value": [r[4] for r in rows],
        "rule": [plans[r[2]].rule if r[2] in plans else "" for r in rows],
        "cause": [r[3] for r in rows],
        "kind": [effect_kind(r[3]) for r in rows],
        "reason": [CAUSES.get(r[3], r[3]) for r in rows],
    }
    return pa.RecordBatch.from_pydict(cols, schema=QUARANTINE_SCHEMA)


def rejected_rows(
    batch: pa.RecordBatch, rejected: Sequence[tuple[int, str]], origin: Origin, lines: Mapping[int, int]
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
        "line": [lines.get(r) for r in rows],
        "record": records,
        "reason": [why for _, why in rejected],
    }
    return pa.RecordBatch.from_pydict(cols, schema=REJECTED_SCHEMA)
