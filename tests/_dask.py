"""A dask cluster on the loopback for the tests of --engine dask (scan and apply)."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from typing import Any

import pytest

if os.environ.get("CI"):
    import distributed  # CI installs the test extra: a missing package is a failure, never a skip
else:
    distributed = pytest.importorskip("distributed")


@contextlib.contextmanager
def local_cluster() -> Iterator[Any]:
    # source: distributed LocalCluster: worker processes behind nannies, loopback only
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=":0"
    ) as c:
        yield c
