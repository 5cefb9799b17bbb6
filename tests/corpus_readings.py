"""Readings of the real-file corpus (fixtures/corpus/) by driftline, DuckDB and pyarrow.

Shared by tests/conformance/test_corpus.py and scripts/corpus_table. Each reading is rows × columns
(top-level fields for JSON), or the text of the error the reader raised.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "fixtures" / "corpus"
MANIFEST = CORPUS / "manifest.toml"

Shape = tuple[int, int]


@dataclass(frozen=True)
class Reading:
    shape: Shape | None  # None when the reader raised
    error: str = ""
    errors: int = 0  # error-severity problems (driftline only)

    def text(self) -> str:
        if self.shape is None:
            return f"error: {self.error}"
        return f"{self.shape[0]:,} × {self.shape[1]}"


def entries() -> list[dict[str, Any]]:
    with MANIFEST.open("rb") as fh:
        return tomllib.load(fh)["file"]


def is_json(entry: dict[str, Any]) -> bool:
    return entry["path"].endswith((".json", ".jsonl", ".ndjson"))


def read_driftline(entry: dict[str, Any]) -> tuple[Reading, Any]:
    """The scan of one corpus file: its reading and the Profile."""
    import driftline
    from driftline.core import paths

    profile = driftline.scan(CORPUS / entry["path"])
    top = [p for p in profile.fields if paths.parent(p)[0] is None]
    return Reading((profile.rows, len(top)), errors=profile.error_count), profile


def _sql_literal(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    return "'" + str(value).replace("'", "''") + "'"


def read_duckdb(entry: dict[str, Any]) -> Reading:
    """DuckDB's read_csv / read_json with auto-detection, plus the manifest's explicit options."""
    import duckdb

    options = entry.get("duckdb", {}).get("options", {})
    function = "read_json" if is_json(entry) else "read_csv"
    args = "".join(f", {k} = {_sql_literal(v)}" for k, v in options.items())
    con = duckdb.connect()
    try:
        rel = con.sql(f"SELECT * FROM {function}({_sql_literal(str(CORPUS / entry['path']))}{args})")
        return Reading(rel.shape)
    except duckdb.Error as exc:
        return Reading(None, str(exc).splitlines()[0])
    finally:
        con.close()


def read_pyarrow(entry: dict[str, Any]) -> Reading:
    """pyarrow.csv / pyarrow.json with the manifest's explicit options."""
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.json as pjson

    options = entry.get("pyarrow", {})
    path = CORPUS / entry["path"]
    try:
        if is_json(entry):
            return Reading(pjson.read_json(path).shape)
        parse = pcsv.ParseOptions(**options.get("parse", {}))
        if options.get("invalid_rows") == "skip":
            parse.invalid_row_handler = lambda row: "skip"
        table = pcsv.read_csv(path, read_options=pcsv.ReadOptions(**options.get("read", {})), parse_options=parse)
        return Reading(table.shape)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError) as exc:
        return Reading(None, str(exc).splitlines()[0])


def expected(entry: dict[str, Any]) -> Shape:
    return (entry["rows"], entry["columns"])


def documented(entry: dict[str, Any], reference: str) -> tuple[Shape | None, str, str] | None:
    """The difference the manifest lists for a reference: (shape or None, error text, reason)."""
    spec = entry.get(reference, {})
    if "reason" not in spec:
        return None
    shape = (spec["rows"], spec["columns"]) if "rows" in spec else None
    return shape, spec.get("error", ""), spec["reason"]


def agrees(entry: dict[str, Any], reference: str, reading: Reading) -> bool:
    """True when the reference reads the expected shape, or differs exactly as documented."""
    listed = documented(entry, reference)
    if listed is None:
        return reading.shape == expected(entry)
    shape, error, _ = listed
    if shape is not None:
        return reading.shape == shape
    return reading.shape is None and error in reading.error
