"""scripts/make_demo.py: deterministic demo landing directory and a truthful manifest.

The checks read the files back on their own (gzip + json, csv, pyarrow) rather
than trusting the generator's internals.
"""

from __future__ import annotations

import csv
import gzip
import hashlib
import importlib.util
import json
import re
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import ROOT

SCRIPT = ROOT / "scripts" / "make_demo.py"
ENTRY_KEYS = ["change", "field", "file", "row", "line", "byte_offset", "note", "partition"]
RFC3339_Z = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ")
SPACE_TS = re.compile(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d")


def _load_script() -> Any:
    spec = importlib.util.spec_from_file_location("make_demo", SCRIPT)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_demo = _load_script()


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    root = tmp_path_factory.mktemp("demo")
    changes = make_demo.build(root)
    manifest = json.loads((root / "manifest.json").read_text(encoding="utf-8"))
    return {"root": root, "landing": root / "landing", "changes": changes, "manifest": manifest}


def _tree(root: Path) -> dict[str, str]:
    return {
        p.relative_to(root).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(root.rglob("*"))
        if p.is_file()
    }


def _jsonl(landing: Path) -> tuple[list[tuple[str, int, dict[str, Any]]], list[tuple[str, int]]]:
    """All JSON Lines records in scan order as (file, row, record), and bad (file, line)."""
    rows: list[tuple[str, int, dict[str, Any]]] = []
    bad: list[tuple[str, int]] = []
    for rel in sorted(p.relative_to(landing).as_posix() for p in landing.rglob("*.jsonl.gz")):
        with gzip.open(landing / rel, "rt", encoding="utf-8", newline="") as fh:
            text = fh.read()
        assert text.endswith("\n")
        row = 0
        for line_no, line in enumerate(text[:-1].split("\n"), start=1):
            try:
                rec = json.loads(line)
            except json.JSONDecodeError:
                bad.append((rel, line_no))
                continue
            assert isinstance(rec, dict)
            rows.append((rel, row, rec))
            row += 1
    return rows, bad


def _records(landing: Path) -> list[tuple[str, int, dict[str, Any]]]:
    """Every JSON Lines and Parquet record in scan order (sorted relative path)."""
    json_rows, _bad = _jsonl(landing)
    by_file: dict[str, list[tuple[str, int, dict[str, Any]]]] = {}
    for item in json_rows:
        by_file.setdefault(item[0], []).append(item)
    for path in landing.rglob("*.parquet"):
        rel = path.relative_to(landing).as_posix()
        records = pq.read_table(path).to_pylist()
        by_file[rel] = [(rel, row, rec) for row, rec in enumerate(records)]
    return [item for rel in sorted(by_file) for item in by_file[rel]]


def _space_utc(text: str) -> datetime:
    # the south feed's "YYYY-MM-DD HH:MM:SS" is UTC wall clock (see the textclass note)
    return datetime.strptime(text, "%Y-%m-%d %H:%M:%S").replace(tzinfo=UTC)


def _is_int(value: Any) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


# (change, field) -> "the record shows this change"
PREDICATES = {
    ("type-conflict", "pm25"): lambda r: isinstance(r.get("pm25"), str),
    ("textclass-changed", "pm25"): lambda r: r.get("pm25") == "n/a",
    ("type-conflict", "tags"): lambda r: isinstance(r.get("tags"), str),
    ("nested-new", "battery.charge_cycles"): lambda r: "charge_cycles" in r["battery"],
    ("nulls-begin", "humidity"): lambda r: "humidity" in r and r["humidity"] is None,
    ("field-gone", "temp_c"): lambda r: "temp_c" not in r,
    ("textclass-changed", "ts"): lambda r: isinstance(r["ts"], str) and SPACE_TS.fullmatch(r["ts"]) is not None,
    ("type-widened", "pm10"): lambda r: isinstance(r["pm10"], float),
    ("field-new", "ingested_at"): lambda r: "ingested_at" in r,
}


def _part(region: str, day: int) -> str:
    return f"readings/region={region}/day=2026-11-{day}/part-0000.jsonl.gz"


NIGHTLY = "readings/region=south/day=2026-11-30/part-0001.parquet"
WEST_28 = "readings/region=west/day=2026-11-28/export.csv"


EXPECTED = {
    ("type-conflict", "pm25", _part("east", 29)),
    ("textclass-changed", "pm25", _part("east", 29)),
    ("type-conflict", "tags", _part("east", 28)),
    ("nested-new", "battery.charge_cycles", _part("north", 28)),
    ("malformed-line", None, _part("north", 29)),
    ("field-gone", "temp_c", _part("north", 30)),
    ("type-widened", "pm10", _part("south", 28)),
    ("textclass-changed", "ts", _part("south", 29)),
    ("nulls-begin", "humidity", _part("south", 30)),
    ("field-new", "ingested_at", NIGHTLY),
    ("partition-lacks", "battery", WEST_28),
    ("partition-type", "tags", WEST_28),
    ("partition-type", "ts", WEST_28),
    ("partition-nulls", "temp_c", WEST_28),
    ("partition-nulls", "tags", WEST_28),
}


def test_two_builds_are_byte_identical(tmp_path: Path) -> None:
    make_demo.build(tmp_path / "a")
    make_demo.build(tmp_path / "b")
    a, b = _tree(tmp_path / "a"), _tree(tmp_path / "b")
    assert "manifest.json" in a
    assert len(a) > 15
    assert a == b


def test_rebuild_replaces_own_output_and_refuses_foreign_dirs(tmp_path: Path) -> None:
    ours = tmp_path / "ours"
    make_demo.build(ours)
    before = _tree(ours)
    (ours / "landing" / "readings" / "stray.jsonl").write_text("{}\n", encoding="utf-8")
    make_demo.build(ours)
    assert _tree(ours) == before

    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "keep.txt").write_text("mine\n", encoding="utf-8")
    with pytest.raises(make_demo.TargetNotOursError):
        make_demo.build(foreign)
    assert make_demo.main([str(foreign)]) == 2
    assert sorted(p.name for p in foreign.iterdir()) == ["keep.txt"]


def test_main_prints_summary(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert make_demo.main([str(tmp_path / "cli")]) == 0
    out, err = capsys.readouterr()
    assert out == ""
    assert "one dataset, 15 data files (2 csv, 12 jsonl.gz, 1 parquet) + 2 skipped" in err
    for change in ("type-conflict", "nested-new", "field-gone", "malformed-line"):
        assert change in err
    assert (tmp_path / "cli" / "landing" / "readings" / "_SUCCESS").is_file()


def test_size_and_layout(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    files = [p for p in landing.rglob("*") if p.is_file()]
    assert sum(p.stat().st_size for p in files) < 600 * 1024
    rels = sorted(p.relative_to(landing).as_posix() for p in files)
    assert {"readings/_SUCCESS", "readings/.staging-note"} <= set(rels)
    # one dataset: everything under readings/, nothing beside it
    assert [p.name for p in landing.iterdir()] == ["readings"]
    assert all(r.startswith("readings/") for r in rels)
    for region in ("east", "north", "south"):
        for day in range(27, 31):
            assert f"readings/region={region}/day=2026-11-{day}/part-0000.jsonl.gz" in rels
    assert any(r.startswith("readings/region=west/") and r.endswith(".csv") for r in rels)
    # the nightly Parquet is the only one, and sorts right after its partition's JSON file
    assert [r for r in rels if r.endswith(".parquet")] == [NIGHTLY]
    assert rels[rels.index(NIGHTLY) - 1] == _part("south", 30)


def test_manifest_entries_are_complete_sorted_and_point_at_files(demo: dict[str, Any]) -> None:
    changes = demo["manifest"]["changes"]
    assert changes == demo["changes"]
    for entry in changes:
        assert list(entry) == ENTRY_KEYS
        assert (demo["landing"] / entry["file"]).is_file()
        assert entry["note"]
    assert {(e["change"], e["field"], e["file"]) for e in changes} == EXPECTED
    keys = [(e["file"], -1 if e["row"] is None else e["row"]) for e in changes]
    assert keys == sorted(keys)


def test_inventory_matches_files(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    manifest = demo["manifest"]
    listed = {item["path"] for item in manifest["files"]} | set(manifest["skipped"])
    on_disk = {p.relative_to(landing).as_posix() for p in landing.rglob("*") if p.is_file()}
    assert listed == on_disk
    rows, bad = _jsonl(landing)
    for item in manifest["files"]:
        data = (landing / item["path"]).read_bytes()
        assert item["bytes"] == len(data)
        assert item["sha256"] == hashlib.sha256(data).hexdigest()
        if item["format"] == "jsonl.gz":
            assert item["rows"] == sum(1 for rel, _, _ in rows if rel == item["path"])
            assert item["errors"] == sum(1 for rel, _ in bad if rel == item["path"])
        elif item["format"] == "parquet":
            assert item["rows"] == pq.read_metadata(landing / item["path"]).num_rows
            assert item["lines"] is None and item["errors"] == 0
    assert sorted({item["format"] for item in manifest["files"]}) == ["csv", "jsonl.gz", "parquet"]


def test_changes_start_exactly_at_the_recorded_row(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    rows = _records(landing)
    position = {(rel, row): i for i, (rel, row, _) in enumerate(rows)}
    checked = 0
    for entry in demo["changes"]:
        pred = PREDICATES.get((entry["change"], entry["field"]))
        if pred is None:
            continue
        i = position[(entry["file"], entry["row"])]
        assert pred(rows[i][2]), entry
        assert i > 0 and not pred(rows[i - 1][2]), entry  # the row before (maybe previous file)
        assert not any(pred(rec) for _, _, rec in rows[:i]), entry  # nothing earlier at all
        if entry["file"].endswith(".parquet"):
            assert entry["line"] is None, entry  # a columnar file has rows, not lines
        else:
            # the recorded physical line holds that same record
            with gzip.open(landing / entry["file"], "rt", encoding="utf-8") as fh:
                lines = fh.read().split("\n")
            assert json.loads(lines[entry["line"] - 1]) == rows[i][2]
        checked += 1
    assert checked == len(PREDICATES)


# (change, field) -> "this CSV row of region=west shows it"; partition-level changes hold for west
# as a whole, so each is checked at its first row and against every row of the other regions.
WEST_PREDICATES = {
    ("partition-lacks", "battery"): lambda r: "battery" not in r,
    ("partition-type", "tags"): lambda r: r["tags"] != "",
    ("partition-type", "ts"): lambda r: SPACE_TS.fullmatch(r["ts"]) is not None,
    ("partition-nulls", "temp_c"): lambda r: r["temp_c"] == "",
    ("partition-nulls", "tags"): lambda r: r["tags"] == "",
}


def test_partition_changes_start_at_their_first_west_row_and_no_other_region_shows_them(
    demo: dict[str, Any],
) -> None:
    landing: Path = demo["landing"]
    west = []
    for path in sorted(landing.glob("readings/region=west/*/export.csv")):
        # source: Python's csv module (RFC 4180 quoting), read apart from the script's writer
        with path.open(newline="", encoding="utf-8") as fh:
            west.extend((path.relative_to(landing).as_posix(), i, row) for i, row in enumerate(csv.DictReader(fh)))
    entries = [e for e in demo["changes"] if e["partition"] is not None]
    assert {(e["change"], e["field"]) for e in entries} == set(WEST_PREDICATES)
    for entry in entries:
        assert entry["partition"] == {"region": "west"}, entry
        pred = WEST_PREDICATES[(entry["change"], entry["field"])]
        first = next((rel, i) for rel, i, row in west if pred(row))
        assert (entry["file"], entry["row"], entry["line"]) == (*first, first[1] + 2), entry
    rows, _ = _jsonl(landing)
    others = [rec for _, _, rec in rows] + pq.read_table(landing / NIGHTLY).to_pylist()
    assert len(others) > 4000 and all(isinstance(rec["battery"], dict) for rec in others)
    assert {rel for rel, _, rec in rows if not isinstance(rec["tags"], list)} == {_part("east", 28)}
    assert all(rec.get("temp_c", 0.0) is not None and rec["tags"] is not None for rec in others)


def test_json_changes_have_the_promised_shape(demo: dict[str, Any]) -> None:
    # the station feed only; the nightly Parquet's own shape is checked below
    rows, _ = _jsonl(demo["landing"])
    start = {(e["change"], e["field"]): (e["file"], e["row"]) for e in demo["changes"]}
    order = {(rel, row): i for i, (rel, row, _) in enumerate(rows)}

    def after(key: tuple[str, str], region: str) -> list[dict[str, Any]]:
        i = order[start[key]]
        return [rec for rel, _, rec in rows[i:] if f"region={region}/" in rel]

    def before(key: tuple[str, str]) -> list[dict[str, Any]]:
        return [rec for _, _, rec in rows[: order[start[key]]]]

    # "from here on" changes hold in every later row of the region
    assert all("temp_c" not in r for r in after(("field-gone", "temp_c"), "north"))
    assert all(_is_int(r["battery"]["charge_cycles"]) for r in after(("nested-new", "battery.charge_cycles"), "north"))
    assert all(isinstance(r["pm10"], float) for r in after(("type-widened", "pm10"), "south"))
    assert all(_is_int(r["pm10"]) for r in before(("type-widened", "pm10")))
    assert all(SPACE_TS.fullmatch(r["ts"]) for r in after(("textclass-changed", "ts"), "south"))
    assert all(RFC3339_Z.fullmatch(r["ts"]) for r in before(("textclass-changed", "ts")))
    # pm25 strings come from firmware 2.4.0 only; numbers mostly, a few "n/a"
    strings = [r for _, _, r in rows if isinstance(r["pm25"], str)]
    assert strings and all(r["firmware"] == "2.4.0" for r in strings)
    na = [r for r in strings if r["pm25"] == "n/a"]
    assert 0 < len(na) < len(strings) / 4
    assert all(float(r["pm25"]) >= 0 for r in strings if r["pm25"] != "n/a")
    # bare-string tags: a few rows only, in one file
    bare = [(rel, r) for rel, _, r in rows if isinstance(r["tags"], str)]
    assert 1 < len(bare) < 10 and len({rel for rel, _ in bare}) == 1
    # humidity nulls: a share of the later south rows, never missing
    later = after(("nulls-begin", "humidity"), "south")
    nulls = sum(r["humidity"] is None for r in later)
    assert all("humidity" in r for r in later) and 0 < nulls < len(later)
    assert all(_is_int(r["humidity"]) for r in before(("nulls-begin", "humidity")))


def test_malformed_line_is_the_only_bad_line(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    _, bad = _jsonl(landing)
    (entry,) = [e for e in demo["changes"] if e["change"] == "malformed-line"]
    assert entry["row"] is None
    assert bad == [(entry["file"], entry["line"])]
    raw = gzip.decompress((landing / entry["file"]).read_bytes())
    lines = raw.split(b"\n")
    assert entry["byte_offset"] == sum(len(line) + 1 for line in lines[: entry["line"] - 1])
    cut = lines[entry["line"] - 1]
    assert raw[entry["byte_offset"] :].startswith(cut + b"\n")
    assert cut.startswith(b"{") and not cut.endswith(b"}")
    # the retried upload on the next line is the full record
    assert isinstance(json.loads(lines[entry["line"]]), dict)
    assert lines[entry["line"]].startswith(cut)


def test_nightly_parquet_is_late_readings_in_native_types(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    pf = pq.ParquetFile(landing / NIGHTLY)
    # the readings' columns in native Arrow types, read back through pyarrow's own footer
    utc_us = pa.timestamp("us", tz="UTC")
    assert [(f.name, f.type) for f in pf.schema_arrow] == [
        ("station_id", pa.string()),
        ("ts", utc_us),
        ("pm25", pa.float64()),
        ("pm10", pa.int64()),
        ("temp_c", pa.float64()),
        ("humidity", pa.int64()),
        ("battery", pa.struct([("voltage", pa.float64()), ("level", pa.int64())])),
        ("tags", pa.list_(pa.string())),
        ("firmware", pa.string()),
        ("ingested_at", utc_us),
    ]
    meta = pf.metadata.row_group(0)
    assert [meta.column(i).compression for i in range(meta.num_columns)] == ["ZSTD"] * 11
    late = pf.read().to_pylist()
    assert 100 <= len(late) <= 200
    day_start = datetime(2026, 11, 30, tzinfo=UTC)
    assert all(day_start <= r["ts"] < datetime(2026, 12, 1, tzinfo=UTC) for r in late)
    assert all(r["ingested_at"] > r["ts"] for r in late)  # late arrivals
    assert [r["ts"] for r in late] == sorted(r["ts"] for r in late)

    # the same stations as that day's feed, with their tags and firmware, but new samples
    feed = [rec for rel, _, rec in _jsonl(landing)[0] if rel == _part("south", 30)]
    by_station = {rec["station_id"]: rec for rec in feed}
    assert {r["station_id"] for r in late} < set(by_station)
    for r in late:
        st = by_station[r["station_id"]]
        assert (r["tags"], r["firmware"]) == (st["tags"], st["firmware"])
        assert list(r["battery"]) == ["voltage", "level"] and r["pm25"] > 0
        assert _is_int(r["pm10"]) and isinstance(r["temp_c"], float)
    feed_keys = {(rec["station_id"], _space_utc(rec["ts"])) for rec in feed}
    assert not feed_keys & {(r["station_id"], r["ts"]) for r in late}

    # humidity nulls: the feed's failed sensors, and only after their failure there
    failed = {rec["station_id"] for rec in feed if rec["humidity"] is None}
    assert failed and {r["station_id"] for r in late if r["humidity"] is None} == failed
    for sid in failed:
        times = [(_space_utc(rec["ts"]), rec["humidity"]) for rec in feed if rec["station_id"] == sid]
        last_ok = max(t for t, h in times if h is not None)
        first_null = min(t for t, h in times if h is None)
        assert last_ok < first_null
        for r in late:
            if r["station_id"] == sid and r["ts"] < last_ok:
                assert _is_int(r["humidity"]), r
            elif r["station_id"] == sid and r["ts"] > first_null:
                assert r["humidity"] is None, r
    assert all(_is_int(r["humidity"]) for r in late if r["station_id"] not in failed)


def test_legacy_csv_export(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    paths = sorted(landing.glob("readings/region=west/day=*/export.csv"))
    assert paths
    commas = blanks = 0
    for path in paths:
        raw = path.read_bytes()
        assert raw.endswith(b"\r\n") and raw.count(b"\r\n") == raw.count(b"\n")
        with path.open(encoding="utf-8", newline="") as fh:
            header, *body = list(csv.reader(fh))
        assert header[:3] == ["station_id", "ts", "pm25"]
        assert body and all(len(row) == len(header) for row in body)
        ts = header.index("ts")
        assert all(SPACE_TS.fullmatch(row[ts]) for row in body)
        commas += sum("," in cell for row in body for cell in row)
        blanks += sum(cell == "" for row in body for cell in row[2:8])
        assert b'"' in raw
    assert commas >= 1 and blanks >= 1


def test_markers_are_what_they_claim(demo: dict[str, Any]) -> None:
    readings = demo["landing"] / "readings"
    assert (readings / "_SUCCESS").read_bytes() == b""
    assert (readings / ".staging-note").read_bytes().endswith(b"\n")
    assert sorted(demo["manifest"]["skipped"]) == ["readings/.staging-note", "readings/_SUCCESS"]
    assert (demo["root"] / make_demo.MARKER_NAME).read_text(encoding="utf-8").strip()
