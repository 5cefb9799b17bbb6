"""driftline apply on generated landing folders (hypothesis): for any folder of JSON Lines and
CSV files in key=value partitions, every row is written or rejected, the quarantine holds
exactly the values the recommendation predicted it would null or change (per field and
cause), the output's row count is what pyarrow reads back, and a re-run gives the same bytes."""

from __future__ import annotations

import hashlib
import tempfile
from pathlib import Path
from typing import Any

import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

import driftline
from conftest import import_test_module
from driftline.applying.run import empty_structs

props = import_test_module("test_properties")


def _tree(out: Path) -> dict[str, str]:
    return {
        str(p.relative_to(out)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(out.rglob("*"))
        if p.is_file()
    }


@pytest.mark.slow
@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    files=st.one_of(props.shaped_files(), st.lists(props.JSONL_FILES, min_size=1, max_size=2)),
    table=props.csv_tables(),
    batch_rows=st.integers(1, 6),
)
def test_apply_accounts_for_every_row_and_value(files: Any, table: Any, batch_rows: int):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "landing"
        for i, batches in enumerate(files):
            (root / f"part={i % 2}").mkdir(parents=True, exist_ok=True)
            props.write_jsonl(root / f"part={i % 2}" / f"f{i}.jsonl", batches)
        (root / "part=csv").mkdir(parents=True, exist_ok=True)
        props.write_csv(root / "part=csv" / "t.csv", *table)
        profile = driftline.scan(root, delimiter=",", batch_rows=batch_rows)
        rec = profile.recommend()
        # Parquet stores no struct without fields (test_apply_run.py checks the error)
        assume(not [p for f in rec.arrow_schema() for p in empty_structs(f.type, f.name)])
        out = Path(tmp) / "out"
        result = driftline.apply(root, out=out, delimiter=",", batch_rows=batch_rows)
        doc = result.reconciliation
        assert doc["differences"] == [], doc["differences"]
        assert doc["rows"] == {"in": rec.rows, "written": rec.rows, "rejected": 0, "balanced": True}
        predicted = {
            (p.path, e.cause): e.count
            for p in rec.walk()
            for e in p.effects
            if e.kind in ("null", "change") and e.exact and e.count
        }
        inexact = {(p.path, e.cause) for p in rec.walk() for e in p.effects if not e.exact}
        got: dict[tuple[str, str], int] = {}
        for f in sorted((out / "_quarantine").rglob("*.parquet")):
            t = pq.read_table(f)  # source: pyarrow's Parquet reader
            for path, cause in zip(t.column("path").to_pylist(), t.column("cause").to_pylist(), strict=True):
                got[(path, cause)] = got.get((path, cause), 0) + 1
        assert {k: v for k, v in got.items() if k not in inexact} == predicted
        written = sum(pq.ParquetFile(out / p / "part-0.parquet").metadata.num_rows for p in ("part=0", "part=csv"))
        written += sum(pq.ParquetFile(f).metadata.num_rows for f in out.glob("part=1/part-0.parquet"))
        assert written == rec.rows
        before = _tree(out)
        driftline.apply(root, out=out, delimiter=",", batch_rows=batch_rows)
        assert _tree(out) == before
