"""s3:// scans against a real S3-compatible server on 127.0.0.1: moto in server mode.

The reference is driftline's local scan of the same demo files (same relative paths); the
server's own request log shows what was listed and fetched.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import replace
from pathlib import Path
from typing import Any

import pytest

from _endpoints import dead_port, silent_endpoint
from _moto import ACCESS_KEY, BUCKET, SECRET, Server, boto3, landing_bucket
from driftline.core.options import StorageOptions
from driftline.core.partitions import parse_condition
from driftline.errors import InputPathError, OptionError
from driftline.scanning.run import scan_paths
from driftline.sources.discover import discover
from driftline.sources.remote import discover_remote, locator, parse_locator


@pytest.fixture(scope="module")
def s3(demo_dir: Path) -> Iterator[Server]:
    with landing_bucket(demo_dir / "landing") as server:
        server.requests.clear()
        yield server


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
    with pytest.raises(OptionError, match=r"malformed --where 'day~1'"):
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


def test_an_objects_location_is_a_url_and_says_so(s3: Server, demo_dir: Path) -> None:
    remote = discover_remote([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url)).files
    local = discover([demo_dir / "landing"]).files
    assert [r.rel for r in remote] == [f.rel for f in local]
    assert all(r.is_remote and r.path.startswith(f"s3://{BUCKET}/landing/") for r in remote)
    assert not any(f.is_remote for f in local) and all(os.path.isabs(f.path) for f in local)
    # the location names the object: parsed back, its key is the bucket prefix plus rel
    assert [parse_locator(r.path)[1] for r in remote] == [f"landing/{r.rel}" for r in remote]


def test_parquet_footer_is_read_with_ranged_gets(s3: Server) -> None:
    s3.requests.clear()
    scan_paths([f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url), include=["*.parquet"])
    gets = [r for r in s3.requests if r["method"] == "GET" and r["path"].endswith(".parquet")]
    assert gets, "the Parquet files were fetched"
    # source: RFC 9110 section 14.2 Range: bytes=first-last
    assert all(r["range"] and r["range"].startswith("bytes=") for r in gets)


def test_where_prunes_before_listing_deeper(s3: Server, demo_dir: Path) -> None:
    s3.requests.clear()
    remote = scan_paths(
        [f"s3://{BUCKET}/landing/"], storage=StorageOptions(endpoint_url=s3.url), where=["day>=2026-11-30"]
    )
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
    from driftline.results.report import dumps

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
        proc = subprocess.run(
            [
                sys.executable,
                "-m",
                "driftline.cli",
                "scan",
                *args,
                "--where",
                "day>=2026-11-29",
                "--json",
                str(out),
                "-j",
                "2",
            ],
            capture_output=True,
            text=True,
            timeout=120,
        )
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
        return subprocess.run(
            [sys.executable, "-m", "driftline.cli", *args], capture_output=True, text=True, timeout=120, env=env
        )

    remote = run("schema", f"s3://{BUCKET}/landing/", "--to", "json-schema", "--out", "-")
    local = run("schema", str(demo_dir / "landing"), "--to", "json-schema", "--out", "-")
    assert remote.returncode == 0 == local.returncode, remote.stderr
    assert remote.stdout == local.stdout and '"$schema"' in remote.stdout
    assert SECRET not in remote.stdout + remote.stderr
    same = run("diff", f"s3://{BUCKET}/landing/", str(demo_dir / "landing"), "--json", "-")
    assert same.returncode == 0, same.stderr
    (only,) = json.loads(same.stdout)["diffs"]
    assert (only["counts"], only["changes"]) == ({}, [])  # the bucket holds what the folder holds


# -- hostile listings, replaced objects, silent endpoints -------------------------------------


def test_docstring_examples_run() -> None:
    import doctest

    import driftline.sources.remote as remote

    result = doctest.testmod(remote, optionflags=doctest.ELLIPSIS)
    assert result.failed == 0 and result.attempted >= 8


# Keys S3 allows (source: Amazon S3 User Guide, "Naming Amazon S3 objects": any UTF-8 up to
# 1,024 bytes; '//', '.' and '..' segments are legal but need care) that are not file paths.
ODD_KEYS = ["odd//b.jsonl", "odd/y//z/f.jsonl", "odd/./d.jsonl", "odd/../e.jsonl"]
PLAIN_KEYS = [
    "odd/a.jsonl",
    "odd/sp ace.jsonl",
    "odd/pct%41.jsonl",
    "odd/q?x.jsonl",
    "odd/h#x.jsonl",
    "odd/plus+.jsonl",
    "odd/ünï.jsonl",
    "odd/y/ok.jsonl",
]


@pytest.fixture(scope="module")
def odd_bucket(s3: Server) -> Any:
    client = boto3.client("s3", endpoint_url=s3.url, region_name="us-east-1")
    for i, key in enumerate([*ODD_KEYS, *PLAIN_KEYS]):
        client.put_object(Bucket=BUCKET, Key=key, Body=b"".join(b'{"n": %d}\n' % j for j in range(i + 1)))
    client.put_object(Bucket=BUCKET, Key="odd/marker/", Body=b"")  # a console's folder marker
    return client


def _etags(client: Any, prefix: str) -> dict[str, str]:
    pages = client.get_paginator("list_objects_v2").paginate(Bucket=BUCKET, Prefix=prefix)
    return {o["Key"]: o["ETag"] for page in pages for o in page.get("Contents", [])}


@pytest.mark.timeout(120)
def test_keys_with_double_slashes_list_each_prefix_once(s3: Server, odd_bucket: Any) -> None:
    s3.requests.clear()
    profile = scan_paths([f"s3://{BUCKET}/odd/"], storage=StorageOptions(endpoint_url=s3.url))
    listed = [r["query"]["prefix"][0] for r in s3.requests if "list-type" in r["query"]]  # ListObjectsV2
    assert sorted(listed) == ["odd/", "odd/marker/", "odd/y/"]  # each folder once: bounded in requests
    assert [f.rel for f in profile.files] == sorted(k[len("odd/") :] for k in PLAIN_KEYS)
    assert [(s.rel, s.reason) for s in profile.skipped] == [
        ("../", "odd-key"),
        ("./", "odd-key"),
        ("/", "odd-key"),
        ("y//", "odd-key"),
    ]
    # Rows against the bodies read back with boto3 (the reference client), line by line.
    for key in PLAIN_KEYS:
        body = odd_bucket.get_object(Bucket=BUCKET, Key=key)["Body"].read()
        assert profile.file(key[len("odd/") :]).rows == body.count(b"\n"), key
    assert profile.issues == ()


@pytest.mark.timeout(120)
def test_cli_odd_keys_report(s3: Server, odd_bucket: Any) -> None:
    import json

    from _measured import PEAK_LIMIT, run_cli

    before = _etags(odd_bucket, "odd/")
    run = run_cli("scan", f"s3://{BUCKET}/odd/", "--endpoint-url", s3.url, "--json", "-", "-q", "-j", "2")
    assert run.returncode == 0, run.stderr
    report = json.loads(run.stdout)
    assert report["skipped"] == [{"path": p, "reason": "odd-key"} for p in ("../", "./", "/", "y//")]
    assert report["summary"]["files"] == len(PLAIN_KEYS)
    assert _etags(odd_bucket, "odd/") == before  # objects untouched
    assert run.peak < PEAK_LIMIT


SWAP_LINES = 800_000  # 12 MB: the JSON Lines reader asks for 4 MiB at a time, one ranged GET each


def _swap_setup(s3: Server, key: str) -> tuple[Any, bytes, bytes]:
    client = boto3.client("s3", endpoint_url=s3.url, region_name="us-east-1")
    old = b'{"v": 1000000}\n' * SWAP_LINES
    new = b'{"v":"abcdef"}\n' * SWAP_LINES  # same size: only the ETag tells them apart
    assert len(old) == len(new)
    client.put_object(Bucket=BUCKET, Key=key, Body=old)
    return client, old, new


@pytest.mark.timeout(120)
def test_object_replaced_mid_read_is_changed(s3: Server) -> None:
    import hashlib

    client, old, new = _swap_setup(s3, "swap/a.jsonl")
    storage = StorageOptions(endpoint_url=s3.url)
    calm = scan_paths([f"s3://{BUCKET}/swap/"], storage=storage)
    assert calm.issues == () and calm.fields["v"].stats.types == {"int64": SWAP_LINES}
    swapped: list[str] = []

    def replace_after_first_get(request: dict[str, Any]) -> None:
        if request["method"] == "GET" and request["path"].endswith("swap/a.jsonl") and not swapped:
            swapped.append(client.put_object(Bucket=BUCKET, Key="swap/a.jsonl", Body=new)["ETag"])

    s3.after = replace_after_first_get
    try:
        profile = scan_paths([f"s3://{BUCKET}/swap/"], storage=storage)
    finally:
        s3.after = None
    # source: RFC 9110 section 8.8.3: a new representation has a new entity tag; S3's ETag of a
    # single-part upload is the MD5 of its bytes (Amazon S3 API Reference, "Object")
    assert swapped == [f'"{hashlib.md5(new).hexdigest()}"']
    (issue,) = profile.issues
    assert (issue.file, issue.kind, issue.severity) == ("a.jsonl", "changed", "error")
    assert issue.message == (
        f'the object was replaced during the read (ETag "{hashlib.md5(old).hexdigest()}" when '
        f"opened, {swapped[0]} after); its rows may mix two versions; rescan it"
    )
    assert not profile.file("a.jsonl").complete
    assert set(profile.fields["v"].stats.types) == {"int64", "string"}  # the mix the problem warns of


@pytest.mark.timeout(180)
def test_cli_object_replaced_mid_read(s3: Server) -> None:
    import hashlib
    import json

    from _measured import PEAK_LIMIT, run_cli

    client, old, new = _swap_setup(s3, "swap3/a.jsonl")
    swapped: list[str] = []

    def replace_after_first_get(request: dict[str, Any]) -> None:
        if request["method"] == "GET" and request["path"].endswith("swap3/a.jsonl") and not swapped:
            swapped.append(client.put_object(Bucket=BUCKET, Key="swap3/a.jsonl", Body=new)["ETag"])

    s3.after = replace_after_first_get
    try:
        run = run_cli("scan", f"s3://{BUCKET}/swap3/", "--endpoint-url", s3.url, "--json", "-", "-q")
    finally:
        s3.after = None
    assert run.returncode == 0, run.stderr  # a file problem, as for a local file rewritten mid-scan
    (file,) = json.loads(run.stdout)["files"]
    assert file["complete"] is False
    assert [(i["kind"], i["message"]) for i in file["issues"]] == [
        (
            "changed",
            f'the object was replaced during the read (ETag "{hashlib.md5(old).hexdigest()}" when opened, '
            f"{swapped[0]} after); its rows may mix two versions; rescan it",
        )
    ]
    assert client.get_object(Bucket=BUCKET, Key="swap3/a.jsonl")["Body"].read() == new  # only the test wrote
    assert run.peak < PEAK_LIMIT


@pytest.mark.timeout(120)
def test_object_replaced_after_listing_is_changed(s3: Server) -> None:
    client, old, _ = _swap_setup(s3, "swap2/a.jsonl")
    shorter = old[: len(old) // 2]

    def replace_before_reading(done: int, total: int, current: str) -> None:
        if current == "a.jsonl":
            client.put_object(Bucket=BUCKET, Key="swap2/a.jsonl", Body=shorter)

    profile = scan_paths(
        [f"s3://{BUCKET}/swap2/"], storage=StorageOptions(endpoint_url=s3.url), progress=replace_before_reading
    )
    assert [(i.kind, i.message) for i in profile.issues] == [
        (
            "changed",
            f"the object changed after it was listed (size {len(old):,} then {len(shorter):,} bytes); rescan it",
        )
    ]


@pytest.fixture
def silent_port() -> Iterator[int]:
    """A local socket that accepts connections and never answers (the hostile endpoint)."""
    yield from silent_endpoint()


@pytest.mark.timeout(120)
def test_silent_endpoint_is_a_bounded_clear_error(silent_port: int, tmp_path: Path) -> None:
    from _measured import PEAK_LIMIT, run_cli

    url = f"http://127.0.0.1:{silent_port}"
    run = run_cli(
        "scan",
        "s3://lake/landing/",
        "--endpoint-url",
        url,
        "--request-timeout",
        "1",
        "--connect-timeout",
        "1",
        "--json",
        str(tmp_path / "r.json"),
        env={"AWS_ACCESS_KEY_ID": ACCESS_KEY, "AWS_SECRET_ACCESS_KEY": SECRET},
        timeout=100,
    )
    assert run.returncode == 2
    assert run.stderr == (
        f"error: cannot list s3://lake/landing: no answer from {url} within 1 s "
        "(4 attempts); check that the endpoint is an S3 server and reachable (--endpoint-url, "
        "network, proxy), or raise --request-timeout\n"
    )
    assert not (tmp_path / "r.json").exists()
    assert run.peak < PEAK_LIMIT


@pytest.mark.timeout(120)
def test_dead_endpoint_is_a_clear_error(tmp_path: Path) -> None:
    from _measured import PEAK_LIMIT, run_cli

    url = f"http://127.0.0.1:{dead_port()}"
    run = run_cli(
        "scan",
        "s3://lake/landing/",
        "--endpoint-url",
        url,
        "--connect-timeout",
        "1",
        env={"AWS_ACCESS_KEY_ID": ACCESS_KEY, "AWS_SECRET_ACCESS_KEY": SECRET},
        timeout=100,
    )
    assert run.returncode == 2
    assert run.stderr == (
        f"error: cannot list s3://lake/landing: cannot connect to {url} (4 attempts "
        "within --connect-timeout 1 s); check --endpoint-url and that the server is running\n"
    )
    assert run.peak < PEAK_LIMIT


@pytest.mark.parametrize("value", ["0", "-3", "1e9"])
def test_timeouts_out_of_range_are_usage_errors(value: str) -> None:
    from _measured import run_cli

    for option in ("--connect-timeout", "--request-timeout"):
        run = run_cli("scan", "s3://lake/landing/", option, value, "--endpoint-url", "http://127.0.0.1:9")
        assert run.returncode == 2
        assert option in run.stderr and "Traceback" not in run.stderr


@pytest.mark.timeout(120)
def test_an_object_that_stalls_is_a_file_problem_naming_the_endpoint(s3: Server) -> None:
    import time

    client = boto3.client("s3", endpoint_url=s3.url, region_name="us-east-1")
    client.put_object(Bucket=BUCKET, Key="stall/a.jsonl", Body=b'{"v": 1}\n' * 10)
    client.put_object(Bucket=BUCKET, Key="stall/b.jsonl", Body=b'{"v": 2}\n' * 10)

    def stall_a(request: dict[str, Any]) -> None:
        if request["method"] == "GET" and request["path"].endswith("stall/a.jsonl"):
            time.sleep(3)  # longer than --request-timeout: the client gives up, every attempt

    s3.after = stall_a
    try:
        profile = scan_paths(
            [f"s3://{BUCKET}/stall/"], storage=StorageOptions(endpoint_url=s3.url, request_timeout=1, retries=2)
        )
    finally:
        s3.after = None
    assert [(i.file, i.kind, i.message) for i in profile.issues] == [
        (
            "a.jsonl",
            "unreadable",
            f"read failed: no answer from {s3.url} within 1 s (2 attempts); check that the "
            "endpoint is an S3 server and reachable (--endpoint-url, network, proxy), or raise "
            "--request-timeout",
        )
    ]
    assert profile.file("b.jsonl").rows == 10 and profile.file("a.jsonl").rows == 0
