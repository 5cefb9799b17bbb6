"""driftline: profile raw landing directories in record batches and report their drift.

The public API is exactly the names in ``driftline.__all__``; every other module and name
is internal and may change without notice. A session in brief:

>>> import driftline, tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> _ = (d / "day=1").mkdir(), (d / "day=1" / "a.jsonl").write_text('{"x": 1}\\n')
>>> _ = (d / "day=2").mkdir(), (d / "day=2" / "a.jsonl").write_text('{"x": "one"}\\n')
>>> profile = driftline.scan(d)
>>> profile  # doctest: +ELLIPSIS
<Profile '...': 2 files, 2 rows, 1 fields, 1 drift events, 0 errors>
>>> [(e.kind, e.path, e.before, e.after, e.file) for e in profile.events]
[('type-conflict', 'x', 'int64', 'string', 'day=2/a.jsonl')]
>>> {day: fields["x"].stats.types for day, fields in profile.by_partition("day").items()}
{'1': {'int64': 1}, '2': {'string': 1}}
>>> profile.to_polars().fields.select("path", "nullable").rows()
[('x', False)]

Every error driftline raises for bad input derives from DriftlineError:

>>> try:
...     driftline.scan(d / "missing")
... except driftline.DriftlineError as exc:
...     print(type(exc).__name__)
InputPathError
"""

from __future__ import annotations

__version__ = "0.1.0"

import os as _os
from collections.abc import Callable as _Callable
from collections.abc import Sequence as _Sequence
from typing import Any as _Any

from driftline.drift import Event
from driftline.errors import (
    DamagedFileError,
    DriftlineError,
    EngineError,
    InputPathError,
    OptionError,
    OutputError,
    PolicyError,
    ProfileError,
    ReportVersionError,
    SchemaConflictError,
    UnreadableFileError,
    WorkerError,
)
from driftline.gate.diff import Diff
from driftline.gate.policy import Policy
from driftline.gate.verdict import Verdict
from driftline.profile import FieldSummary, Profile
from driftline.recommend import Recommendation, recommend
from driftline.report import load_report

# Imported here, before `def scan`, so the function (not the submodule) is driftline.scan.
from driftline.scan import scan_paths as _scan_paths
from driftline.sources.base import ReadOptions


def scan(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]],
    *,
    batch_rows: int = 65_536,
    batch_bytes: int | None = None,
    include: _Sequence[str] = (),
    exclude: _Sequence[str] = (),
    include_hidden: bool = False,
    sniff_unknown: bool = False,
    follow_links: bool = False,
    jobs: int = 1,
    max_errors: int | None = None,
    max_record_bytes: int | None = None,
    max_decompressed_bytes: int | None = None,
    max_decompression_ratio: float | None = None,
    max_columns: int | None = None,
    max_paths: int | None = None,
    max_events: int | None = None,
    delimiter: str | None = None,
    csv_dialect: str | _Sequence[str] = (),
    encoding: str | None = None,
    where: _Sequence[str] = (),
    engine: str = "local",
    scheduler: str | None = None,
    endpoint_url: str | None = None,
    region: str | None = None,
    anonymous: bool = False,
    example_values: str = "show",
    hash_key: bytes | str | None = None,
    connect_timeout: float | None = None,
    request_timeout: float | None = None,
    task_timeout: float | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
) -> Profile:
    """Scan files, folders, globs or s3:// URLs (one, or a list of them) into a Profile.

    batch_rows bounds the rows per batch (drift is tracked batch by batch) and batch_bytes
    the input bytes of its records (None: 64 MiB), whichever ends a batch first; include and
    exclude are globs on the path or name; symbolic links that lead out of the paths given
    are skipped (link-outside-root) unless follow_links; jobs reads files in parallel processes;
    max_errors stops reading new files after that many errors; the max_* limits (None:
    the defaults of ReadOptions) report a too-long record, too many decompressed bytes,
    too high a compression ratio or too many CSV columns instead of reading on; max_paths
    caps the distinct field paths kept (the rest are counted as "other fields") and
    max_events the drift events listed (their totals stay exact); delimiter
    fixes the CSV delimiter (found from the data otherwise); csv_dialect pins more of the
    CSV dialect, per glob ('legacy/*.csv:delimiter=pipe,quote=none,header=no', one
    string or several; what a pin leaves open is still found); encoding fixes the text
    encoding of CSV/TSV and JSON files, a name Python's codecs know (found per file
    otherwise); sniff_unknown also reads files of an extension driftline does not read
    (.txt, .dat; else skipped unopened) when their first bytes look like data; where keeps
    only key=value partitions
    that pass ('day>=2026-11-01'); engine 'dask' reads on a cluster (scheduler address,
    or local workers); endpoint_url, region and anonymous reach an S3-compatible store
    (credentials come from the environment, never from here); example_values 'hide' keeps
    every example value out of the profile and so out of every output made from it, 'hash'
    replaces each by a keyed HMAC-SHA256 (hash_key, else the DRIFTLINE_HASH_KEY
    environment variable), so a report can be shared; connect_timeout (seconds,
    default 10) bounds reaching a dask scheduler or the object store, request_timeout
    (default 20) an object store request that receives nothing, task_timeout (default
    3600) each worker task; a timeout is an error naming the address; progress(done, total,
    current_file) is called as files finish. The result depends on none of jobs and
    engine. Raises InputPathError when a path does not exist or holds no data file, and
    OptionError for an option value of the wrong type or outside its range.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> p = driftline.scan(d)
    >>> p.fields["x"].stats.types, [e.kind for e in p.events]
    ({'float64': 1, 'int64': 1}, ['type-widened'])
    """
    from driftline.conceal import conceal, value_policy
    from driftline.sources.remote import StorageOptions

    values = value_policy(example_values, hash_key)  # a bad mode or a missing key fails before the scan
    if isinstance(paths, str | _os.PathLike):
        paths = [paths]
    limits: dict[str, _Any] = {
        name: value
        for name, value in (
            ("max_record_bytes", max_record_bytes),
            ("max_decompressed_bytes", max_decompressed_bytes),
            ("max_decompression_ratio", max_decompression_ratio),
            ("max_columns", max_columns),
            ("batch_bytes", batch_bytes),
            ("max_paths", max_paths),
        )
        if value is not None
    }
    pins = (csv_dialect,) if isinstance(csv_dialect, str) else tuple(csv_dialect)
    read = ReadOptions(batch_rows=batch_rows, delimiter=delimiter, csv_dialects=pins, encoding=encoding, **limits)
    timeouts: dict[str, _Any] = {
        name: float(value)
        for name, value in (("connect_timeout", connect_timeout), ("request_timeout", request_timeout))
        if value is not None
    }
    storage = StorageOptions(endpoint_url=endpoint_url, region=region, anonymous=anonymous, **timeouts)
    more: dict[str, _Any] = {} if task_timeout is None else {"task_timeout": float(task_timeout)}
    profile = _scan_paths(
        list(paths),
        read=read,
        include=include,
        exclude=exclude,
        include_hidden=include_hidden,
        sniff_unknown=sniff_unknown,
        jobs=jobs,
        max_errors=max_errors,
        progress=progress,
        engine=engine,
        scheduler=scheduler,
        where=where,
        storage=storage,
        max_events=max_events,
        follow_links=follow_links,
        connect_timeout=connect_timeout,
        **more,
    )
    return conceal(profile, values)


def check(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]] | Profile,
    *,
    baseline: str | _os.PathLike[str],
    policy: Policy | str | _os.PathLike[str] | None = None,
    state: str | _os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    example_values: str = "show",
    hash_key: bytes | str | None = None,
) -> Verdict:
    """Check data (paths, a saved report or a Profile) against a baseline under a policy.

    baseline is a JSON Schema file or a saved scan report; policy a Policy, a TOML file or
    None for the defaults; state an incremental state file (only new or changed files are
    read; verify also compares content hashes, rebuild starts the state over);
    example_values and hash_key as for scan (the verdict's examples).
    Verdict.passed / Verdict.exit_code say whether the gate passes (docs/gate.md).

    >>> import driftline, tempfile, pathlib, json
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": "1"}\\n')
    >>> schema = d.parent / (d.name + ".schema.json")
    >>> _ = schema.write_text(json.dumps({"type": "object", "properties": {"x": {"type": "integer"}}}))
    >>> v = driftline.check(d, baseline=schema)
    >>> v.exit_code, [(x.field, x.change, x.file, x.row, x.example) for x in v.violations]
    (1, [('x', 'int64 → string', 'a.jsonl', 0, '"1"')])
    """
    from driftline.conceal import value_policy
    from driftline.gate.run import run_check

    verdict, _ = run_check(
        paths,
        baseline=baseline,
        policy=policy,
        state=state,
        verify=verify,
        rebuild=rebuild,
        values=value_policy(example_values, hash_key),
    )
    return verdict


def diff(a: Profile | str | _os.PathLike[str], b: Profile | str | _os.PathLike[str]) -> Diff:
    """The fields that changed from a to b; each side a Profile, a saved report or a path.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.jsonl").write_text('{"x": 1}\\n'), (d / "b.jsonl").write_text('{"x": 1.5, "y": true}\\n')
    >>> [(c.kind, c.path, c.before, c.after) for c in driftline.diff(d / "a.jsonl", d / "b.jsonl").changes]
    [('added', 'y', None, 'bool'), ('widened', 'x', 'int64', 'float64')]
    """
    from driftline.gate.diff import diff_profiles
    from driftline.gate.inputs import profile_of

    return diff_profiles(profile_of(a), profile_of(b))


__all__ = [
    "DamagedFileError",
    "Diff",
    "DriftlineError",
    "EngineError",
    "Event",
    "FieldSummary",
    "InputPathError",
    "OptionError",
    "OutputError",
    "Policy",
    "PolicyError",
    "Profile",
    "ProfileError",
    "ReadOptions",
    "Recommendation",
    "ReportVersionError",
    "SchemaConflictError",
    "UnreadableFileError",
    "Verdict",
    "WorkerError",
    "__version__",
    "check",
    "diff",
    "load_report",
    "recommend",
    "scan",
]
