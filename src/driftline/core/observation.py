"""Observation: what one batch of one file shows, per field path."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from driftline.core.shapetally import ShapeTally
from driftline.core.stats import FieldStats, pickled_by_fields

# Inferred type of a text cell (CSV/TSV) by its content class; None means null.
TEXT_CLASS_TYPE: dict[str, str | None] = {
    "empty": None,
    "null_token": None,
    "boolean": "bool",
    "zero_padded": "string",  # a code: a number would drop its leading zeros
    "integer": "int64",
    "decimal": "float64",
    "float": "float64",
    "float_out_of_range": "float64",  # pyarrow reads it as ±inf or 0; the class says so
    "date": "date32",
    "timestamp_rfc3339": "timestamp[us, UTC]",
    "timestamp_offset": "timestamp[us, UTC]",
    "timestamp_local": "timestamp[us]",
    "text": "string",
}


@pickled_by_fields
@dataclass(frozen=True, slots=True)
class Observation:
    """One batch: the file it came from, its place in the file, and per path statistics.

    row_start is the 0-based index within the file of the batch's first row. unobserved
    names the top-level columns left out because driftline cannot observe their type, each
    with why; the reader turns them into one file problem per column. It is not part of the
    saved report: the problems are.  other_paths
    counts the distinct paths past the cap on paths (ReadOptions.max_paths) that the batch
    held, other_values their values; neither is in fields. shapes is the batch's shape tally
    (core/shapetally.py; None for a batch that has none, CSV or Parquet): it is not part of
    the saved report either (results/shapes.py writes what it finds from it), nor of equality.
    """

    file: str
    batch: int
    row_start: int
    rows: int
    fields: dict[str, FieldStats] = field(default_factory=dict)
    unobserved: tuple[tuple[str, str], ...] = ()
    other_paths: int = 0
    other_values: int = 0
    shapes: ShapeTally | None = field(default=None, compare=False)

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "batch": self.batch,
            "row_start": self.row_start,
            "rows": self.rows,
            "fields": {p: s.to_json() for p, s in self.fields.items()},
        }
        if self.other_paths:  # written only when a cap was reached: other reports stay as they were
            out["other_paths"], out["other_values"] = self.other_paths, self.other_values
        return out

    @staticmethod
    def from_json(file: str, d: Mapping[str, Any]) -> Observation:
        return Observation(
            file=file,
            batch=d["batch"],
            row_start=d["row_start"],
            rows=d["rows"],
            fields={p: FieldStats.from_json(s) for p, s in d["fields"].items()},
            other_paths=d.get("other_paths", 0),
            other_values=d.get("other_values", 0),
        )
