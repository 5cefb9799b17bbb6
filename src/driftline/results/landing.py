"""Landing: a root scanned dataset by dataset (one Profile each), and its JSON report set both ways.

The report set (docs/report-set.schema.json, "format": "driftline-report-set") holds one
ordinary scan report per dataset under its name, beside the loose files, the skipped files
and the notices of the split.  A root that is one table keeps writing the ordinary report.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import orjson

from driftline.core import jsonnum
from driftline.core.documents import read_json_document
from driftline.core.files import Skipped
from driftline.core.validation import check_document
from driftline.core.version import __version__
from driftline.errors import ReportVersionError
from driftline.results.profile import Profile
from driftline.results.report import REPORT_FORMAT, from_dict, to_dict, upgrade_v1
from driftline.sources.datasets import LooseFile, Notice
from driftline.sources.discover import FileRef, partition_values

REPORT_SET_FORMAT = "driftline-report-set"
REPORT_SET_VERSION = 2  # 2: its reports are version 2 (example values as JSON values); version 1 is upgraded on load


@dataclass(frozen=True)
class Landing:
    """A root split into datasets, each scanned on its own (one Profile per dataset, in name
    order), with the data files that fit no dataset (loose), what discovery skipped and the
    notices on the layout.  found names every dataset discovery found, read or not."""

    root: str
    datasets: Mapping[str, Profile]
    loose: tuple[LooseFile, ...] = ()
    skipped: tuple[Skipped, ...] = ()
    notices: tuple[Notice, ...] = ()
    found: tuple[str, ...] = ()
    whole: Profile | None = field(default=None, compare=False)  # the root read as one table instead

    @property
    def rows(self) -> int:
        """Rows over the datasets read."""
        return sum(p.rows for p in self.datasets.values())

    @property
    def bytes(self) -> int:
        """Input bytes over the datasets read."""
        return sum(p.bytes for p in self.datasets.values())

    @property
    def files(self) -> int:
        """Files read over the datasets read."""
        return sum(len(p.files) for p in self.datasets.values())

    @property
    def event_total(self) -> int:
        """Drift events over the datasets read."""
        return sum(p.event_total for p in self.datasets.values())


def to_dict_set(landing: Landing) -> dict[str, Any]:
    """The report set as plain JSON data: one scan report per dataset, and the split's leftovers."""
    return {
        "format": REPORT_SET_FORMAT,
        "version": REPORT_SET_VERSION,
        "tool": {"name": "driftline", "version": __version__},
        "root": landing.root,
        "found": list(landing.found),
        "datasets": {name: to_dict(p) for name, p in landing.datasets.items()},
        "loose": [
            {
                "path": x.file.rel,
                "format": x.file.format,
                "compression": x.file.compression,
                "size": x.file.size,
                "mtime_ns": x.file.mtime_ns,
                "reason": x.reason,
            }
            for x in landing.loose
        ],
        "skipped": [{"path": s.rel, "reason": s.reason} for s in landing.skipped],
        "notices": [{"kind": n.kind, "message": n.message, "paths": list(n.paths)} for n in landing.notices],
    }


def dumps_set(landing: Landing) -> bytes:
    return jsonnum.dumps(to_dict_set(landing), option=orjson.OPT_INDENT_2 | orjson.OPT_NON_STR_KEYS) + b"\n"


def from_dict_set(data: Mapping[str, Any], *, source: str = "report set") -> Landing:
    """Load report set data back into a Landing (ReportVersionError for another format or version,
    DamagedFileError with the JSON pointer of the first problem)."""
    if not isinstance(data, Mapping) or data.get("format") != REPORT_SET_FORMAT:
        hint = " (it is a scan report of one table: load_report reads it)" if _is_report(data) else ""
        raise ReportVersionError(f'{source} is not a driftline report set (no "format": "{REPORT_SET_FORMAT}"){hint}')
    if data.get("version") == 1 and isinstance(data.get("datasets"), Mapping):
        datasets_v2 = {n: upgrade_v1(d) if isinstance(d, Mapping) else d for n, d in data["datasets"].items()}
        data = {**data, "version": REPORT_SET_VERSION, "datasets": datasets_v2}
    if data.get("version") != REPORT_SET_VERSION:
        raise ReportVersionError(
            f"{source} has report set version {data.get('version')!r} (at /version); this driftline reads versions "
            f"1 and {REPORT_SET_VERSION}. Rescan the data to make a new report."
        )
    check_document(data, "report-set", "report set", source)
    root = data["root"]
    datasets = {name: from_dict(d, source=f"{source} (dataset {name!r})") for name, d in data["datasets"].items()}
    loose = tuple(
        LooseFile(
            FileRef(
                os.path.join(root, *x["path"].split("/")),
                x["path"],
                partition_values(x["path"]),
                x["format"],
                x["compression"],
                x["size"],
                x["mtime_ns"],
            ),
            x["reason"],
        )
        for x in data["loose"]
    )
    skipped = tuple(Skipped(s["path"], s["reason"]) for s in data["skipped"])
    notices = tuple(Notice(n["kind"], n["message"], tuple(n["paths"])) for n in data["notices"])
    return Landing(root, datasets, loose, skipped, notices, tuple(data["found"]))


def _is_report(data: object) -> bool:
    return isinstance(data, Mapping) and data.get("format") == REPORT_FORMAT


def load_report_set(path: str | Path) -> Landing:
    """Read a saved report set (`driftline scan ROOT --json FILE` on a root of several datasets)
    back into a Landing equal to the one that was saved."""
    data = read_json_document(path, "report set", ReportVersionError, "; give a report set that driftline wrote")
    return from_dict_set(data, source=repr(str(path)))
