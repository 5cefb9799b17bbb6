"""`driftline apply` from the command line: the summary it prints, exit 0 when the outcome equals
the prediction, 1 when it differs (naming the field or file), 2 for an output it must refuse."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pyarrow.parquet as pq

import driftline

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "COLUMNS": "200"}
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=300, env=env)


def test_the_demo_is_applied_and_reconciled(demo_dir: Path, tmp_path: Path):
    out = tmp_path / "clean"
    res = run("apply", str(demo_dir / "landing"), "--out", str(out))
    assert res.returncode == 0, res.stderr
    assert res.stdout.splitlines() == [
        f"wrote 14 partitions to {out}",
        "rows: 4,694 in = 4,694 written + 0 rejected",
        "  ok      pm25  null_token: quarantined 6, predicted 6",
        "  ok      tags  wrapped: quarantined 516, predicted 516",
        "  ok      ts  assumed_zone: counted 1,117, predicted 1,117",
    ]
    saved = json.loads((out / "_reconciliation.json").read_text())
    assert saved["matches"] is True and saved["rows"] == {"in": 4694, "written": 4694, "rejected": 0, "balanced": True}
    # the typed table and the quarantine account for every input row (read back by pyarrow)
    written = sum(pq.ParquetFile(p).metadata.num_rows for p in out.glob("readings/*/*/part-0.parquet"))
    assert written == 4694


def test_an_outcome_other_than_the_prediction_exits_1(tmp_path: Path):
    land = tmp_path / "land"
    land.mkdir()
    (land / "a.jsonl").write_text('{"n": 1}\n{"n": 2}\n')
    rules = tmp_path / "rules.json"
    driftline.scan(land).recommend().write(rules, "rules")
    (land / "b.jsonl").write_text('{"n": {"x": 1}}\n{"m": 1}\n')  # the rules saw n as an integer in every row
    res = run("apply", str(land), "--out", str(tmp_path / "o"), "--rules", str(rules))
    assert res.returncode == 1, res.stderr
    assert "difference: b.jsonl: 2 rows rejected; the recommendation predicted none" in res.stdout
    assert res.stderr == "error: the outcome differs from the recommendation's prediction (see above)\n"


def test_a_quarantined_count_other_than_predicted_names_field_and_file(tmp_path: Path):
    land = tmp_path / "land"
    land.mkdir()
    (land / "a.jsonl").write_text('{"n": 1.5}\n{"n": "n/a"}\n')
    rules = tmp_path / "rules.json"
    driftline.scan(land).recommend().write(rules, "rules")
    (land / "b.jsonl").write_text('{"n": "N/A"}\n')
    res = run("apply", str(land), "--out", str(tmp_path / "o"), "--rules", str(rules))
    assert res.returncode == 1
    assert "difference: n: null_token: quarantined 2, predicted 1, in a.jsonl (1), b.jsonl (1)" in res.stdout


def test_an_output_inside_the_landing_folder_is_refused(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"n": 1}\n')
    res = run("apply", str(tmp_path), "--out", str(tmp_path / "clean"))
    assert res.returncode == 2
    assert res.stderr.startswith("error: refusing to write into ")
    assert not (tmp_path / "clean").exists()
