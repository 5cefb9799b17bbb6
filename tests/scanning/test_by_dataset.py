"""A landing root scanned dataset by dataset (scanning/by_dataset.py, driftline.scan_datasets), on
the issue's Done-when root (tests/fixtures/datasets/make_layouts.py `done_when`): a partitioned
JSON Lines table, a CSV export folder, one Parquet reference file and marker files.

Each dataset's rows and absences are counted apart from driftline with Python's gzip/json/csv
modules and pyarrow; each dataset's Profile is compared with a scan of its folder alone.
"""

from __future__ import annotations

import csv
import gzip
import importlib.util
import json
import os
import shutil
from pathlib import Path
from typing import Any

import jsonschema
import pyarrow.parquet as pq
import pytest
from referencing import Registry
from referencing.jsonschema import DRAFT202012

import driftline
from conftest import fixture_path
from driftline.core.validation import SCHEMAS, schema_document
from driftline.scanning.by_dataset import is_one_table
from driftline.sources.datasets import find_datasets

NAMES = ["depot_exports", "readings", "stations.parquet"]  # expected.json's done_when datasets


def _make_layouts() -> Any:
    spec = importlib.util.spec_from_file_location("make_layouts", fixture_path("datasets/make_layouts.py"))
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def layouts(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("landing")
    _make_layouts().main(out, ["done_when", "nested", "uneven_depth"])
    return out


@pytest.fixture(scope="module")
def root(layouts: Path) -> Path:
    return layouts / "done_when"


@pytest.fixture(scope="module")
def landing(root: Path) -> driftline.Landing:
    return driftline.scan_datasets(root)


def _records(path: Path) -> list[dict[str, Any]]:
    """The rows of one file, read by the standard library or pyarrow, never by driftline."""
    name = path.name
    if name.endswith(".jsonl.gz"):
        with gzip.open(path, "rt", encoding="utf-8") as fh:  # source: RFC 1952 (gzip), JSON Lines
            return [json.loads(line) for line in fh if line.strip()]
    if name.endswith(".csv"):
        with path.open(newline="", encoding="utf-8") as fh:  # source: RFC 4180, Python's csv module
            return list(csv.DictReader(fh))
    if name.endswith(".parquet"):
        return pq.read_table(path).to_pylist()  # source: pyarrow's Parquet reader
    raise AssertionError(name)


def _data_files(root: Path) -> list[str]:
    """The data files below root by name alone (the suffixes make_layouts writes), markers and
    other extensions left out: an outside count of what discovery must place."""
    out = []
    for top, dirs, names in os.walk(root):
        dirs[:] = [d for d in dirs if not d.startswith((".", "_"))]
        for n in names:
            if not n.startswith((".", "_")) and n.endswith((".jsonl.gz", ".jsonl", ".csv", ".parquet")):
                out.append(Path(top, n).relative_to(root).as_posix())
    return sorted(out)


def test_three_datasets_and_every_file_placed(landing: driftline.Landing, root: Path) -> None:
    assert list(landing.datasets) == NAMES
    assert landing.found == tuple(NAMES)
    assert landing.loose == ()
    assert {s.rel: s.reason for s in landing.skipped} == {
        "_SUCCESS": "marker",
        "readings/_SUCCESS": "marker",
        "depot_exports/README.txt": "other-extension",
    }
    # Counts add up: files in datasets + loose = the data files below the root.
    placed = [
        f"{'' if p.root == str(root) else Path(p.root).name + '/'}{f.rel}"
        for p in landing.datasets.values()
        for f in p.files
    ]
    assert sorted(placed) == _data_files(root)
    assert landing.files + len(landing.loose) == len(_data_files(root)) == 8


def test_no_field_is_absent_because_of_another_table(landing: driftline.Landing, root: Path) -> None:
    for name, profile in landing.datasets.items():
        files = sorted(root.glob(f"{name}/**/*.*" if name != "stations.parquet" else name))
        rows = [r for f in files if not f.name.startswith("_") and f.suffix != ".txt" for r in _records(f)]
        assert profile.rows == len(rows), name
        keys = sorted({k for r in rows for k in r})
        assert sorted(profile.fields) == keys, name
        for key in keys:
            absent = sum(1 for r in rows if key not in r)
            assert profile.fields[key].absent == absent == 0, (name, key)


def test_one_table_blends_them_as_before(root: Path) -> None:
    whole = driftline.scan(root)
    # 17 rows in all (12 readings, 3 exports, 2 stations, counted above); temp_c is in the readings only.
    assert whole.rows == 17
    assert whole.fields["temp_c"].absent == 17 - 12
    assert whole.fields["qty"].absent == 17 - 3


@pytest.mark.parametrize("name", NAMES)
def test_a_dataset_equals_a_scan_of_its_folder_alone(landing: driftline.Landing, root: Path, name: str) -> None:
    alone = driftline.scan(root / name)
    got = landing.datasets[name]
    assert got == alone
    assert (got.root, [f.rel for f in got.files], got.skipped) == (
        alone.root,
        [f.rel for f in alone.files],
        alone.skipped,
    )
    assert got.events == alone.events
    assert {p: s.stats for p, s in got.fields.items()} == {p: s.stats for p, s in alone.fields.items()}
    assert got.recommend().rules == alone.recommend().rules
    assert got.recommend().to_json_schema() == alone.recommend().to_json_schema()


def test_partitions_are_those_below_the_dataset_folder(landing: driftline.Landing) -> None:
    readings = landing.datasets["readings"]
    assert readings.partition_keys() == ["region", "day"]
    assert [f.rel for f in readings.files][0] == "region=north/day=2026-03-01/part-0.jsonl.gz"


def test_dataset_picks_and_unknown_names_are_listed(root: Path) -> None:
    one = driftline.scan_datasets(root, dataset="readings")
    assert list(one.datasets) == ["readings"] and one.found == tuple(NAMES)
    two = driftline.scan_datasets(root, dataset=["stations.parquet", "readings"])
    assert list(two.datasets) == ["readings", "stations.parquet"]  # name order, not the order asked
    with pytest.raises(driftline.OptionError) as info:
        driftline.scan_datasets(root, dataset=["readings", "telemetry"])
    assert str(info.value) == (
        f"no dataset named 'telemetry' under {root}; its datasets: 'depot_exports', 'readings', 'stations.parquet'"
    )


def test_jobs_and_batch_size_change_nothing(landing: driftline.Landing, root: Path) -> None:
    assert driftline.scan_datasets(root, jobs=2).datasets == landing.datasets
    other = driftline.scan_datasets(root, batch_rows=1)
    assert {n: p.fields["ts"].stats.present for n, p in other.datasets.items() if "ts" in p.fields} == {"readings": 12}


def test_where_and_exclude_apply_as_in_a_scan(root: Path) -> None:
    got = driftline.scan_datasets(root, where=["region=north"], exclude=["*.csv"])
    # A file without the key fails the condition, as in a scan: the reference file goes too.
    scanned = driftline.scan(root, where=["region=north"], exclude=["*.csv"])
    assert [f.rel for f in scanned.files] == [f"readings/{f.rel}" for f in got.datasets["readings"].files]
    assert list(got.datasets) == ["readings"]
    assert [f.rel for f in got.datasets["readings"].files] == [
        "region=north/day=2026-03-01/part-0.jsonl.gz",
        "region=north/day=2026-03-02/part-0.jsonl.gz",
    ]


def test_nested_datasets_each_hold_their_own_files(layouts: Path) -> None:
    got = driftline.scan_datasets(layouts / "nested")
    assert list(got.datasets) == ["crm/customers", "crm/orders", "crm/orders/returns"]
    orders = got.datasets["crm/orders"]
    assert [f.rel for f in orders.files] == ["orders-0.jsonl", "orders-1.jsonl"]  # not returns/
    assert orders.root == str(layouts / "nested" / "crm" / "orders")
    assert orders.fields["order_id"].absent == 0 and "return_id" not in orders.fields


def test_a_root_of_one_table_is_read_whole(layouts: Path, root: Path) -> None:
    events = layouts / "uneven_depth"
    assert [d.name for d in find_datasets(events).datasets] == ["events"]
    got = driftline.scan_datasets(events, whole_if_one=True)
    assert got.datasets == {} and got.found == ("events",)
    assert got.whole == driftline.scan(events)
    # Several datasets, none at the root: split even when asked to read one table whole.
    assert list(driftline.scan_datasets(root, whole_if_one=True).datasets) == NAMES


def test_a_root_whose_own_files_are_a_table_reads_as_one(tmp_path: Path) -> None:
    for i in range(3):
        (tmp_path / f"events-{i}.jsonl").write_text(f'{{"id": {i}, "kind": "open"}}\n', encoding="utf-8")
    (tmp_path / "exports").mkdir()
    (tmp_path / "exports" / "a.csv").write_text("depot,qty\nd1,4\n", encoding="utf-8")
    layout = find_datasets(tmp_path)
    assert [d.name for d in layout.datasets] == [".", "exports"] and is_one_table(layout)
    got = driftline.scan_datasets(tmp_path, whole_if_one=True)
    assert got.whole == driftline.scan(tmp_path) and got.found == (".", "exports")
    # Without whole_if_one, the split: "." holds the root's own files only.
    split = driftline.scan_datasets(tmp_path)
    assert [f.rel for f in split.datasets["."].files] == ["events-0.jsonl", "events-1.jsonl", "events-2.jsonl"]
    assert split.datasets["."].skipped == ()


def test_the_report_set_round_trips_and_is_valid(landing: driftline.Landing, tmp_path: Path) -> None:
    out = tmp_path / "set.json"
    landing.write_json(out)
    data = json.loads(out.read_text(encoding="utf-8"))
    # source: JSON Schema 2020-12, checked by the jsonschema package (the report schema registered for $ref)
    registry = Registry().with_resources(
        (schema_document(k)["$id"], DRAFT202012.create_resource(schema_document(k))) for k in SCHEMAS
    )
    jsonschema.Draft202012Validator(schema_document("report-set"), registry=registry).validate(data)
    assert data["format"] == "driftline-report-set" and list(data["datasets"]) == NAMES
    assert data["datasets"]["readings"]["summary"]["rows"] == 12
    back = driftline.load_report_set(out)
    assert back == landing and isinstance(back.datasets["readings"], driftline.Profile)
    with pytest.raises(driftline.ReportVersionError, match="load_report_set reads it"):
        driftline.load_report(out)
    with pytest.raises(driftline.ReportVersionError, match="load_report reads it"):
        one = tmp_path / "one.json"
        landing.datasets["readings"].write_json(one)
        driftline.load_report_set(one)


def test_a_damaged_report_set_names_the_place(landing: driftline.Landing, tmp_path: Path) -> None:
    out = tmp_path / "set.json"
    landing.write_json(out)
    data = json.loads(out.read_text(encoding="utf-8"))
    data["datasets"]["readings"]["summary"]["rows"] = -1
    out.write_text(json.dumps(data), encoding="utf-8")
    with pytest.raises(driftline.DamagedFileError, match="/datasets/readings/summary/rows"):
        driftline.load_report_set(out)


def test_a_loose_file_is_listed_and_not_read(root: Path, tmp_path: Path) -> None:
    copy = tmp_path / "landing"
    shutil.copytree(root, copy)
    (copy / "readings" / "region=north" / "day=2026-03-01" / "raw").mkdir()
    (copy / "readings" / "region=north" / "day=2026-03-01" / "raw" / "x.jsonl").write_text('{"a": 1}\n')
    got = driftline.scan_datasets(copy)
    assert [(x.file.rel, x.reason.split(":")[0]) for x in got.loose] == [
        (
            "readings/region=north/day=2026-03-01/raw/x.jsonl",
            "its folder 'raw' is below the partition folder 'region=north' but is not key=value",
        )
    ]
    assert got.files + len(got.loose) == len(_data_files(copy)) == 9
    assert "a" not in got.datasets["readings"].fields
