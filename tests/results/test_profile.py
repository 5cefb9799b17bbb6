"""Profiles are values: they merge in any order, pickle, and survive the JSON report."""

from __future__ import annotations

import csv
import gzip
import json
import pickle
import random
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
from jsonschema import Draft202012Validator

import driftline
from conftest import ROOT
from driftline.results.profile import Profile
from driftline.results.report import dumps, from_dict, to_dict


def _single(profile: Profile, i: int) -> Profile:
    return Profile(profile.root, (profile.files[i],), (), dict(profile.options))


def test_per_file_profiles_merge_in_any_order_to_the_single_pass(demo_profile):
    rng = random.Random(7)
    parts = [_single(demo_profile, i) for i in range(len(demo_profile.files))]
    for _ in range(5):
        rng.shuffle(parts)
        merged = parts[0]
        for p in parts[1:]:
            merged = merged.merge(p)
        assert merged.files == demo_profile.files
        assert merged.stats == demo_profile.stats
        assert merged.events == demo_profile.events


def test_field_stats_merge_is_commutative_and_associative(demo_profile):
    obs = list(demo_profile.observations())
    a, b, c = (o.fields.get("pm25") for o in obs[:3])
    assert a and b and c
    assert a.merge(b) == b.merge(a)
    assert a.merge(b).merge(c) == a.merge(b.merge(c))


def test_profile_pickles_and_report_round_trips(demo_profile):
    assert pickle.loads(pickle.dumps(demo_profile)) == demo_profile
    back = from_dict(json.loads(dumps(demo_profile)))
    assert back == demo_profile
    assert back.events == demo_profile.events
    assert to_dict(back)["fields"] == to_dict(demo_profile)["fields"]


def test_report_validates_against_its_published_schema(demo_profile, tmp_path: Path):
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text())
    # source: JSON Schema 2020-12 meta-schema, via jsonschema's Draft202012Validator
    Draft202012Validator.check_schema(schema)
    Draft202012Validator(schema).validate(json.loads(dumps(demo_profile)))
    (tmp_path / "x.csv").write_text("a,b\n1,\n2,3\n")
    Draft202012Validator(schema).validate(json.loads(dumps(driftline.scan(tmp_path))))


def test_counts_reconcile_with_the_rows(demo_profile, demo_manifest):
    rows = sum(f["rows"] for f in demo_manifest["files"])
    assert demo_profile.rows == rows
    for path, s in demo_profile.fields.items():
        assert s.stats.present + s.absent == s.container, path


def test_by_partition_view(demo_profile):
    view = demo_profile.by_partition("region")
    assert list(view) == ["east", "north", "south", "west"]
    # temp_c stops in north on the last day: part of north's rows lack it.
    north = view["north"]["temp_c"]
    assert north.absent == demo_profile.file("readings/region=north/day=2026-11-30/part-0000.jsonl.gz").rows


def test_types_by_format_counts_what_each_format_gave(demo_profile, demo_dir):
    # Counted apart: Python's json and gzip for the feed, pyarrow for the nightly Parquet,
    # Python's csv for the export, whose ts cells pyarrow's cast reads as timestamp[us].
    landing = demo_dir / "landing"
    strings = 0
    for path in sorted(landing.rglob("*.jsonl.gz")):
        for line in gzip.decompress(path.read_bytes()).decode("utf-8").splitlines():
            try:
                rec = json.loads(line)
            except json.JSONDecodeError:
                continue  # the demo's one cut-off line (a file problem, no record)
            strings += isinstance(rec.get("ts"), str)
    (nightly,) = landing.rglob("*.parquet")
    table = pq.read_table(nightly)
    cells = []
    for path in sorted(landing.rglob("*.csv")):
        with open(path, newline="", encoding="utf-8") as fh:
            cells += [row["ts"] for row in csv.DictReader(fh)]  # source: RFC 4180, Python's csv module
    assert pc.cast(pa.array(cells), pa.timestamp("us")).null_count == 0
    assert table.schema.field("ts").type == pa.timestamp("us", "UTC")
    assert demo_profile.types_by_format["ts"] == {
        "csv": {"timestamp[us]": len(cells)},
        "jsonl": {"string": strings},
        "parquet": {"timestamp[us, UTC]": table.num_rows},
    }
    report = to_dict(demo_profile)["fields"]
    assert report["ts"]["formats"] == demo_profile.types_by_format["ts"]
    # A field read from one format only has no "formats" entry: its types say it all.
    assert "formats" not in report["ingested_at"]
