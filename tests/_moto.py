"""An S3-compatible server on 127.0.0.1 for the tests: moto's WSGI app in server mode."""

from __future__ import annotations

import contextlib
import os
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, unquote

import pytest

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
        self.after: Any = None  # called with each request once it was answered (tests change the bucket there)
        self.refuse: Any = None  # a request for which it returns True is answered 403 AccessDenied, not served

        def logged(environ: dict[str, Any], start_response: Any) -> Any:
            request = {
                "method": environ["REQUEST_METHOD"],
                "path": unquote(environ.get("PATH_INFO", "")),
                "query": parse_qs(environ.get("QUERY_STRING", "")),
                "range": environ.get("HTTP_RANGE"),
            }
            self.requests.append(request)
            if self.refuse is not None and self.refuse(request):
                # source: Amazon S3 API Reference, "Error responses": the XML body and AccessDenied (403)
                body = (
                    b'<?xml version="1.0" encoding="UTF-8"?>'
                    b"<Error><Code>AccessDenied</Code><Message>Access Denied</Message></Error>"
                )
                start_response(
                    "403 Forbidden", [("Content-Type", "application/xml"), ("Content-Length", str(len(body)))]
                )
                return [body]
            answer = list(app(environ, start_response))  # the body is made now, before any change
            if self.after is not None:
                self.after(request)
            return answer

        self.server = make_server("127.0.0.1", 0, logged, threaded=True)
        self.url = f"http://127.0.0.1:{self.server.server_port}"
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()

    def stop(self) -> None:
        self.server.shutdown()
        self.thread.join(5)


@contextlib.contextmanager
def landing_bucket(landing: Path) -> Iterator[Server]:
    """A server whose bucket holds landing's files under landing/, with the test credentials in
    the environment while it runs (restored after)."""
    saved = {k: os.environ.get(k) for k in ("AWS_ACCESS_KEY_ID", "AWS_SECRET_ACCESS_KEY", "AWS_REGION")}
    os.environ.update({"AWS_ACCESS_KEY_ID": ACCESS_KEY, "AWS_SECRET_ACCESS_KEY": SECRET, "AWS_REGION": "us-east-1"})
    server = Server()
    client = boto3.client("s3", endpoint_url=server.url, region_name="us-east-1")
    client.create_bucket(Bucket=BUCKET)
    for path in sorted(landing.rglob("*")):
        if path.is_file():
            client.upload_file(str(path), BUCKET, "landing/" + path.relative_to(landing).as_posix())
    try:
        yield server
    finally:
        server.stop()
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v
