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
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

SCRIPT = Path(__file__).parents[1] / "scripts" / "make_demo.py"
ENTRY_KEYS = ["change", "field", "file", "row", "line", "byte_offset", "note"]
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


def _is_int(value: Any) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


# (change, field) -> "the record shows this change"
PREDICATES = {
    ("type-conflict", "pm25"): lambda r: isinstance(r.get("pm25"), str),
    ("type-conflict", "tags"): lambda r: isinstance(r.get("tags"), str),
    ("nested-new", "battery.charge_cycles"): lambda r: "charge_cycles" in r["battery"],
    ("nulls-begin", "humidity"): lambda r: "humidity" in r and r["humidity"] is None,
    ("field-gone", "temp_c"): lambda r: "temp_c" not in r,
    ("textclass-changed", "ts"): lambda r: SPACE_TS.fullmatch(r["ts"]) is not None,
    ("type-widened", "pm10"): lambda r: isinstance(r["pm10"], float),
}


def _part(region: str, day: int) -> str:
    return f"readings/region={region}/day=2026-11-{day}/part-0000.jsonl.gz"


EXPECTED = {
    ("type-conflict", "pm25", _part("east", 29)),
    ("type-conflict", "tags", _part("east", 28)),
    ("nested-new", "battery.charge_cycles", _part("north", 28)),
    ("malformed-line", None, _part("north", 29)),
    ("field-gone", "temp_c", _part("north", 30)),
    ("type-widened", "pm10", _part("south", 28)),
    ("textclass-changed", "ts", _part("south", 29)),
    ("nulls-begin", "humidity", _part("south", 30)),
    ("field-new", "humidity_nulls", "rollups/day=2026-11-30/hourly.parquet"),
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
    for change in ("type-conflict", "nested-new", "field-gone", "malformed-line"):
        assert change in err
    assert (tmp_path / "cli" / "landing" / "readings" / "_SUCCESS").is_file()


def test_size_and_layout(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    files = [p for p in landing.rglob("*") if p.is_file()]
    assert sum(p.stat().st_size for p in files) < 600 * 1024
    rels = {p.relative_to(landing).as_posix() for p in files}
    assert {"readings/_SUCCESS", "readings/.staging-note"} <= rels
    for region in ("east", "north", "south"):
        for day in range(27, 31):
            assert f"readings/region={region}/day=2026-11-{day}/part-0000.jsonl.gz" in rels
    assert any(r.startswith("readings/region=west/") and r.endswith(".csv") for r in rels)


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


def test_json_changes_start_exactly_at_the_recorded_row(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    rows, _bad = _jsonl(landing)
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
        # the recorded physical line holds that same record
        with gzip.open(landing / entry["file"], "rt", encoding="utf-8") as fh:
            lines = fh.read().split("\n")
        assert json.loads(lines[entry["line"] - 1]) == rows[i][2]
        checked += 1
    assert checked == len(PREDICATES)


def test_json_changes_have_the_promised_shape(demo: dict[str, Any]) -> None:
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
    assert all(
        _is_int(r["battery"]["charge_cycles"])
        for r in after(("nested-new", "battery.charge_cycles"), "north")
    )
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


def test_parquet_rollups(demo: dict[str, Any]) -> None:
    landing: Path = demo["landing"]
    (entry,) = [e for e in demo["changes"] if e["change"] == "field-new"]
    paths = sorted(p.relative_to(landing).as_posix() for p in landing.rglob("*.parquet"))
    assert entry["file"] == paths[-1] and len(paths) == 2
    first, second = (pq.read_table(landing / p) for p in paths)
    assert entry["field"] not in first.schema.names
    assert second.schema.names == [*first.schema.names, entry["field"]]
    assert second.column(entry["field"]).type == pa.int32()
    assert second.column(entry["field"])[entry["row"]].as_py() is not None
    for table in (first, second):
        assert table.schema.field("hour").type == pa.timestamp("us", tz="UTC")
        assert table.schema.field("pm25_mean").type == pa.decimal128(6, 2)
        assert table.schema.field("temp_c_mean").type == pa.decimal128(5, 2)
        assert table.schema.field("station_count").type == pa.int32()
        assert table.num_rows > 0
    # temp_c vanished from north on the 30th, so the rollup's mean is null there
    north = [r for r in second.to_pylist() if r["region"] == "north"]
    assert north and all(r["temp_c_mean"] is None for r in north)
    assert sum(second.column(entry["field"]).to_pylist()) > 0


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
