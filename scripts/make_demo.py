#!/usr/bin/env python3
"""Build the bundled demo landing directory: air-quality stations uploading readings.

Usage::

    python scripts/make_demo.py [TARGET_DIR]      # default: <repo>/demo

Writes ``TARGET/landing/`` (the raw files a scan reads), ``TARGET/manifest.json``
(every injected change with its exact file and row, plus a file inventory) and a
small marker file ``TARGET/.make_demo``.  A non-empty TARGET without that marker
is refused; one with it gets its ``landing/`` and ``manifest.json`` replaced.

Importable: ``build(root) -> list[dict]`` writes the same tree and returns the
manifest's change entries.  The output is byte-identical on every run with the
same Python, zlib and pyarrow: one ``random.Random(2026)`` drawn in a fixed
order, gzip with ``mtime=0`` and no file name, parquet with fixed writer options.

Stdlib + pyarrow only.  Layout (paths relative to ``landing/``; "row" is the
0-based record index inside a file, "line" the 1-based physical line)::

    readings/.staging-note                                   hidden, skipped
    readings/_SUCCESS                                        marker, skipped
    readings/region={east,north,south}/day=2026-11-27..30/part-0000.jsonl.gz
    readings/region=south/day=2026-11-30/part-0001.parquet   nightly job: late rows
    readings/region=west/day=2026-11-2{8,9}/export.csv       legacy CSV export

One dataset, the readings, in three formats.  Sorted relative path is the scan
order, so the nightly job's Parquet (native types, one extra column) comes right
after the JSON Lines file of the same partition.  Its ``ts`` is a native
``timestamp[us, UTC]`` where the feed sends RFC 3339 strings, and the west CSV
writes ``ts`` as local ``YYYY-MM-DD HH:MM:SS`` cells like the south feed: the same
values in other formats, which the manifest does not list (a scan compares a field
by one logical type across formats, docs/drift.md).
"""

from __future__ import annotations

import argparse
import csv
import gzip
import hashlib
import io
import json
import math
import random
import re
import shutil
import sys
from collections.abc import Callable
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq

SEED = 2026
MARKER_NAME = ".make_demo"
MARKER_TEXT = "made by scripts/make_demo.py; landing/ and manifest.json here are regenerated\n"
MANIFEST_FORMAT = 1

DAYS = ("2026-11-27", "2026-11-28", "2026-11-29", "2026-11-30")
JSON_REGIONS = ("east", "north", "south")
WEST_DAYS = ("2026-11-28", "2026-11-29")

# region -> (station id prefix, number of stations, base temperature in degrees C)
REGIONS: dict[str, tuple[str, int, float]] = {
    "east": ("E", 14, 7.0),
    "north": ("N", 15, 1.5),
    "south": ("S", 14, 12.5),
    "west": ("W", 13, 9.0),
}
DROP_SHARE = 0.04  # share of hourly readings that never arrive

TAG_SETS: tuple[tuple[str, ...], ...] = (
    ("roadside",),
    ("urban", "rooftop"),
    ("school",),
    ("industrial", "fenceline"),
    ("park",),
    ("urban",),
    (),
    ("rural", "hilltop"),
)
FIRMWARES = ("2.3.1", "2.3.1", "2.3.1", "2.3.0", "2.2.0")

CHANGE_KINDS = (
    "type-conflict",
    "nested-new",
    "nulls-begin",
    "field-gone",
    "textclass-changed",
    "type-widened",
    "field-new",
    "malformed-line",
    "partition-lacks",
    "partition-type",
    "partition-nulls",
)

# The injections, as rules of (region, station index, UTC time).  Station
# indices are positions in the region's sorted station list.
EAST_FW240_STATIONS = (2, 7, 10)  # firmware 2.4.0 from FW240_FROM: pm25 as a string
FW240_FROM = datetime(2026, 11, 29, 6, tzinfo=UTC)
NA_SHARE = 0.07  # share of 2.4.0 readings whose pm25 string is "n/a"
CYCLES_FROM = datetime(2026, 11, 28, 10, tzinfo=UTC)  # north: battery.charge_cycles
HUMIDITY_NULL_STATIONS = (3, 8, 12)  # south, from HUMIDITY_NULL_FROM: humidity null
HUMIDITY_NULL_FROM = datetime(2026, 11, 30, 12, tzinfo=UTC)
TEMP_GONE_DAY = "2026-11-30"  # north: temp_c key missing from this day on
SPACE_TS_FROM = datetime(2026, 11, 29, 9, tzinfo=UTC)  # south: "YYYY-MM-DD HH:MM:SS"
TAGS_STRING_STATION = 5  # east, on TAGS_STRING_WINDOW: tags as a bare string
TAGS_STRING_WINDOW = (
    datetime(2026, 11, 28, 7, tzinfo=UTC),
    datetime(2026, 11, 28, 13, tzinfo=UTC),
)
PM10_FLOAT_FROM = datetime(2026, 11, 28, 14, tzinfo=UTC)  # south: pm10 as a float
MALFORMED_FILE = ("north", "2026-11-29")
MALFORMED_BEFORE = datetime(2026, 11, 29, 15, tzinfo=UTC)  # cut line before this hour's first

WEST_NOTES = {  # day -> (row, site_note with a comma, needs RFC 4180 quoting)
    "2026-11-28": (41, "mast replaced, readings may jump"),
    "2026-11-29": (203, 'inlet cleaned, "B" sensor swapped'),
}
WEST_BLANK_SHARE = 0.02  # share of empty temp_c / humidity / battery cells in the CSV

# The nightly job: stations with a store-and-forward buffer also take a sample half
# an hour after their usual one; those late rows reach the landing only through
# the job's Parquet file, in the last partition of one region.
NIGHTLY_PARTITION = ("south", DAYS[-1])
NIGHTLY_FILE = f"readings/region={NIGHTLY_PARTITION[0]}/day={NIGHTLY_PARTITION[1]}/part-0001.parquet"
LATE_STATIONS = (1, 3, 6, 8, 10, 12)  # includes every HUMIDITY_NULL_STATIONS station
LATE_OFFSET_MINUTES = 30
RECONNECT_FROM = datetime(2026, 12, 1, 0, 5, tzinfo=UTC)  # buffers flush after midnight

PARQUET_OPTIONS: dict[str, Any] = {
    "version": "2.6",
    "data_page_version": "1.0",
    "compression": "zstd",
    "compression_level": 3,
    "use_dictionary": ["station_id", "firmware"],
    "write_statistics": True,
    "row_group_size": 1024,
    "store_schema": True,
}


class TargetNotOursError(RuntimeError):
    """The target directory is not empty and was not made by this script."""


# --------------------------------------------------------------------------- stations


def _make_stations(rng: random.Random) -> dict[str, list[dict[str, Any]]]:
    stations: dict[str, list[dict[str, Any]]] = {}
    for region, (prefix, count, _base) in REGIONS.items():
        numbers = sorted(rng.sample(range(1, 40), count))
        stations[region] = [
            {
                "id": f"{prefix}-{n:03d}",
                "minute": rng.randrange(60),
                "pm_base": rng.uniform(6.0, 22.0),
                "hum_base": rng.randrange(55, 85),
                "volt": rng.uniform(3.9, 4.15),
                "tags": list(rng.choice(TAG_SETS)),
                "firmware": rng.choice(FIRMWARES),
                "cycles": rng.randrange(40, 400),
            }
            for n in numbers
        ]
    # the bare-string tags injection needs a station that has tags
    east = stations["east"][TAGS_STRING_STATION]
    if not east["tags"]:
        east["tags"] = ["roadside"]
    return stations


def _readings(
    rng: random.Random,
    region: str,
    day: str,
    stations: list[dict[str, Any]],
    indices: tuple[int, ...] | None = None,
    offset_minutes: int = 0,
) -> list[dict[str, Any]]:
    """Plain readings of one region and day, sorted by time: the truth behind the files.

    ``indices`` limits the stations (default: all); ``offset_minutes`` moves each
    station's sampling minute (wrapping within the hour, so a sample stays in its hour).
    """
    start = datetime.fromisoformat(day).replace(tzinfo=UTC)
    day_index = DAYS.index(day)
    base_temp = REGIONS[region][2]
    out = []
    for index, st in enumerate(stations):
        if indices is not None and index not in indices:
            continue
        minute = (st["minute"] + offset_minutes) % 60
        for hour in range(24):
            jitter = rng.randrange(60)
            noise = (rng.gauss(0, 1.5), rng.uniform(1.4, 1.9), rng.gauss(0, 0.6), rng.gauss(0, 4))
            if rng.random() < DROP_SHARE:
                continue
            dt = start + timedelta(hours=hour, minutes=minute, seconds=jitter)
            phase = 2 * math.pi * (hour - 8) / 24
            pm25 = max(0.5, round(st["pm_base"] * (1 + 0.35 * math.sin(phase)) + noise[0], 1))
            temp = round(base_temp + 4 * math.sin(2 * math.pi * (hour - 9) / 24) + noise[2], 1)
            humidity = int(st["hum_base"] - 15 * math.sin(phase) + noise[3])
            volt = round(st["volt"] - 0.004 * (day_index * 24 + hour), 2)  # slow discharge
            out.append(
                {
                    "region": region,
                    "day": day,
                    "station_index": index,
                    "station": st,
                    "dt": dt,
                    "pm25": pm25,
                    "pm10_ratio": noise[1],
                    "temp_c": temp + 0.0,  # + 0.0 turns -0.0 into 0.0
                    "humidity": min(100, max(20, humidity)),
                    "voltage": volt,
                    "level": min(100, max(0, int((volt - 3.4) / 0.8 * 100))),
                    "cycles": st["cycles"] + day_index,
                }
            )
    out.sort(key=lambda r: (r["dt"], r["station"]["id"]))
    return out


# --------------------------------------------------------------------------- JSON Lines


def _rfc3339(dt: datetime) -> str:
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def _space_ts(dt: datetime) -> str:
    return dt.strftime("%Y-%m-%d %H:%M:%S")


def _json_record(rng: random.Random, r: dict[str, Any]) -> dict[str, Any]:
    """One reading as the station uploads it, with the injections applied.

    Also updates ``r`` to what a consumer can actually read back.
    """
    region, dt, st, index = r["region"], r["dt"], r["station"], r["station_index"]
    firmware = st["firmware"]
    pm25: Any = r["pm25"]
    pm10: Any = round(r["pm25"] * r["pm10_ratio"])
    if region == "east" and index in EAST_FW240_STATIONS and dt >= FW240_FROM:
        firmware = "2.4.0"
        if rng.random() < NA_SHARE:
            pm25, r["pm25"] = "n/a", None
        else:
            pm25 = f"{r['pm25']:.1f}"
    if region == "south" and dt >= PM10_FLOAT_FROM:
        pm10 = round(r["pm25"] * r["pm10_ratio"], 1)
    r["pm10"] = float(pm10)
    ts = _space_ts(dt) if region == "south" and dt >= SPACE_TS_FROM else _rfc3339(dt)

    rec: dict[str, Any] = {"station_id": st["id"], "ts": ts, "pm25": pm25, "pm10": pm10}
    if region == "north" and r["day"] >= TEMP_GONE_DAY:
        r["temp_c"] = None
    else:
        rec["temp_c"] = r["temp_c"]
    if region == "south" and index in HUMIDITY_NULL_STATIONS and dt >= HUMIDITY_NULL_FROM:
        r["humidity"] = None
    rec["humidity"] = r["humidity"]
    battery: dict[str, Any] = {"voltage": r["voltage"], "level": r["level"]}
    if region == "north" and dt >= CYCLES_FROM:
        battery["charge_cycles"] = r["cycles"]
    rec["battery"] = battery
    tags: Any = list(st["tags"])
    lo, hi = TAGS_STRING_WINDOW
    if region == "east" and index == TAGS_STRING_STATION and lo <= dt < hi:
        tags = tags[0]
    rec["tags"] = tags
    rec["firmware"] = firmware
    return rec


def _dumps(rec: dict[str, Any]) -> str:
    return json.dumps(rec, separators=(",", ":"), ensure_ascii=False)


def _gzip(data: bytes) -> bytes:
    buf = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, compresslevel=9, mtime=0) as gz:
        gz.write(data)
    return buf.getvalue()


def _jsonl_file(
    rng: random.Random, readings: list[dict[str, Any]], malformed: bool
) -> tuple[bytes, list[dict[str, Any]], dict[str, int] | None]:
    """Returns (gzip bytes, records, malformed-line position or None)."""
    records = [_json_record(rng, r) for r in readings]
    lines = [_dumps(rec) for rec in records]
    bad = None
    if malformed:
        # an upload cut off mid-record, retried in full on the next line
        k = next(i for i, r in enumerate(readings) if r["dt"] >= MALFORMED_BEFORE)
        cut = lines[k][: len(lines[k]) * 2 // 3]
        lines.insert(k, cut)
        offset = sum(len(line.encode()) + 1 for line in lines[:k])
        bad = {"line": k + 1, "byte_offset": offset}
    raw = "".join(line + "\n" for line in lines).encode()
    return _gzip(raw), records, bad


# --------------------------------------------------------------------------- CSV


CSV_COLUMNS = (
    "station_id",
    "ts",
    "pm25",
    "pm10",
    "temp_c",
    "humidity",
    "battery_voltage",
    "battery_level",
    "tags",
    "firmware",
    "site_note",
)


def _csv_file(rng: random.Random, day: str, readings: list[dict[str, Any]]) -> bytes:
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(CSV_COLUMNS)
    note_row, note = WEST_NOTES[day]
    for row, r in enumerate(readings):
        st = r["station"]
        r["pm10"] = float(round(r["pm25"] * r["pm10_ratio"]))
        cells = [
            st["id"],
            _space_ts(r["dt"]),
            f"{r['pm25']:.1f}",
            str(int(r["pm10"])),
            f"{r['temp_c']:.1f}",
            str(r["humidity"]),
            f"{r['voltage']:.2f}",
            str(r["level"]),
            ";".join(st["tags"]),
            st["firmware"],
            note if row == note_row else "",
        ]
        for col in (4, 5, 6):  # temp_c, humidity, battery_voltage
            if rng.random() < WEST_BLANK_SHARE:
                cells[col] = ""
                if col == 4:
                    r["temp_c"] = None
                elif col == 5:
                    r["humidity"] = None
        writer.writerow(cells)
    return buf.getvalue().encode()


# --------------------------------------------------------------------------- parquet


NIGHTLY_SCHEMA = pa.schema(
    [
        pa.field("station_id", pa.string(), nullable=False),
        pa.field("ts", pa.timestamp("us", tz="UTC"), nullable=False),
        pa.field("pm25", pa.float64()),
        pa.field("pm10", pa.int64()),
        pa.field("temp_c", pa.float64()),
        pa.field("humidity", pa.int64()),
        pa.field("battery", pa.struct([("voltage", pa.float64()), ("level", pa.int64())])),
        pa.field("tags", pa.list_(pa.string())),
        pa.field("firmware", pa.string()),
        pa.field("ingested_at", pa.timestamp("us", tz="UTC"), nullable=False),
    ],
    metadata={"job": "nightly-compaction", "partition": NIGHTLY_FILE.rsplit("/", 1)[0]},
)


def _nightly_file(rng: random.Random, readings: list[dict[str, Any]]) -> bytes:
    """The nightly job's Parquet: late half-hour samples in native types.

    ``ingested_at`` is when the station's buffer reached the landing, one
    reconnect time per station, always after the sample itself.
    """
    reconnect = {
        index: RECONNECT_FROM
        + timedelta(minutes=rng.randrange(90), seconds=rng.randrange(60), microseconds=rng.randrange(10**6))
        for index in LATE_STATIONS
    }
    rows = []
    for r in readings:
        st, index, dt = r["station"], r["station_index"], r["dt"]
        humidity = r["humidity"]
        # the same failed sensors as in the station feed (see HUMIDITY_NULL_FROM)
        if index in HUMIDITY_NULL_STATIONS and dt >= HUMIDITY_NULL_FROM:
            humidity = None
        rows.append(
            {
                "station_id": st["id"],
                "ts": dt,
                "pm25": r["pm25"],
                "pm10": round(r["pm25"] * r["pm10_ratio"]),
                "temp_c": r["temp_c"],
                "humidity": humidity,
                "battery": {"voltage": r["voltage"], "level": r["level"]},
                "tags": list(st["tags"]),
                "firmware": st["firmware"],
                "ingested_at": reconnect[index],
            }
        )
    table = pa.Table.from_pylist(rows, schema=NIGHTLY_SCHEMA)
    buf = io.BytesIO()
    pq.write_table(table, buf, **PARQUET_OPTIONS)
    return buf.getvalue()


# --------------------------------------------------------------------------- manifest


def _change(
    change: str,
    field: str | None,
    file: str,
    row: int | None,
    line: int | None,
    byte_offset: int | None,
    note: str,
    partition: dict[str, str] | None = None,
) -> dict[str, Any]:
    return {
        "change": change,
        "field": field,
        "file": file,
        "row": row,
        "line": line,
        "byte_offset": byte_offset,
        "note": note,
        "partition": partition,
    }


# Partition-level changes: what one partition value (region=west, the legacy CSV export) does
# from its first row on, which the other regions never do. (change, field, predicate on a CSV
# row as a dict of cells, note); each is found at its first row in west's files in sorted order.
WEST = {"region": "west"}
SPACE_TS = re.compile(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d")
_WEST_CHANGES: tuple[tuple[str, str, Callable[[dict[str, str]], bool], str], ...] = (
    (
        "partition-lacks",
        "battery",
        lambda row: "battery" not in row,
        "the west export flattens battery into battery_voltage / battery_level: no row of region=west "
        "holds the battery struct every other region sends",
    ),
    (
        "partition-type",
        "tags",
        lambda row: row["tags"] != "",
        "the west export joins tags into one string (';'-separated); every other region sends a list",
    ),
    (
        "partition-type",
        "ts",
        lambda row: SPACE_TS.fullmatch(row["ts"]) is not None,
        "the west export writes ts as 'YYYY-MM-DD HH:MM:SS' without a zone in every row; the other regions "
        "send RFC 3339 with Z for most of their rows",
    ),
    (
        "partition-nulls",
        "temp_c",
        lambda row: row["temp_c"] == "",
        "empty temp_c cells (a null) in the west export only; no other region sends a null temp_c",
    ),
    (
        "partition-nulls",
        "tags",
        lambda row: row["tags"] == "",
        "a station without tags gets an empty cell (a null) in the west export; the others send []",
    ),
)


def _partition_changes(files: dict[str, bytes]) -> list[dict[str, Any]]:
    """Each west change at its first row in west's CSV files in sorted order (line: the header is
    line 1 and no cell spans lines)."""
    rows = []
    for rel in sorted(r for r in files if r.startswith("readings/region=west/") and r.endswith(".csv")):
        reader = csv.DictReader(io.StringIO(files[rel].decode("utf-8"), newline=""))
        rows.extend((rel, i, row) for i, row in enumerate(reader))
    out = []
    for change, field, pred, note in _WEST_CHANGES:
        rel, i, _ = next(item for item in rows if pred(item[2]))
        out.append(_change(change, field, rel, i, i + 2, None, note, WEST))
    return out


# (change, field, where the first occurrence must fall (a piece of its path), predicate
# on a record as a reader gets it back, note).  Checked over every JSON Lines and
# Parquet record in sorted path order, so no change can show earlier than planned.
_CHANGES: tuple[tuple[str, str, str, Callable[[dict[str, Any]], bool], str], ...] = (
    (
        "type-conflict",
        "pm25",
        "region=east/day=2026-11-29",
        lambda rec: isinstance(rec.get("pm25"), str),
        'stations upgraded to firmware 2.4.0 send pm25 as a string such as "12.5", a few as "n/a"; number elsewhere',
    ),
    (
        "textclass-changed",
        "pm25",
        "region=east/day=2026-11-29",
        lambda rec: rec.get("pm25") == "n/a",
        'a few of the 2.4.0 readings send pm25 as the null token "n/a" where the other strings are decimals',
    ),
    (
        "type-conflict",
        "tags",
        "region=east/day=2026-11-28",
        lambda rec: isinstance(rec.get("tags"), str),
        "one station sends tags as a bare string instead of a list for a few hours",
    ),
    (
        "nested-new",
        "battery.charge_cycles",
        "region=north/day=2026-11-28",
        lambda rec: "charge_cycles" in (rec.get("battery") or {}),
        "battery gains an integer charge_cycles in every north row from here on",
    ),
    (
        "field-gone",
        "temp_c",
        "region=north/day=2026-11-30",
        lambda rec: "temp_c" not in rec,
        "temp_c key is missing in every north row from here to the end of the region",
    ),
    (
        "type-widened",
        "pm10",
        "region=south/day=2026-11-28",
        lambda rec: isinstance(rec.get("pm10"), float),
        "pm10 arrives as a float with one decimal (int before) in every south row from here on",
    ),
    (
        "textclass-changed",
        "ts",
        "region=south/day=2026-11-29",
        lambda rec: isinstance(rec.get("ts"), str) and not rec["ts"].endswith("Z"),
        "ts changes from RFC 3339 with Z to 'YYYY-MM-DD HH:MM:SS' without a zone "
        "(same UTC wall clock) in every south row from here on",
    ),
    (
        "nulls-begin",
        "humidity",
        "region=south/day=2026-11-30",
        lambda rec: "humidity" in rec and rec["humidity"] is None,
        "humidity is present but null for three stations whose sensors failed at 12:00 UTC",
    ),
    (
        "field-new",
        "ingested_at",
        NIGHTLY_FILE,
        lambda rec: "ingested_at" in rec,
        "only the nightly job writes ingested_at, a timestamp[us, UTC] of when each late reading reached the landing",
    ),
)


Scanned = list[tuple[str, list[dict[str, Any]], dict[str, int] | None, bool]]


def _record_changes(scanned: Scanned) -> list[dict[str, Any]]:
    """Find each change's first occurrence in sorted scan order and check it is where planned.

    ``scanned`` holds (path, records, malformed-line position or None, has lines).
    """
    scanned = sorted(scanned, key=lambda item: item[0])
    out = []
    for change, field, where, pred, note in _CHANGES:
        hit = next(
            ((rel, row) for rel, records, _bad, _lines in scanned for row, rec in enumerate(records) if pred(rec)),
            None,
        )
        if hit is None or where not in hit[0]:
            raise AssertionError(f"{change} {field}: first occurrence {hit}, planned in {where}")
        rel, row = hit
        _rel, _records, bad, has_lines = next(item for item in scanned if item[0] == rel)
        line = None
        if has_lines:
            line = row + 1 + (1 if bad is not None and bad["line"] <= row + 1 else 0)
        out.append(_change(change, field, rel, row, line, None, note))
    for rel, _records, bad, _lines in scanned:
        if bad is not None:
            out.append(
                _change(
                    "malformed-line",
                    None,
                    rel,
                    None,
                    bad["line"],
                    bad["byte_offset"],
                    "an upload cut off mid-object (not a record); the full record follows on "
                    "the next line; byte_offset is into the decompressed stream",
                )
            )
    return out


def _sort_key(entry: dict[str, Any]) -> tuple[str, int, int]:
    row = -1 if entry["row"] is None else entry["row"]
    return (entry["file"], row, entry["line"] or 0)


# --------------------------------------------------------------------------- build


def _generate() -> tuple[dict[str, bytes], list[dict[str, Any]], list[dict[str, Any]]]:
    """All files (relative path -> bytes), the change entries and the file inventory."""
    rng = random.Random(SEED)
    stations = _make_stations(rng)
    files: dict[str, bytes] = {
        "readings/.staging-note": b"uploads are staged here before the mover runs; not data\n",
        "readings/_SUCCESS": b"",
    }
    inventory: list[dict[str, Any]] = []
    scanned: Scanned = []
    for region in JSON_REGIONS:
        for day in DAYS:
            rel = f"readings/region={region}/day={day}/part-0000.jsonl.gz"
            readings = _readings(rng, region, day, stations[region])
            data, records, bad = _jsonl_file(rng, readings, (region, day) == MALFORMED_FILE)
            files[rel] = data
            scanned.append((rel, records, bad, True))
            lines = len(records) + (bad is not None)
            inventory.append(
                {
                    "path": rel,
                    "format": "jsonl.gz",
                    "rows": len(records),
                    "lines": lines,
                    "errors": int(bad is not None),
                }
            )
    for day in WEST_DAYS:
        rel = f"readings/region=west/day={day}/export.csv"
        readings = _readings(rng, "west", day, stations["west"])
        files[rel] = _csv_file(rng, day, readings)
        inventory.append(
            {
                "path": rel,
                "format": "csv",
                "rows": len(readings),
                "lines": len(readings) + 1,
                "errors": 0,
            }
        )
    # drawn last, so adding the nightly file left every earlier file as it was
    region, day = NIGHTLY_PARTITION
    late = _readings(rng, region, day, stations[region], LATE_STATIONS, offset_minutes=LATE_OFFSET_MINUTES)
    files[NIGHTLY_FILE] = _nightly_file(rng, late)
    # checked as a reader gets it back, native types and all
    nightly = pq.read_table(io.BytesIO(files[NIGHTLY_FILE])).to_pylist()
    scanned.append((NIGHTLY_FILE, nightly, None, False))
    inventory.append({"path": NIGHTLY_FILE, "format": "parquet", "rows": len(nightly), "lines": None, "errors": 0})

    changes = _record_changes(scanned) + _partition_changes(files)
    changes.sort(key=_sort_key)
    for item in inventory:
        data = files[item["path"]]
        item["bytes"] = len(data)
        item["sha256"] = hashlib.sha256(data).hexdigest()
    inventory.sort(key=lambda item: item["path"])
    return files, changes, inventory


def _prepare(root: Path) -> None:
    if root.exists() and not root.is_dir():
        raise TargetNotOursError(f"{root} exists and is not a directory")
    if root.is_dir() and any(root.iterdir()) and not (root / MARKER_NAME).is_file():
        raise TargetNotOursError(f"{root} is not empty and has no {MARKER_NAME} marker; refusing to touch it")
    root.mkdir(parents=True, exist_ok=True)
    (root / MARKER_NAME).write_text(MARKER_TEXT, encoding="utf-8")
    landing = root / "landing"
    if landing.is_symlink() or landing.is_file():
        landing.unlink()
    elif landing.is_dir():
        shutil.rmtree(landing)
    (root / "manifest.json").unlink(missing_ok=True)


def build(root: Path) -> list[dict[str, Any]]:
    """Write ROOT/landing/ and ROOT/manifest.json; return the change entries."""
    root = Path(root)
    files, changes, inventory = _generate()
    _prepare(root)
    landing = root / "landing"
    for rel in sorted(files):
        path = landing / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(files[rel])
    manifest = {
        "format": MANIFEST_FORMAT,
        "generator": "scripts/make_demo.py",
        "seed": SEED,
        "landing": "landing",
        "positions": "row: 0-based record index in its file; line: 1-based physical line "
        "(JSON Lines); byte_offset: start of the line in the decompressed stream",
        "changes": changes,
        "skipped": sorted(rel for rel in files if rel.rsplit("/", 1)[-1][0] in "._"),
        "files": inventory,
    }
    text = json.dumps(manifest, indent=2, ensure_ascii=False) + "\n"
    (root / "manifest.json").write_text(text, encoding="utf-8")
    return changes


def _summary(root: Path, changes: list[dict[str, Any]]) -> str:
    manifest = json.loads((root / "manifest.json").read_text(encoding="utf-8"))
    files = manifest["files"]
    total = sum(item["bytes"] for item in files)
    rows = sum(item["rows"] for item in files)
    formats: dict[str, int] = {}
    for item in files:
        formats[item["format"]] = formats.get(item["format"], 0) + 1
    kinds = ", ".join(f"{n} {fmt}" for fmt, n in sorted(formats.items()))
    lines = [
        f"make_demo: one dataset, {len(files)} data files ({kinds}) + "
        f"{len(manifest['skipped'])} skipped, {rows} rows, {total / 1024:.0f} KiB "
        f"in {root / 'landing'}",
    ]
    for c in changes:
        where = f"row {c['row']}" if c["row"] is not None else f"line {c['line']}"
        lines.append(f"  {c['change']:<17} {c['field'] or '-':<21} {c['file']} {where}")
    lines.append(f"make_demo: manifest {root / 'manifest.json'}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write the driftline demo landing directory and its manifest.")
    parser.add_argument(
        "target",
        nargs="?",
        type=Path,
        default=Path(__file__).resolve().parents[1] / "demo",
        help="target directory (default: demo/ at the repository root)",
    )
    args = parser.parse_args(argv)
    try:
        changes = build(args.target)
    except TargetNotOursError as exc:
        print(f"make_demo: {exc}", file=sys.stderr)
        return 2
    print(_summary(args.target, changes), file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
