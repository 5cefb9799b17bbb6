"""One logical type across formats (results/reading.py): the same values in two formats are no
drift, a real change between them is.

Each case writes the files a scan reads in sorted order and lists the exact events. The
facts the rule rests on: a CSV field is text with no type (RFC 4180 section 2 defines fields
as characters, and says nothing of types); JSON has numbers, booleans and strings but no date
or time (RFC 8259 section 3); RFC 3339 section 5.6 is the text of an instant; a Parquet
TIMESTAMP with isAdjustedToUTC is an instant (Parquet format, LogicalTypes.md "TIMESTAMP"),
which pyarrow reads as timestamp[unit, UTC].
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import driftline
from driftline.core.stats import Example, FieldStats, class_sample, type_sample
from driftline.results.reading import Seen, read_as, spelling_classes

TS = "2026-03-01T00:00:00Z"  # source: RFC 3339 section 5.6 date-time (Z offset)
UTC_TS = pa.table({"id": [1], "x": pa.array([0], pa.timestamp("us", "UTC"))})
LOCAL_TS = pa.table({"id": [1], "x": pa.array([0], pa.timestamp("us"))})


def _write(folder: Path, name: str, content: Any) -> None:
    path = folder / name
    if name.endswith(".parquet"):
        pq.write_table(content, path)
    elif name.endswith(".jsonl"):
        path.write_text("".join(json.dumps(r) + "\n" for r in content), encoding="utf-8")
    else:
        path.write_bytes(content.replace("\n", "\r\n").encode())  # source: RFC 4180 section 2, CRLF


def _events(tmp_path: Path, files: list[tuple[str, Any]]) -> list[tuple[str, str, str | None, str | None, str]]:
    for name, content in files:
        _write(tmp_path, name, content)
    return [(e.kind, e.path, e.before, e.after, e.file) for e in driftline.scan(tmp_path).events]


# (what it shows, files in scan order, the events expected)
SAME = [
    (
        "JSON RFC 3339 strings, then CSV cells of that text",
        [("a.jsonl", [{"id": 1, "x": TS}]), ("b.csv", f"id,x\n1,{TS}\n")],
    ),
    ("CSV cells, then the JSON strings", [("a.csv", f"id,x\n1,{TS}\n"), ("b.jsonl", [{"id": 1, "x": TS}])]),
    ("JSON number 5, then the cell 5", [("a.jsonl", [{"id": 1, "x": 5}]), ("b.csv", "id,x\n1,5\n")]),
    ("the cell 5, then JSON number 5", [("a.csv", "id,x\n1,5\n"), ("b.jsonl", [{"id": 1, "x": 5}])]),
    ("JSON string '5', then the cell 5", [("a.jsonl", [{"id": 1, "x": "5"}]), ("b.csv", "id,x\n1,5\n")]),
    ("the cell 5, then JSON string '5'", [("a.csv", "id,x\n1,5\n"), ("b.jsonl", [{"id": 1, "x": "5"}])]),
    (
        "JSON 12.5, then the cell 5 (an integer a float64 holds)",
        [("a.jsonl", [{"id": 1, "x": 12.5}]), ("b.csv", "id,x\n1,5\n")],
    ),
    ("JSON true, then the cell true", [("a.jsonl", [{"id": 1, "x": True}]), ("b.csv", "id,x\n1,true\n")]),
    ("the cell 007, then JSON string '007'", [("a.csv", "id,x\n1,007\n"), ("b.jsonl", [{"id": 1, "x": "007"}])]),
    (
        "JSON date string, then the cell",
        [("a.jsonl", [{"id": 1, "x": "2026-03-01"}]), ("b.csv", "id,x\n1,2026-03-01\n")],
    ),
    ("JSON empty string, then an empty cell", [("a.jsonl", [{"id": 1, "x": ""}]), ("b.csv", "id,x\n1,\n")]),
    ("Parquet timestamp[us, UTC], then the CSV cell", [("a.parquet", UTC_TS), ("b.csv", f"id,x\n1,{TS}\n")]),
    ("the CSV cell, then Parquet timestamp[us, UTC]", [("a.csv", f"id,x\n1,{TS}\n"), ("b.parquet", UTC_TS)]),
    (
        "JSON RFC 3339 strings, then Parquet timestamp[us, UTC]",
        [("a.jsonl", [{"id": 1, "x": TS}]), ("b.parquet", UTC_TS)],
    ),
    (
        "Parquet timestamp[us, UTC], then JSON RFC 3339 strings",
        [("a.parquet", UTC_TS), ("b.jsonl", [{"id": 1, "x": TS}])],
    ),
    (
        "JSON local strings, then Parquet timestamp[us] without a zone",
        [("a.jsonl", [{"id": 1, "x": "2026-03-01 00:00:00"}]), ("b.parquet", LOCAL_TS)],
    ),
]


@pytest.mark.parametrize(("about", "files"), SAME, ids=[s[0] for s in SAME])
def test_the_same_values_in_two_formats_are_no_drift(tmp_path: Path, about: str, files: list[tuple[str, Any]]) -> None:
    assert _events(tmp_path, files) == []


CHANGED = [
    (
        "numbers, then labels in the CSV",
        [("a.jsonl", [{"id": 1, "x": 5}]), ("b.csv", "id,x\n1,north\n")],
        [("type-conflict", "x", "int64", "string", "b.csv")],
    ),
    (
        "JSON strings of digits, then labels in the CSV (digits turning into labels)",
        [("a.jsonl", [{"id": 1, "x": "12"}]), ("b.csv", "id,x\n1,north\n")],
        [("textclass-changed", "x", "integer", "text", "b.csv")],
    ),
    (
        "JSON integers, then decimals in the CSV",
        [("a.jsonl", [{"id": 1, "x": 5}]), ("b.csv", "id,x\n1,12.5\n")],
        [("type-widened", "x", "int64", "float64", "b.csv")],
    ),
    (
        "JSON RFC 3339, then local date-times in the CSV (the zone is gone)",
        [("a.jsonl", [{"id": 1, "x": TS}]), ("b.csv", "id,x\n1,2026-03-01 00:00:00\n")],
        [("textclass-changed", "x", "timestamp_rfc3339", "timestamp_local", "b.csv")],
    ),
    (
        "Parquet instants, then local CSV cells",
        [("a.parquet", UTC_TS), ("b.csv", "id,x\n1,2026-03-01 00:00:00\n")],
        [("type-conflict", "x", "timestamp[us, UTC]", "timestamp[us]", "b.csv")],
    ),
    (
        "JSON RFC 3339 strings, then Parquet timestamps without a zone",
        [("a.jsonl", [{"id": 1, "x": TS}]), ("b.parquet", LOCAL_TS)],
        [("type-conflict", "x", "string", "timestamp[us]", "b.parquet")],
    ),
    (
        "JSON text, then an empty cell: RFC 4180 cannot tell it from a missing value",
        [("a.jsonl", [{"id": 1, "x": "a"}]), ("b.csv", "id,x\n1,\n")],
        [("nulls-begin", "x", None, "null", "b.csv")],
    ),
    (
        # The cell 13 reads as the string the field held; the empty cell is a null, not a
        # string of a new class (no textclass-changed integer → empty).
        "JSON string '12', then cells 13 and empty",
        [("a.jsonl", [{"id": 1, "x": "12"}]), ("b.csv", "id,x\n1,13\n2,\n")],
        [("nulls-begin", "x", None, "null", "b.csv")],
    ),
    (
        # A JSON number turned string is a change within JSON; the CSV between them reads as
        # the number the field held, and does not hide it.
        "JSON 5, the cell 5, then JSON string '5'",
        [("a.jsonl", [{"id": 1, "x": 5}]), ("b.csv", "id,x\n1,5\n"), ("c.jsonl", [{"id": 1, "x": "5"}])],
        [("type-conflict", "x", "int64", "string", "c.jsonl")],
    ),
]


@pytest.mark.parametrize(("about", "files", "expected"), CHANGED, ids=[c[0] for c in CHANGED])
def test_a_real_change_between_formats_is_an_event(
    tmp_path: Path, about: str, files: list[tuple[str, Any]], expected: list[tuple[str, ...]]
) -> None:
    assert _events(tmp_path, files) == expected


def test_a_cell_read_as_a_string_keeps_its_count_and_first_example() -> None:
    # Two cells of class integer (typed int64 by the reader) where the field held strings.
    first = Example("b.csv", 0, 2, '"5"')
    st = FieldStats(
        types={"int64": 2},
        classes={"integer": 2},
        samples={type_sample("int64"): (first,), class_sample("integer"): (first,)},
        text=2,
    )
    read = read_as(st, Seen(types={"string"}, classes={"integer"}))
    assert (read.types, read.classes, read.text) == ({"string": 2}, {"integer": 2}, 0)
    assert read.first(type_sample("string")) == first and read.first(type_sample("int64")) is None
    # Where the field held integers, the cells are integers: the statistics are unchanged.
    assert read_as(st, Seen(types={"float64"})) is st


def test_native_types_map_to_the_classes_that_spell_them() -> None:
    # source: RFC 3339 section 5.6 (time-offset: Z or ±hh:mm) and pyarrow's timestamp tz
    assert spelling_classes("timestamp[ns, Europe/Paris]") == ("timestamp_rfc3339", "timestamp_offset")
    assert spelling_classes("timestamp[s]") == ("timestamp_local",)
    assert spelling_classes("date32") == ("date",)
    assert spelling_classes("string") == ()
