"""A second landing directory, shaped unlike the demo, for the recommender's end-to-end tests.

``make_orders(root)`` writes orders from three sources: JSON Lines (gzip) from a web shop,
a CSV export from a till, and a Parquet file from a nightly batch. Every value that a
cast rule would null or change is placed on purpose; EXPECTED lists them, and
tests/recommendation/test_orders_fixture.py checks that the scan saw exactly those (other
test modules import make_orders and EXPECTED).
"""

from __future__ import annotations

import csv
import datetime as dt
import decimal
import gzip
import io
import json
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

# What the recommender should say about the fixture, counted by hand from the rows below.
EXPECTED = {
    "amount": ("parse_float", "float64", {"null_token": 2, "empty": 1}),
    "balance": ("parse_decimal", "decimal(18,4)", {"null_token": 1}),
    "big": ("widen_numeric", "float64", {"unsafe_int": 3}),
    "created": ("parse_timestamp", "timestamp[us, UTC]", {"leap_second": 1, "lowercase": 1, "assumed_zone": 11}),
    "day": ("parse_date", "date32", {}),
    "code": ("identity", "string", {}),
    "flag": ("format_as_string", "string", {"as_text": 20}),
    "id": ("parse_integer", "int64", {}),
    "items": ("identity", "list<struct<qty: int64, sku: string>>", {}),
    "items[].qty": ("parse_integer", "int64", {}),
    "labels": ("wrap_scalar_in_list", "list<string>", {"wrapped": 11, "null_token": 1}),
    "meta": ("merge_struct", "struct<agent: string, ip: string>", {}),
    "note": ("map_null_tokens", "string", {"null_token": 1}),
    "paid": ("parse_boolean", "bool", {"null_token": 1}),
    "payload": ("keep_as_json_text", "string", {"as_json_text": 20}),
    "attrs": ("identity", "map<string, int64>", {}),
}

WEB_ROWS = 20  # JSON Lines rows
TILL_ROWS = 8  # CSV rows
BATCH_ROWS = 6  # Parquet rows


def _web(i: int) -> dict:
    row: dict = {"id": i, "day": f"2026-12-{1 + i % 9:02d}", "code": f"0{1000 + i}"}
    row["amount"] = (
        (f"{10 + i}.{i % 10}5" if i % 4 else 10.5 + i) if i not in (3, 7, 11) else {3: "N/A", 7: "-", 11: ""}[i]
    )
    row["balance"] = f"{12345678901234 + i}.{1234 + i}" if i != 5 else "null"
    row["big"] = {0: 2**53 + 1, 1: 2**53 + 2, 2: -(2**53 + 3)}.get(i, i * 1.5 if i % 2 else i)
    row["paid"] = (True if i % 3 else "FALSE") if i != 9 else "n/a"
    stamps = {
        0: "2026-12-01t10:00:00z",
        1: "2016-12-31T23:59:60Z",
        2: "2026-12-01T10:00:00+02:00",
        3: "2026-12-01 10:00:00+0100",
        4: "2026-12-01T10:00:00.125Z",
    }
    row["created"] = stamps.get(i, f"2026-12-01T{i:02d}:30:00Z" if i % 5 else f"2026-12-01 {i:02d}:30:00")
    row["items"] = [{"sku": f"A{i}", "qty": i % 3 + 1}] + ([{"sku": "B", "qty": str(i)}] if i % 4 == 1 else [])
    row["meta"] = {"ip": f"10.0.0.{i}"} | ({"agent": "cli"} if i % 2 else {})
    row["labels"] = ["vip", "new"] if i % 5 == 0 else ("vip" if i % 5 == 1 else ["repeat"])
    row["flag"] = bool(i % 2) if i < 10 else i % 2
    row["payload"] = {"k": i} if i % 3 == 0 else f"raw-{i}"
    row["note"] = {4: "n/a", 8: "NULL"}.get(i, f"note {i}")
    return row


def _till(i: int) -> dict:
    return {
        "id": str(100 + i),
        "amount": f"{5 + i}.25",
        "paid": "TRUE" if i % 2 else "false",
        "created": f"2026-12-02 {8 + i:02d}:15:00",
        "labels": "vip" if i != 3 else "n/a",
        "day": f"2026-12-1{i}",
        "balance": f"{98765432109876 + i}.5",
        "note": "N/A" if i == 2 else f"till {i}",
    }


def make_orders(root: Path) -> Path:
    """Write the fixture under root/landing; returns the landing folder."""
    landing = root / "landing"
    web = landing / "source=web" / "date=2026-12-01" / "orders.jsonl.gz"
    web.parent.mkdir(parents=True)
    lines = "".join(json.dumps(_web(i)) + "\n" for i in range(WEB_ROWS)).encode()
    web.write_bytes(gzip.compress(lines, mtime=0))
    till = landing / "source=till" / "date=2026-12-02" / "export.csv"
    till.parent.mkdir(parents=True)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(_till(0)), lineterminator="\n")
    writer.writeheader()
    for i in range(TILL_ROWS):
        writer.writerow(_till(i))
    till.write_text(buf.getvalue())
    batch = landing / "source=batch" / "date=2026-12-03" / "orders.parquet"
    batch.parent.mkdir(parents=True)
    utc = dt.UTC
    table = pa.table(
        {
            "id": pa.array(range(200, 200 + BATCH_ROWS), pa.int32()),
            "created": pa.array(
                [dt.datetime(2026, 12, 3, h, tzinfo=utc) for h in range(BATCH_ROWS)], pa.timestamp("ms", "UTC")
            ),
            "day": pa.array([dt.date(2026, 12, 3)] * BATCH_ROWS, pa.date32()),
            "labels": pa.array([["bulk"]] * BATCH_ROWS, pa.list_(pa.string())),
            "attrs": pa.array([[("w", i)] for i in range(BATCH_ROWS)], pa.map_(pa.string(), pa.int64())),
            "balance": pa.array([decimal.Decimal("1.5000")] * BATCH_ROWS, pa.decimal128(10, 4)),
        }
    )
    pq.write_table(table, batch)
    return landing
