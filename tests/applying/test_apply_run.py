"""driftline apply on the demo: the output read back by pyarrow and DuckDB, the quarantine
against the recommendation's prediction and the raw files, values against pyarrow's own
casts, and the safety rules (refusals, byte-identical re-runs, incremental == full)."""

from __future__ import annotations

import csv
import gzip
import hashlib
import json
import shutil
from pathlib import Path
from typing import Any

import duckdb
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest

import driftline
from driftline.applying.output import MARKER_NAME, PART_NAME, QUARANTINE_DIR, REJECTED_DIR
from driftline.applying.run import output_schema

QUARANTINED_KINDS = ("null", "change")


@pytest.fixture(scope="module")
def landing(demo_dir: Path) -> Path:
    return demo_dir / "landing"


@pytest.fixture(scope="module")
def clean(landing: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, driftline.ApplyResult]:
    out = tmp_path_factory.mktemp("apply") / "clean"
    return out, driftline.apply(landing, out=out)


def _data_files(out: Path) -> list[Path]:
    marker = json.loads((out / MARKER_NAME).read_text())
    return [out / p / PART_NAME for p in marker["partitions"]]


def _tree(out: Path) -> dict[str, str]:
    return {
        str(p.relative_to(out)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(out.rglob("*"))
        if p.is_file()
    }


def test_the_output_has_exactly_the_recommended_schema(clean: tuple[Path, Any], demo_profile: Any):
    out, result = clean
    rec = demo_profile.recommend()
    files = _data_files(out)
    assert len(files) == 14  # one per key=value folder of the demo (make_demo.py's layout)
    for f in files:
        schema = pq.read_schema(f)
        # source: pyarrow's Parquet reader gives back the Arrow schema stored in the file
        assert schema.equals(rec.arrow_schema(), check_metadata=False)
        assert schema.equals(output_schema(rec), check_metadata=True)
        assert [schema.field(n).metadata[b"driftline.rule"].decode() for n in schema.names] == [
            p.rule for p in rec.fields
        ]
    # pyarrow.dataset's hive partitioning with the types the marker names: region string, day date32
    marker = json.loads((out / MARKER_NAME).read_text())
    assert marker["partition_columns"] == [{"name": "region", "type": "string"}, {"name": "day", "type": "date32"}]
    part = ds.partitioning(pa.schema([("region", pa.string()), ("day", pa.date32())]), flavor="hive")
    table = ds.dataset(
        [str(f) for f in files], format="parquet", partitioning=part, partition_base_dir=str(out / "readings")
    ).to_table()
    assert table.num_rows == result.reconciliation["rows"]["written"] == demo_profile.rows == 4694
    assert table.schema.field("day").type == pa.date32()


def test_duckdb_reads_the_counts_the_reconciliation_gives(clean: tuple[Path, Any], demo_profile: Any):
    out, result = clean
    doc = result.reconciliation
    files = [str(f) for f in _data_files(out)]
    # source: DuckDB's read_parquet with hive_partitioning (key=value folders as columns)
    con = duckdb.connect()
    rel = con.read_parquet(files, hive_partitioning=True)
    assert rel.aggregate("count(*)").fetchall()[0][0] == doc["rows"]["written"] == doc["rows"]["in"]
    columns = [p.name for p in demo_profile.recommend().fields]
    nulls = rel.aggregate(", ".join(f'count(*) - count("{c}")' for c in columns)).fetchall()[0]
    assert dict(zip(columns, nulls, strict=True)) == {c: doc["columns"][c]["nulls"] for c in columns}
    assert {
        r[0]: str(r[1])
        for r in con.sql(
            f"select distinct region, typeof(day) from read_parquet({files}, hive_partitioning=true)"
        ).fetchall()
    }.keys() == {"east", "north", "south", "west"}
    # every input value is accounted for: a column's nulls are the nulls and absences the scan
    # saw plus the values the rule nulled (each of them a quarantine row)
    rec = demo_profile.recommend()
    for plan in rec.fields:
        seen = demo_profile.fields[plan.name]
        assert doc["columns"][plan.name]["nulls"] == seen.stats.nulls + seen.absent + plan.nulled, plan.name


def test_the_quarantine_holds_exactly_the_predicted_values(clean: tuple[Path, Any], demo_profile: Any):
    out, result = clean
    rec = demo_profile.recommend()
    predicted = {
        (p.path, e.cause): e.count for p in rec.walk() for e in p.effects if e.kind in QUARANTINED_KINDS and e.exact
    }
    assert predicted == {("pm25", "null_token"): 6, ("tags", "wrapped"): 516}
    # source: DuckDB reading the quarantine's Parquet files
    got = duckdb.sql(
        f"select path, cause, count(*) from read_parquet('{out / QUARANTINE_DIR}/**/*.parquet') group by all"
    ).fetchall()
    assert {(p, c): n for p, c, n in got} == predicted
    assert duckdb.sql(f"select count(*) from read_parquet('{out / REJECTED_DIR}/**/*.parquet')").fetchall()[0][0] == 0
    doc = result.reconciliation
    assert doc["matches"] is True and doc["differences"] == []
    assert [
        (e["path"], e["cause"], e["predicted"], e.get("quarantined", e.get("counted"))) for e in doc["effects"]
    ] == [
        ("pm25", "null_token", 6, 6),
        ("tags", "wrapped", 516, 516),
        ("ts", "assumed_zone", 1117, 1117),
    ]
    assert all(f["rows_in"] == f["rows_written"] + f["rows_rejected"] for f in doc["files"])
    assert len(doc["files"]) == 15 and sum(f["rows_in"] for f in doc["files"]) == 4694


def test_a_quarantine_row_points_at_its_raw_line(clean: tuple[Path, Any], landing: Path):
    out, _ = clean
    rows = pq.read_table(out / QUARANTINE_DIR / "readings/region=east/day=2026-11-29" / PART_NAME).to_pylist()
    first = next(r for r in rows if r["path"] == "pm25")
    assert {k: first[k] for k in ("file", "partition", "row", "value", "rule", "cause", "kind")} == {
        "file": "readings/region=east/day=2026-11-29/part-0000.jsonl.gz",
        "partition": "readings/region=east/day=2026-11-29",
        "row": 185,
        "value": "n/a",
        "rule": "parse_float",
        "cause": "null_token",
        "kind": "null",
    }
    # source: Python's gzip and json modules: the line the quarantine names holds that raw value
    with gzip.open(landing / first["file"], "rt", encoding="utf-8") as fh:
        lines = fh.read().split("\n")
    assert json.loads(lines[first["line"] - 1])["pm25"] == "n/a"
    for r in rows:
        if r["line"] is not None and r["path"] == "pm25":
            assert json.loads(lines[r["line"] - 1])["pm25"] == r["value"]


def _csv_rows_by_line(path: Path, delimiter: str = ",") -> dict[int, dict[str, str]]:
    """Each data row of a CSV file by the physical line where it starts, found with Python's csv module.

    source: RFC 4180 section 2: a record ends at a line break, except one inside a double-quoted field.
    csv.reader's line_num counts the lines read so far, so it names the line where a record ends: a
    record starts one line after the previous one ended (a blank line reads as an empty record)."""
    out: dict[int, dict[str, str]] = {}
    with path.open(newline="", encoding="utf-8") as fh:
        reader = csv.reader(fh, delimiter=delimiter)
        header = next(reader)
        ended = reader.line_num
        for record in reader:
            start, ended = ended + 1, reader.line_num
            if record:
                out[start] = dict(zip(header, record, strict=True))
    return out


def test_a_csv_quarantine_row_names_the_line_of_its_raw_value(clean: tuple[Path, Any], landing: Path):
    out, _ = clean
    table = pq.read_table(out / QUARANTINE_DIR).to_pylist()
    rows = [r for r in table if r["file"].endswith(".csv")]
    assert len(rows) == 510  # the demo's tags written as one word in its CSV exports (scripts/make_demo.py)
    by_file: dict[str, dict[int, dict[str, str]]] = {}
    for r in rows:
        raw = by_file.setdefault(r["file"], _csv_rows_by_line(landing / r["file"]))
        assert r["line"] in raw, r
        assert raw[r["line"]][r["path"]] == r["value"], r
        # the row number agrees: the line holds the file's row-th data row
        assert sorted(raw).index(r["line"]) == r["row"], r
    assert sorted(by_file) == [
        "readings/region=west/day=2026-11-28/export.csv",
        "readings/region=west/day=2026-11-29/export.csv",
    ]


def test_csv_and_tsv_lines_count_multiline_values_and_blank_lines(tmp_path: Path):
    land = tmp_path / "in"
    land.mkdir()
    (land / "a.jsonl").write_text('{"id": 1, "tags": ["a", "b"]}\n{"id": 2, "tags": ["c"]}\n')
    # quoted values with line breaks (one holding a blank line and doubled quotes) and a blank line
    # between rows, before the quarantined cells: a one-word tags value is wrapped into a list
    (land / "b.csv").write_bytes(
        b'id,note,tags\n3,"two\nlines",park\n\n4,plain,school\n5,"three\n\nlines ""q""",road\n6,,lake\n'
    )
    (land / "c.tsv").write_bytes(b'id\tnote\ttags\n7\t"a\nb"\thill\n8\tz\tfield\n')
    result = driftline.apply(land, out=tmp_path / "o")
    assert result.matches
    rows = pq.read_table(tmp_path / "o" / QUARANTINE_DIR).to_pylist()
    got = [(r["file"], r["row"], r["line"], r["value"]) for r in rows]
    assert got == [
        ("b.csv", 0, 2, "park"),
        ("b.csv", 1, 5, "school"),
        ("b.csv", 2, 6, "road"),
        ("b.csv", 3, 9, "lake"),
        ("c.tsv", 0, 2, "hill"),
        ("c.tsv", 1, 4, "field"),
    ]
    for name, delimiter in (("b.csv", ","), ("c.tsv", "\t")):
        raw = _csv_rows_by_line(land / name, delimiter)
        # source: RFC 4180 section 2, read with Python's csv module (_csv_rows_by_line)
        assert [(line, rec["tags"]) for line, rec in sorted(raw.items())] == [
            (line, value) for file, _, line, value in got if file == name
        ]


def _jsonl_rows(path: Path) -> list[dict[str, Any]]:
    out = []
    with gzip.open(path, "rt", encoding="utf-8") as fh:
        for line in fh:
            try:
                out.append(json.loads(line))
            except json.JSONDecodeError:
                continue  # the demo's one malformed line is a scan problem, not a row
    return out


def test_values_equal_pyarrow_casts_of_the_raw_values(clean: tuple[Path, Any], landing: Path):
    out, _ = clean
    compared = 0
    for part in sorted((landing / "readings").glob("region=*/day=*")):
        files = sorted(p for p in part.iterdir() if p.name.endswith(".jsonl.gz"))
        if not files or any(p.suffix == ".parquet" for p in part.iterdir()) and files[0] != sorted(part.iterdir())[0]:
            continue
        table = pq.read_table(out / part.relative_to(landing) / PART_NAME)
        raw = _jsonl_rows(files[0])
        for i in range(0, len(raw), 37):
            rec = raw[i]
            # source: pyarrow.compute.cast, string → timestamp[us, UTC] (RFC 3339 text with its offset)
            # (local text without an offset: cast as naive, then pc.assume_timezone, the documented parse)
            ts = pa.array([rec["ts"]])
            zoned = rec["ts"].endswith("Z") or rec["ts"][-6] in "+-"
            cast = (
                pc.cast(ts, pa.timestamp("us", "UTC"))
                if zoned
                else pc.assume_timezone(pc.cast(ts, pa.timestamp("us")), "UTC")
            )
            want_ts = cast[0].as_py()
            assert table.column("ts")[i].as_py() == want_ts
            pm = rec.get("pm25")
            # the demo's feed writes its missing readings as "n/a" (scripts/make_demo.py): a null token
            if pm is None or isinstance(pm, str) and pm.strip().lower() == "n/a":
                want = None
            else:
                want = pc.cast(pa.array([str(pm)]), pa.float64())[0].as_py()  # source: pyarrow string → float64
            assert table.column("pm25")[i].as_py() == want, (files[0], i)
            assert table.column("station_id")[i].as_py() == rec["station_id"]
            compared += 1
    assert compared > 100


def test_a_rerun_is_byte_identical(clean: tuple[Path, Any], landing: Path):
    out, _ = clean
    before = _tree(out)
    driftline.apply(landing, out=out)
    assert _tree(out) == before


def test_refusals(landing: Path, tmp_path: Path):
    with pytest.raises(driftline.OutputError, match="is the input"):
        driftline.apply(landing, out=landing / "clean")
    (tmp_path / "busy").mkdir()
    (tmp_path / "busy" / "notes.txt").write_text("mine\n")
    with pytest.raises(driftline.OutputError, match="was not written by driftline apply"):
        driftline.apply(landing, out=tmp_path / "busy")
    assert (tmp_path / "busy" / "notes.txt").read_text() == "mine\n"


def test_inputs_are_left_untouched(landing: Path, tmp_path: Path):
    def listing() -> dict[str, tuple[int, int]]:
        return {str(p): (p.stat().st_size, p.stat().st_mtime_ns) for p in sorted(landing.rglob("*"))}

    before = listing()
    driftline.apply(landing, out=tmp_path / "o")
    assert listing() == before


def _append_copy_of_first_row(path: Path) -> None:
    with gzip.open(path, "rt", encoding="utf-8") as fh:
        text = fh.read()
    with gzip.open(path, "wt", encoding="utf-8") as fh:
        fh.write(text + text.split("\n", 1)[0] + "\n")


def test_incremental_equals_full(landing: Path, tmp_path: Path):
    copy = tmp_path / "landing"
    shutil.copytree(landing, copy)
    out, state = tmp_path / "inc", tmp_path / "state.json"
    first = driftline.apply(copy, out=out, state=state)
    assert len(first.written) == 14 and first.kept == ()
    again = driftline.apply(copy, out=out, state=state)
    assert again.written == () and len(again.kept) == 14
    changed = "readings/region=north/day=2026-11-27"
    _append_copy_of_first_row(copy / changed / "part-0000.jsonl.gz")
    third = driftline.apply(copy, out=out, state=state)
    assert third.written == (changed,) and len(third.kept) == 13
    assert third.reconciliation["rows"]["in"] == 4695 and third.matches
    full = driftline.apply(copy, out=tmp_path / "full")
    assert _tree(out) == _tree(tmp_path / "full")
    assert full.reconciliation == third.reconciliation


def test_rules_file_gives_the_same_output(landing: Path, tmp_path: Path, demo_profile: Any):
    rules = tmp_path / "rules.json"
    demo_profile.recommend().write(rules, "rules")
    assert driftline.apply(landing, out=tmp_path / "a").matches
    b = driftline.apply(landing, out=tmp_path / "b", rules=rules)
    assert b.matches and b.reconciliation["rules"] == "rules.json"
    ta, tb = _tree(tmp_path / "a"), _tree(tmp_path / "b")
    assert {k: v for k, v in ta.items() if not k.startswith("_reconciliation")} == {
        k: v for k, v in tb.items() if not k.startswith("_reconciliation")
    }


def test_rows_a_rules_file_cannot_cast_are_rejected_and_fail_the_reconciliation(tmp_path: Path):
    land = tmp_path / "land"
    (land / "day=1").mkdir(parents=True)
    (land / "day=1" / "a.jsonl").write_text('{"n": 1, "s": "x"}\n{"n": 2, "s": "y"}\n')
    rules = tmp_path / "rules.json"
    driftline.scan(land).recommend().write(rules, "rules")
    (land / "day=2").mkdir()
    (land / "day=2" / "b.jsonl").write_text('{"n": 3, "s": "z"}\n{"s": "no n"}\n{"n": {"deep": 1}, "s": "w"}\n')
    result = driftline.apply(land, out=tmp_path / "o", rules=rules)
    doc = result.reconciliation
    assert doc["rows"] == {"in": 5, "written": 3, "rejected": 2, "balanced": True}
    assert not result.matches
    assert doc["differences"] == ["day=2/b.jsonl: 2 rows rejected; the recommendation predicted none"]
    rejected = pq.read_table(tmp_path / "o" / REJECTED_DIR / "day=2" / PART_NAME).to_pylist()
    assert [(r["file"], r["row"], r["line"], json.loads(r["record"])) for r in rejected] == [
        ("day=2/b.jsonl", 1, 2, {"n": None, "s": "no n"}),
        ("day=2/b.jsonl", 2, 3, {"n": {"deep": 1}, "s": "w"}),
    ]
    assert rejected[0]["reason"] == "n: 1 null where the schema says not null; the data is not what the profile saw"
    assert rejected[1]["reason"] == "n: a struct value where the schema has int64"


def test_a_struct_without_fields_is_a_clear_error(tmp_path: Path):
    # source: Apache Parquet format: a group needs at least one field (pyarrow refuses to write one)
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "a.jsonl").write_text('{"id": {}, "n": {"deep": {}}}\n')
    with pytest.raises(driftline.OutputError, match=r"a struct with no fields \(id, n\.deep\), which Parquet"):
        driftline.apply(tmp_path / "in", out=tmp_path / "out")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").rglob("*.parquet"))


def test_apply_files_carry_the_mark_a_scan_skips(tmp_path: Path):
    # a state file inside the landing folder is never read back as data (core/marker.py)
    land = tmp_path / "land"
    land.mkdir()
    (land / "a.jsonl").write_text('{"n": 1}\n')
    first = driftline.apply(land, out=tmp_path / "o", state=land / "apply-state.json")
    again = driftline.apply(land, out=tmp_path / "o", state=land / "apply-state.json", include_hidden=True)
    assert first.reconciliation["rows"]["in"] == again.reconciliation["rows"]["in"] == 1
    assert again.kept == ("",)
    for name in (MARKER_NAME, "_reconciliation.json"):
        assert (tmp_path / "o" / name).read_text().startswith('{\n  "format": "driftline-')
    skipped = driftline.scan(tmp_path / "o", include_hidden=True)
    assert sorted(f.rel for f in skipped.files) == [
        "_quarantine/part-0.parquet",
        "_rejected/part-0.parquet",
        "part-0.parquet",
    ]


def test_partition_by_a_folder_key_and_a_column(landing: Path, tmp_path: Path, demo_profile: Any):
    out = tmp_path / "by"
    result = driftline.apply(landing, out=out, partition_by=["day", "firmware"])
    assert result.matches and result.reconciliation["rows"]["written"] == 4694
    marker = json.loads((out / MARKER_NAME).read_text())
    assert marker["partition_columns"] == [{"name": "day", "type": "date32"}, {"name": "firmware", "type": "string"}]
    files = [str(out / p / PART_NAME) for p in marker["partitions"]]
    # source: DuckDB's hive partitioning reads the folder names back as the columns
    con = duckdb.connect()
    by_day = dict(
        con.sql(
            f"select day::varchar, count(*) from read_parquet({files}, hive_partitioning=true) group by 1"
        ).fetchall()
    )
    want_day: dict[str, int] = {}
    for f in demo_profile.files:
        day = dict(f.partitions)["day"]
        want_day[day] = want_day.get(day, 0) + f.rows
    assert by_day == want_day
    assert "firmware" not in pq.read_schema(files[0]).names  # the folder names hold it, as Hive and Spark write it
    plain = driftline.apply(landing, out=tmp_path / "plain")
    firmware_plain = duckdb.sql(
        f"select firmware, count(*) from read_parquet({[str(f) for f in _data_files(plain.out)]}) group by 1 order by 1"
    ).fetchall()
    firmware_split = con.sql(
        f"select firmware, count(*) from read_parquet({files}, hive_partitioning=true) group by 1 order by 1"
    ).fetchall()
    assert firmware_split == firmware_plain
    with pytest.raises(driftline.OptionError, match="--partition-by 'nope': no folder key or column"):
        driftline.apply(landing, out=tmp_path / "bad", partition_by=["nope"])
    with pytest.raises(driftline.OptionError, match="--partition-by 'tags': a list<string> column"):
        driftline.apply(landing, out=tmp_path / "bad", partition_by=["tags"])


def test_jobs_give_the_same_bytes(clean: tuple[Path, Any], landing: Path, tmp_path: Path):
    out, _ = clean
    parallel = driftline.apply(landing, out=tmp_path / "j2", jobs=2)
    assert parallel.matches and len(parallel.written) == 14
    assert _tree(tmp_path / "j2") == _tree(out)


def test_every_quarantined_json_value_is_on_the_line_named(clean: tuple[Path, Any], landing: Path):
    # the files read with Python's gzip and json modules; the demo's malformed line
    # (readings/region=north/day=2026-11-29, line 218) is not a row, and the lines after it still match
    out, _ = clean
    table = pa.concat_tables(pq.read_table(f) for f in sorted((out / QUARANTINE_DIR).rglob("*.parquet")))
    checked, files = 0, {}
    for r in table.to_pylist():
        assert r["line"] is not None, r  # the demo quarantines values of JSON Lines and CSV files only
        if not r["file"].endswith(".jsonl.gz"):
            continue  # CSV: test_a_csv_quarantine_row_names_the_line_of_its_raw_value
        if r["file"] not in files:
            with gzip.open(landing / r["file"], "rt", encoding="utf-8") as fh:
                files[r["file"]] = fh.read().split("\n")
        raw = json.loads(files[r["file"]][r["line"] - 1])[r["path"]]
        assert (raw if isinstance(raw, str) else json.dumps(raw)) == r["value"], r
        checked += 1
    assert checked == 6 + 516 - 510  # all but the 510 CSV values
    # the reader's lines on the file with the malformed line: row k is the k-th line that parses
    from driftline.recommendation.raw import lined_batches
    from driftline.sources.discover import discover

    rel = "readings/region=north/day=2026-11-29/part-0000.jsonl.gz"
    ref = next(f for f in discover([landing]).files if f.rel == rel)
    rows = _jsonl_rows(landing / rel)
    starts = [n for _, lines in lined_batches(ref, 100) for n in (lines or ())]
    assert len(starts) == len(rows)
    found = {r: starts[r] for r in (0, 1, 215, 216, 217, len(rows) - 1)}
    with gzip.open(landing / rel, "rt", encoding="utf-8") as fh:
        text = fh.read().split("\n")
    assert {r: json.loads(text[n - 1]) for r, n in found.items()} == {r: rows[r] for r in found}
    assert found[217] == 219  # line 218 is the malformed one (make_demo.py's manifest)


def test_a_delta_table_reads_back_with_the_same_rows(clean: tuple[Path, Any], landing: Path, tmp_path: Path):
    deltalake = pytest.importorskip("deltalake")
    out, plain = clean
    result = driftline.apply(landing, out=tmp_path / "delta", table_format="delta")
    assert result.matches and result.reconciliation["effects"] == plain.reconciliation["effects"]
    # source: the deltalake package's own reader
    table = deltalake.DeltaTable(str(tmp_path / "delta"))
    assert table.metadata().partition_columns == ["region", "day"]
    got = table.to_pyarrow_table()
    rec_schema = pq.read_schema(_data_files(out)[0])
    assert [(f.name, f.type) for f in got.schema][: len(rec_schema)] == [(f.name, f.type) for f in rec_schema]
    assert got.schema.field("day").type == pa.date32() and got.schema.field("region").type == pa.string()
    part = ds.partitioning(pa.schema([("region", pa.string()), ("day", pa.date32())]), flavor="hive")
    files = [str(f) for f in _data_files(out)]
    want = ds.dataset(files, format="parquet", partitioning=part, partition_base_dir=str(out / "readings")).to_table()
    keys = [("station_id", "ascending"), ("ts", "ascending"), ("pm25", "ascending")]
    cols = ["station_id", "ts", "pm25", "tags", "region", "day"]
    assert got.select(cols).sort_by(keys).to_pylist() == want.select(cols).sort_by(keys).to_pylist()
    # the quarantine is the Parquet output's, byte for byte
    q = sorted((out / QUARANTINE_DIR).rglob("*.parquet"))
    assert [p.read_bytes() for p in q] == [(tmp_path / "delta" / p.relative_to(out)).read_bytes() for p in q]
