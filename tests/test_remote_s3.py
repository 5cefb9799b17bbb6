"""s3:// scans against a real S3-compatible server on 127.0.0.1: moto in server mode.

The reference is driftline's local scan of the same demo files (same relative paths); the
server's own request log shows what was listed and fetched.
"""

from __future__ import annotations

import os
import threading
from collections.abc import Iterator
from dataclasses import replace
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, unquote

import pytest

from driftline.errors import DriftlineError, InputPathError
from driftline.scan import scan_paths
from driftline.sources.remote import StorageOptions, locator, parse_condition, parse_locator

if os.environ.get("CI"):
    import boto3  # CI installs the test extra: a missing package is a failure, never a skip
    from moto.server import DomainDispatcherApplication, create_backend_app
else:
    boto3 = pytest.importorskip("boto3")
    moto_server = pytest.importorskip("moto.server")
    DomainDispatcherApplication = moto_server.DomainDispatcherApplication
    create_backend_app = moto_server.create_backend_app

BUCKET = "lake"
ACCESS_KEY = "AKIDRIFTLINETEST0001"
SECRET = "test-secret-never-shown-0123456789"


class Server:
    """moto's WSGI app behind werkzeug on loopback, logging every request it serves."""

    def __init__(self) -> None:
        from werkzeug.serving import make_server

        app = DomainDispatcherApplication(create_backend_app)
        self.requests: list[dict[str, Any]] = []

        def logged(environ: dict[str, Any], start_response: Any) -> Any:
            self.requests.append({
                "method": environ["REQUEST_METHOD"],
                "path": unquote(environ.get("PATH_INFO", "")),
                "query": parse_qs(environ.get("QUERY_STRING", "")),
                "range": environ.get("HTTP_RANGE"),
            })
            return app(environ, start_response)

        self.server = make_server("127.0.0.1", 0, logged, threaded=True)
        self.url = f"http://127.0.0.1:{self.server.server_port}"
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()

    def stop(self) -> None:
        self.server.shutdown()
        self.thread.join(5)


@pytest.fixture(scope="module")
def s3(demo_dir: Path) -> Iterator[Server]:
    saved = {k: os.environ.get(k) for k in ("AWS_ACCESS_KEY_ID", "AWS_SECRET_ACCESS_KEY", "AWS_REGION")}
    os.environ.update({"AWS_ACCESS_KEY_ID": ACCESS_KEY, "AWS_SECRET_ACCESS_KEY": SECRET, "AWS_REGION": "us-east-1"})
    server = Server()
    client = boto3.client("s3", endpoint_url=server.url, region_name="us-east-1")
    client.create_bucket(Bucket=BUCKET)
    landing = demo_dir / "landing"
    for path in sorted(landing.rglob("*")):
        if path.is_file():
            client.upload_file(str(path), BUCKET, "landing/" + path.relative_to(landing).as_posix())
    server.requests.clear()
    try:
        yield server
    finally:
        server.stop()
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def test_locator_round_trip() -> None:
    st = StorageOptions(endpoint_url="http://127.0.0.1:9000", region="eu-west-1", anonymous=True, retries=2)
    bucket, key, back = parse_locator(locator("b", "day=2026-11-30/part 0.jsonl", st))
    assert (bucket, key) == ("b", "day=2026-11-30/part 0.jsonl")
    assert back == st


def test_condition_parsing() -> None:
    assert parse_condition("day>=2026-11-29").holds("2026-11-30")
    assert not parse_condition("day>=2026-11-29").holds("2026-11-28")
    assert parse_condition("n<10").holds("9")  # integers compare as numbers: "9" < "10"
    assert not parse_condition("region!=east").holds("east")
    with pytest.raises(DriftlineError, match=r"cannot read --where 'day~1'"):
        parse_condition("day~1")


def test_s3_scan_equals_local(s3: Server, demo_dir: Path) -> None:
    local = scan_paths([demo_dir / "landing"])
    remote = scan_paths([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url))
    assert remote.root == "s3://lake/landing"
    assert [f.rel for f in remote.files] == [f.rel for f in local.files]
    # Everything but the modification time, which is the upload's in the bucket.
    assert [replace(f, mtime_ns=0) for f in remote.files] == [replace(f, mtime_ns=0) for f in local.files]
    assert all(f.mtime_ns > 0 for f in remote.files)
    assert remote.fields == local.fields
    assert remote.events == local.events
    assert remote.skipped == local.skipped


def test_parquet_footer_is_read_with_ranged_gets(s3: Server) -> None:
    s3.requests.clear()
    scan_paths([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url), include=["*.parquet"])
    gets = [r for r in s3.requests if r["method"] == "GET" and r["path"].endswith(".parquet")]
    assert gets, "the Parquet files were fetched"
    # source: RFC 9110 section 14.2 Range: bytes=first-last
    assert all(r["range"] and r["range"].startswith("bytes=") for r in gets)


def test_where_prunes_before_listing_deeper(s3: Server, demo_dir: Path) -> None:
    s3.requests.clear()
    remote = scan_paths([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url),
                        where=["day>=2026-11-30"])
    local = scan_paths([demo_dir / "landing"], where=["day>=2026-11-30"])
    assert [f.rel for f in remote.files] == [f.rel for f in local.files]
    assert {dict(f.partitions)["day"] for f in remote.files} == {"2026-11-30"}
    assert remote.fields == local.fields
    gets = [r for r in s3.requests if r["method"] == "GET"]
    listed = [r["query"].get("prefix", [""])[0] for r in gets if "list-type" in r["query"]]  # ListObjectsV2
    fetched = [r["path"] for r in gets if "list-type" not in r["query"]]
    assert listed and fetched
    assert not [p for p in listed if "day=2026-11-28" in p or "day=2026-11-29" in p]
    assert not [p for p in fetched if "day=2026-11-28" in p or "day=2026-11-29" in p]
    assert [p for p in fetched if "day=2026-11-30" in p]


def test_secret_never_in_report(s3: Server) -> None:
    from driftline.report import dumps

    profile = scan_paths([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url))
    text = dumps(profile).decode()
    assert SECRET not in text and ACCESS_KEY not in text


def test_missing_prefix_is_a_clear_error(s3: Server) -> None:
    with pytest.raises(InputPathError, match=r"s3://lake/nothing-here holds no object"):
        scan_paths([f"s3://{BUCKET}/nothing-here/"], storage=StorageOptions(endpoint_url=s3.url))


def test_failing_server_is_a_clear_error() -> None:
    import socket

    with socket.socket() as sock:  # a port nothing listens on
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    with pytest.raises(InputPathError, match=r"^cannot list s3://lake/landing: "):
        scan_paths(["s3://lake/landing/"], storage=StorageOptions(endpoint_url=f"http://127.0.0.1:{port}", retries=2))


@pytest.mark.parametrize("engine", ["local", "dask"])
def test_cli_s3_scan_matches_local_report(s3: Server, demo_dir: Path, tmp_path: Path, engine: str) -> None:
    import json
    import subprocess
    import sys

    if engine == "dask" and not os.environ.get("CI"):
        pytest.importorskip("distributed")

    def run(*args: str) -> dict[str, Any]:
        out = tmp_path / "r.json"
        proc = subprocess.run([sys.executable, "-m", "driftline.cli", "scan", *args, "--where", "day>=2026-11-29",
                               "--json", str(out), "-j", "2"], capture_output=True, text=True, timeout=120)
        assert proc.returncode == 0, proc.stderr
        assert SECRET not in proc.stdout + proc.stderr
        report = json.loads(out.read_text())
        report.pop("duration_s", None)
        report.pop("root")
        for f in report["files"]:
            f.pop("mtime_ns", None)
        return report

    remote = run(f"s3://{BUCKET}/landing/", "--endpoint-url", s3.url, "--engine", engine)
    local = run(str(demo_dir / "landing"))
    assert remote == local
    assert {f["partitions"]["day"] for f in remote["files"]} == {"2026-11-29", "2026-11-30"}


def test_one_object_url(s3: Server, demo_dir: Path) -> None:
    landing = demo_dir / "landing"
    rel = sorted(p.relative_to(landing).as_posix() for p in landing.rglob("*.parquet"))[0]
    remote = scan_paths([f"s3://{BUCKET}/landing/{rel}"], storage=StorageOptions(endpoint_url=s3.url))
    local = scan_paths([demo_dir / "landing" / rel])
    assert [f.rel for f in remote.files] == [rel.rsplit("/", 1)[-1]] == [f.rel for f in local.files]
    assert remote.root == f"s3://{BUCKET}/landing/{rel.rpartition('/')[0]}"
    assert remote.fields == local.fields


def test_other_verbs_take_s3_urls(s3: Server, demo_dir: Path) -> None:
    """schema and diff read s3:// like scan does; the endpoint comes from AWS_ENDPOINT_URL."""
    import json
    import subprocess
    import sys

    env = {**os.environ, "AWS_ENDPOINT_URL": s3.url}

    def run(*args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run([sys.executable, "-m", "driftline.cli", *args], capture_output=True, text=True,
                              timeout=120, env=env)

    remote = run("schema", f"s3://{BUCKET}/landing/", "--to", "json-schema", "--out", "-")
    local = run("schema", str(demo_dir / "landing"), "--to", "json-schema", "--out", "-")
    assert remote.returncode == 0 == local.returncode, remote.stderr
    assert remote.stdout == local.stdout and '"$schema"' in remote.stdout
    assert SECRET not in remote.stdout + remote.stderr
    same = run("diff", f"s3://{BUCKET}/landing/", str(demo_dir / "landing"), "--json", "-")
    assert same.returncode == 0, same.stderr
    (only,) = json.loads(same.stdout)["diffs"]
    assert (only["counts"], only["changes"]) == ({}, [])  # the bucket holds what the folder holds
