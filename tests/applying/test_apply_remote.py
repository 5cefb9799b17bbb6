"""driftline apply with s3:// input and output, against a real S3-compatible server on
127.0.0.1 (moto in server mode, tests/_moto.py).

The reference is apply's local run over the demo landing folder, which tests/applying/
test_apply_run.py checks against pyarrow, DuckDB and the recommendation's predictions: each
object written to the bucket must hold exactly the bytes of the local file of the same
relative path. boto3 (an S3 client independent of pyarrow.fs) fetches what was written.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import duckdb
import orjson
import pyarrow as pa
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest
from pyarrow import fs as pafs

import driftline
from _moto import ACCESS_KEY, BUCKET, SECRET, Server, boto3, landing_bucket
from driftline.applying.output import MARKER_NAME, PART_NAME, QUARANTINE_DIR, RECONCILIATION_NAME
from driftline.errors import OutputError


@pytest.fixture(scope="module")
def s3(demo_dir: Path) -> Iterator[Server]:
    with landing_bucket(demo_dir / "landing") as server:
        yield server


@pytest.fixture(scope="module")
def local_clean(demo_dir: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("local") / "clean"
    assert driftline.apply(demo_dir / "landing", out=out).matches
    return out


def _client(s3: Server) -> Any:
    return boto3.client("s3", endpoint_url=s3.url, region_name="us-east-1")


def _objects(s3: Server, prefix: str) -> dict[str, bytes]:
    """Every object below prefix (relative key → bytes), fetched with boto3."""
    client = _client(s3)
    out: dict[str, bytes] = {}
    for page in client.get_paginator("list_objects_v2").paginate(Bucket=BUCKET, Prefix=prefix + "/"):
        for item in page.get("Contents", []):
            body = client.get_object(Bucket=BUCKET, Key=item["Key"])["Body"].read()
            out[item["Key"][len(prefix) + 1 :]] = body
    return out


def _files(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def test_s3_output_holds_the_bytes_of_a_local_run(s3: Server, demo_dir: Path, local_clean: Path) -> None:
    got = driftline.apply(demo_dir / "landing", out=f"s3://{BUCKET}/clean-a", endpoint_url=s3.url)
    assert got.matches and got.out == f"s3://{BUCKET}/clean-a"
    remote = _objects(s3, "clean-a")
    local = _files(local_clean)
    # the same input path: every file, the reconciliation and marker too, is byte for byte the local one
    assert sorted(remote) == sorted(local)
    assert remote == local
    assert any(k.startswith(QUARANTINE_DIR + "/") for k in remote)
    # no temporary key is left in the bucket (the final keys are written whole, never renamed)
    assert not [k for k in remote if ".tmp-" in k]
    # a re-run into its own prefix: the marker lets it in, and the bytes do not change
    again = driftline.apply(demo_dir / "landing", out=f"s3://{BUCKET}/clean-a", endpoint_url=s3.url)
    assert again.matches and _objects(s3, "clean-a") == local


def test_s3_input_and_output_equal_the_local_run(s3: Server, local_clean: Path, tmp_path: Path) -> None:
    got = driftline.apply(f"s3://{BUCKET}/landing/", out=f"s3://{BUCKET}/clean-b", endpoint_url=s3.url)
    assert got.matches
    remote = _objects(s3, "clean-b")
    local = _files(local_clean)
    parquet = sorted(k for k in local if k.endswith(".parquet"))
    assert parquet and sorted(k for k in remote if k.endswith(".parquet")) == parquet
    for key in parquet:  # per partition: data, quarantine and rejected rows, byte for byte
        assert remote[key] == local[key], key
    doc, want = orjson.loads(remote[RECONCILIATION_NAME]), orjson.loads(local[RECONCILIATION_NAME])
    assert doc["root"] == f"s3://{BUCKET}/landing/"  # the only difference: the input as given
    assert {**doc, "root": ""} == {**want, "root": ""}
    assert remote[MARKER_NAME] == local[MARKER_NAME]

    # pyarrow reads the table back through its own S3 client, key=value keys as columns
    # source: pyarrow.dataset with partitioning="hive" (Hive's key=value directory layout)
    s3fs = pafs.S3FileSystem(
        endpoint_override=s3.url.split("://")[1], scheme="http", region="us-east-1", access_key=ACCESS_KEY,
        secret_key=SECRET,
    )  # fmt: skip
    data = [f"{BUCKET}/clean-b/{k}" for k in parquet if not k.startswith("_")]
    table = ds.dataset(data, filesystem=s3fs, format="parquet", partitioning="hive").to_table()
    assert table.num_rows == doc["rows"]["written"]
    for name, col in doc["columns"].items():
        assert table.column(name).null_count == col["nulls"], name

    # DuckDB over the objects fetched with boto3: the same counts
    for key in parquet:
        target = tmp_path / key
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(remote[key])
    files = [str(tmp_path / k) for k in parquet if not k.startswith("_")]
    # source: DuckDB read_parquet(..., hive_partitioning=true)
    rel = duckdb.connect().read_parquet(files, hive_partitioning=True)
    assert rel.aggregate("count(*)").fetchall()[0][0] == doc["rows"]["written"]
    for name, col in doc["columns"].items():
        assert rel.aggregate(f'count(*) - count("{name}")').fetchall()[0][0] == col["nulls"], name


def test_a_prefix_apply_did_not_write_is_refused(s3: Server, demo_dir: Path) -> None:
    client = _client(s3)
    client.put_object(Bucket=BUCKET, Key="theirs/data.csv", Body=b"a\n1\n")
    with pytest.raises(OutputError, match=r"refusing to write into 's3://lake/theirs'.*has no _driftline_apply.json"):
        driftline.apply(demo_dir / "landing", out=f"s3://{BUCKET}/theirs", endpoint_url=s3.url)
    keys = [o["Key"] for o in client.list_objects_v2(Bucket=BUCKET, Prefix="theirs/")["Contents"]]
    assert keys == ["theirs/data.csv"]  # nothing was written beside it
    # a foreign marker is refused too
    client.put_object(Bucket=BUCKET, Key=f"fake/{MARKER_NAME}", Body=b'{"format": "something-else"}')
    with pytest.raises(OutputError, match=r"s3://lake/fake/_driftline_apply.json is not a driftline apply marker"):
        driftline.apply(demo_dir / "landing", out=f"s3://{BUCKET}/fake", endpoint_url=s3.url)
    # the landing prefix itself, and a prefix inside it
    for out in (f"s3://{BUCKET}/landing", f"s3://{BUCKET}/landing/clean"):
        with pytest.raises(OutputError, match=r"it is the input 's3://lake/landing/', inside it or around it"):
            driftline.apply(f"s3://{BUCKET}/landing/", out=out, endpoint_url=s3.url)


def test_incremental_s3_run_keeps_unchanged_partitions(s3: Server, demo_dir: Path, tmp_path: Path) -> None:
    state = tmp_path / "state.json"
    out = f"s3://{BUCKET}/clean-c"
    first = driftline.apply(f"s3://{BUCKET}/landing/", out=out, state=state, endpoint_url=s3.url)
    before = _objects(s3, "clean-c")
    second = driftline.apply(f"s3://{BUCKET}/landing/", out=out, state=state, endpoint_url=s3.url)
    assert second.written == () and sorted(second.kept) == sorted(first.written)
    assert _objects(s3, "clean-c") == before
    assert orjson.loads(state.read_bytes())["out"] == out


def test_a_partition_gone_from_the_input_is_removed_from_the_bucket(s3: Server, tmp_path: Path) -> None:
    client = _client(s3)
    for day in ("2026-01-01", "2026-01-02"):
        client.put_object(Bucket=BUCKET, Key=f"small/day={day}/a.jsonl", Body=b'{"n": 1}\n{"n": "x"}\n')
    out = f"s3://{BUCKET}/clean-d"
    driftline.apply(f"s3://{BUCKET}/small/", out=out, endpoint_url=s3.url)
    assert f"day=2026-01-02/{PART_NAME}" in _objects(s3, "clean-d")
    client.delete_object(Bucket=BUCKET, Key="small/day=2026-01-02/a.jsonl")
    driftline.apply(f"s3://{BUCKET}/small/", out=out, endpoint_url=s3.url)
    keys = sorted(_objects(s3, "clean-d"))
    assert not [k for k in keys if "2026-01-02" in k]
    assert f"day=2026-01-01/{PART_NAME}" in keys
    assert orjson.loads(_objects(s3, "clean-d")[MARKER_NAME])["partitions"] == ["day=2026-01-01"]


def test_cli_applies_s3_to_s3(s3: Server, local_clean: Path) -> None:
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "driftline.cli",
            "apply",
            f"s3://{BUCKET}/landing/",
            "--out",
            f"s3://{BUCKET}/clean-e",
            "--endpoint-url",
            s3.url,
            "-j",
            "2",
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    assert "to s3://lake/clean-e" in proc.stdout
    assert SECRET not in proc.stdout + proc.stderr
    remote = _objects(s3, "clean-e")
    for key, body in _files(local_clean).items():
        if key.endswith(".parquet"):
            assert remote[key] == body, key


def test_dask_workers_write_to_s3(s3: Server, local_clean: Path) -> None:
    distributed = pytest.importorskip("distributed") if not os.environ.get("CI") else __import__("distributed")
    # source: distributed LocalCluster: worker processes on loopback (they inherit the test's AWS settings)
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=":0"
    ) as cluster:
        got = driftline.apply(
            f"s3://{BUCKET}/landing/",
            out=f"s3://{BUCKET}/clean-f",
            endpoint_url=s3.url,
            engine="dask",
            scheduler=cluster.scheduler_address,
        )
    assert got.matches
    remote = _objects(s3, "clean-f")
    for key, body in _files(local_clean).items():
        if key.endswith(".parquet"):
            assert remote[key] == body, key


def test_a_refused_upload_leaves_every_object_whole(s3: Server, tmp_path: Path) -> None:
    """The server refuses the data object of the second partition (403 AccessDenied): the run
    stops naming it; the first partition is new, the refused object is the previous run's,
    whole; nothing partial or temporary is in the bucket; a re-run completes."""
    landing = tmp_path / "in"
    days = ("2026-02-01", "2026-02-02")
    for day in days:
        (landing / f"day={day}").mkdir(parents=True)
        (landing / f"day={day}" / "a.jsonl").write_text('{"n": 1}\n{"n": "x"}\n')
    out = f"s3://{BUCKET}/clean-g"
    driftline.apply(landing, out=out, endpoint_url=s3.url)
    before = _objects(s3, "clean-g")
    for day in days:
        (landing / f"day={day}" / "a.jsonl").write_text('{"n": 2}\n{"n": 3}\n{"n": "y"}\n')
    fresh = tmp_path / "local"
    driftline.apply(landing, out=fresh, endpoint_url=s3.url)
    want = _files(fresh)
    refused = f"/{BUCKET}/clean-g/day=2026-02-02/{PART_NAME}"
    s3.refuse = lambda r: r["method"] in ("PUT", "POST") and r["path"] == refused
    try:
        with pytest.raises(OutputError, match=r"^cannot write partition 'day=2026-02-02' in 's3://lake/clean-g': "):
            driftline.apply(landing, out=out, endpoint_url=s3.url)
    finally:
        s3.refuse = None
    now = _objects(s3, "clean-g")
    assert sorted(now) == sorted(before)  # no partial, no temporary object
    first = [k for k in now if "day=2026-02-01" in k]
    assert len(first) == 3 and all(now[k] == want[k] for k in first)
    assert now[f"day=2026-02-01/{PART_NAME}"] != before[f"day=2026-02-01/{PART_NAME}"]  # the new rows
    data = f"day=2026-02-02/{PART_NAME}"
    assert now[data] == before[data] != want[data]  # the previous version, whole
    assert now[RECONCILIATION_NAME] == before[RECONCILIATION_NAME]  # written last: still the run before
    driftline.apply(landing, out=out, endpoint_url=s3.url)
    assert _objects(s3, "clean-g") == want


def test_sigint_during_an_upload_leaves_the_object_whole(s3: Server, tmp_path: Path) -> None:
    """SIGINT arrives while the second partition's data object is being uploaded (sent when the
    server receives the upload's first request): the run stops (KeyboardInterrupt), and the
    object is the whole new file, never a part of it or an empty one; the marker and the
    reconciliation are still the previous run's; a re-run completes."""
    landing = tmp_path / "in"
    days = ("2026-03-01", "2026-03-02")
    for day in days:
        (landing / f"day={day}").mkdir(parents=True)
        (landing / f"day={day}" / "a.jsonl").write_text('{"n": 1}\n{"n": "x"}\n')
    out = f"s3://{BUCKET}/clean-h"
    driftline.apply(landing, out=out, endpoint_url=s3.url)
    before = _objects(s3, "clean-h")
    for day in days:
        (landing / f"day={day}" / "a.jsonl").write_text('{"n": 2}\n{"n": 3}\n{"n": "y"}\n')
    fresh = tmp_path / "local"
    driftline.apply(landing, out=fresh, endpoint_url=s3.url)
    want = _files(fresh)
    target = f"/{BUCKET}/clean-h/day=2026-03-02/{PART_NAME}"

    sent: list[int] = []

    def interrupt(request: dict[str, Any]) -> None:
        # the upload's first request (CreateMultipartUpload, or a PutObject): the object is not whole yet
        if request["method"] in ("POST", "PUT") and request["path"] == target and not sent:
            sent.append(1)
            os.kill(os.getpid(), signal.SIGINT)  # source: POSIX kill(2); Python raises KeyboardInterrupt

    s3.after = interrupt
    try:
        with pytest.raises(KeyboardInterrupt):
            driftline.apply(landing, out=out, endpoint_url=s3.url)
    finally:
        s3.after = None
    assert sent == [1]
    now = _objects(s3, "clean-h")
    assert sorted(now) == sorted(before)
    data = f"day=2026-03-02/{PART_NAME}"
    assert now[data] == want[data] != before[data]  # uploaded whole before the interrupt was acted on
    assert pq.read_table(pa.BufferReader(now[data])).num_rows == 3
    assert now[MARKER_NAME] == before[MARKER_NAME] and now[RECONCILIATION_NAME] == before[RECONCILIATION_NAME]
    driftline.apply(landing, out=out, endpoint_url=s3.url)
    assert _objects(s3, "clean-h") == want


def test_s3_input_to_a_local_folder_and_partition_by(s3: Server, demo_dir: Path, tmp_path: Path) -> None:
    """An s3:// landing prefix into a local folder, and --partition-by into a prefix: the bytes of the local run."""
    local = tmp_path / "local"
    driftline.apply(demo_dir / "landing", out=local, partition_by=["day"])
    from_s3 = tmp_path / "from-s3"
    got = driftline.apply(f"s3://{BUCKET}/landing/", out=from_s3, partition_by=["day"], endpoint_url=s3.url)
    assert got.matches and got.out == from_s3
    want = _files(local)
    parquet = sorted(k for k in want if k.endswith(".parquet"))
    assert len([k for k in parquet if k.startswith("day=")]) == 4  # the demo's four days
    assert {k: v for k, v in _files(from_s3).items() if k.endswith(".parquet")} == {k: want[k] for k in parquet}
    driftline.apply(demo_dir / "landing", out=f"s3://{BUCKET}/clean-i", partition_by=["day"], endpoint_url=s3.url)
    assert _objects(s3, "clean-i") == want
