"""A large synthetic Profile built straight from FileResult / Observation / FieldStats, no files.

files × fields with partitions region=r<k>/day=<date>: every file holds `per_file` of the
fields (a sliding window, so each field shows up in many files and all of them are new
after the first batch), and from the middle of the scan on every fifth field arrives as
a string instead of int64 (a type conflict per such field).
"""

from __future__ import annotations

from datetime import date, timedelta
from pathlib import Path

from driftline.core.files import FileResult
from driftline.core.observation import Observation
from driftline.core.stats import Example, FieldStats, type_sample
from driftline.results.profile import Profile

REGIONS = 20


def big_profile(n_files: int = 10_000, n_fields: int = 500, per_file: int = 10, rows: int = 100) -> Profile:
    names = [f"f{i:03d}" for i in range(n_fields)]
    start = date(2026, 1, 1)
    # FieldStats are values: two shared ones keep 10,000 files cheap to build.
    as_int = FieldStats(types={"int64": rows}, samples={type_sample("int64"): (Example("", 0, 1, "7"),)})
    as_text = FieldStats(types={"string": rows}, samples={type_sample("string"): (Example("", 0, 1, '"7"'),)})
    files = []
    for i in range(n_files):
        day = (start + timedelta(days=i // REGIONS)).isoformat()
        region = f"r{i % REGIONS:02d}"
        rel = f"events/region={region}/day={day}/part-{i:05d}.jsonl"
        fields = {}
        late = i >= n_files // 2
        for j in range(per_file):
            k = (i * per_file + j + i // REGIONS) % n_fields  # shifts by day, so fields move across regions
            fields[names[k]] = as_text if (k % 5 == 0 and late) else as_int
        obs = Observation(rel, 0, 0, rows, dict(sorted(fields.items())))
        files.append(FileResult(rel, "jsonl", None, (("region", region), ("day", day)), 4096, 0, rows, (obs,)))
    return Profile("synthetic", tuple(files))


def partition_landing(root: Path, values: int = 120, odd: int = 77) -> Path:
    """A landing folder of `values` partition folders station=s000, s001, ... of three rows
    each, where the partition `odd` alone carries temperature_celsius as a JSON string
    instead of a number: one changed column among many in the partition matrix."""
    import json

    for i in range(values):
        folder = root / f"station=s{i:03d}"
        folder.mkdir(parents=True, exist_ok=True)
        rows = []
        for j in range(3):
            temp: float | str = 20.5 + j
            rows.append({"reading_id": i * 10 + j, "temperature_celsius": str(temp) if i == odd else temp})
            rows[-1]["station_name"] = f"station {i}"
        (folder / "part-0.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows), encoding="utf-8")
    return root
