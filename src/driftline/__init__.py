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
from typing import Unpack as _Unpack
from typing import overload as _overload

from driftline.core.options import ScanKeywords as _ScanKeywords
from driftline.core.options import ScanOptions
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
from driftline.recommendation import Recommendation
from driftline.recommendation.options import RecommendOptions as _RecommendOptions
from driftline.results.drift import Event
from driftline.results.profile import FieldSummary, Profile
from driftline.results.report import load_report

# Imported here, before `def scan`, so the function (not the submodule) is driftline.scan.
from driftline.scanning.run import scan_with as _scan_with
from driftline.sources.base import ReadOptions


def scan(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]],
    *,
    options: ScanOptions | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Profile:
    """Scan files, folders, globs or s3:// URLs (one, or a list of them) into a Profile.

    The read options come as keywords, or as a ScanOptions value (options=; for example
    ScanOptions.from_file("driftline.toml")) with keywords over it; what neither sets keeps
    its default. They are the same for scan, check, diff and recommend, and the same as
    the command line's flags (docs/python.md lists them):

    batch_rows bounds the rows per batch (drift is tracked batch by batch) and batch_bytes
    the input bytes of its records (64 MiB), whichever ends a batch first; include and
    exclude are globs on the path or name; symbolic links that lead out of the paths given
    are skipped (link-outside-root) unless follow_links; jobs reads files in parallel processes
    (default 1: no process pool); max_errors stops reading new files after that many errors;
    the max_* limits report a too-long record, too many decompressed bytes, too high a
    compression ratio or too many CSV columns instead of reading on; max_paths
    caps the distinct field paths kept (the rest are counted as "other fields") and
    max_events the drift events listed (their totals stay exact); delimiter
    fixes the CSV delimiter (found from the data otherwise); csv_dialect pins more of the
    CSV dialect, per glob ('legacy/*.csv:delimiter=pipe,quote=none,header=no', one
    string or several; what a pin leaves open is still found); encoding fixes the text
    encoding of CSV/TSV and JSON files, a name Python's codecs know (found per file
    otherwise); include_hidden also reads files starting with '.' or '_'; sniff_unknown
    also reads files of an extension driftline does not read (.txt, .dat; else skipped
    unopened) when their first bytes look like data; where keeps only key=value partitions
    that pass ('day>=2026-11-01'); engine 'dask' reads on a cluster (scheduler address,
    or local workers); endpoint_url, region and anonymous reach an S3-compatible store
    (credentials come from the environment, never from here); example_values 'hide' keeps
    every example value out of the profile and so out of every output made from it, 'hash'
    replaces each by a keyed HMAC-SHA256 (hash_key or hash_key_file, else the
    DRIFTLINE_HASH_KEY environment variable), so a report can be shared; connect_timeout
    (seconds, default 10) bounds reaching a dask scheduler or the object store,
    request_timeout (default 20) an object store request that receives nothing,
    task_timeout (default 3600) each worker task; a timeout is an error naming the
    address; progress(done, total, current_file) is called as files finish. The result
    depends on none of jobs and engine. Raises InputPathError when a path does not exist
    or holds no data file, and OptionError for an unknown option or a value of the wrong
    type or outside its range.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> p = driftline.scan(d)
    >>> p.fields["x"].stats.types, [e.kind for e in p.events]
    ({'float64': 1, 'int64': 1}, ['type-widened'])
    """
    from driftline.results.conceal import conceal

    opts = (options or ScanOptions()).merged(paths=paths, **keywords)
    return conceal(_scan_with(opts, progress=progress), opts.values)


def check(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]] | Profile,
    *,
    baseline: str | _os.PathLike[str],
    policy: Policy | str | _os.PathLike[str] | None = None,
    state: str | _os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    write_inside: bool = False,
    options: ScanOptions | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Verdict:
    """Check data (paths, a saved report or a Profile) against a baseline under a policy.

    baseline is a JSON Schema file, a cast-rules file or a saved scan report; policy a
    Policy, a TOML file or None for the defaults; state an incremental state file (only
    new or changed files are read; verify also compares content hashes, rebuild starts
    the state over; write_inside lets it lie inside a scanned folder). The paths are read
    with the read options of scan (options and keywords, example_values included: the
    verdict's examples). Verdict.passed / Verdict.exit_code say whether the gate passes
    (docs/gate.md). A note (a damaged state set aside) goes to the "driftline" logger.

    >>> import driftline, tempfile, pathlib, json
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": "1"}\\n')
    >>> schema = d.parent / (d.name + ".schema.json")
    >>> _ = schema.write_text(json.dumps({"type": "object", "properties": {"x": {"type": "integer"}}}))
    >>> v = driftline.check(d, baseline=schema, batch_rows=100)
    >>> v.exit_code, [(x.field, x.change, x.file, x.row, x.example) for x in v.violations]
    (1, [('x', 'int64 → string', 'a.jsonl', 0, '"1"')])
    """
    from driftline.gate.run import run_check

    verdict, _ = run_check(
        paths,
        baseline=baseline,
        policy=policy,
        state=state,
        verify=verify,
        rebuild=rebuild,
        options=(options or ScanOptions()).merged(**keywords),
        progress=progress,
        write_inside=write_inside,
    )
    return verdict


_Side = Profile | str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]]


@_overload
def diff(
    a: _Side,
    b: _Side,
    *,
    by: None = None,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Diff: ...
@_overload
def diff(
    a: _Side,
    b: None = None,
    *,
    by: str,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> tuple[Diff, ...]: ...
def diff(
    a: _Side,
    b: _Side | None = None,
    *,
    by: str | None = None,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Diff | tuple[Diff, ...]:
    """The fields that changed from a to b; each side a Profile, a saved report or data paths.

    With by (a partition key) and no b, each value of that partition of a is compared with
    the one before it: the result is then a tuple of Diffs, one per step. Sides given as
    paths are read with the read options of scan (options and keywords) and named as
    given; min_null_points is the smallest change of null share listed, in percentage
    points (default 1).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.jsonl").write_text('{"x": 1}\\n'), (d / "b.jsonl").write_text('{"x": 1.5, "y": true}\\n')
    >>> [(c.kind, c.path, c.before, c.after) for c in driftline.diff(d / "a.jsonl", d / "b.jsonl").changes]
    [('added', 'y', None, 'bool'), ('widened', 'x', 'int64', 'float64')]
    """
    from driftline.gate.inputs import diff_sides

    opts = (options or ScanOptions()).merged(**keywords)
    return diff_sides(a, b, by=by, min_null_points=min_null_points, options=opts)


def recommend(
    source: _Side,
    *,
    options: _RecommendOptions | None = None,
    scan_options: ScanOptions | None = None,
    **keywords: _Any,
) -> Recommendation:
    """The unified schema, with a cast rule per field, for a Profile, a saved report or data paths.

    Paths are read with the read options of scan (scan_options, and the keywords that are
    read options); the other keywords are recommendation options (the fields of
    RecommendOptions) over options. Strict mode raises SchemaConflictError when a field
    needs a lossy or conflicting rule; a scan in which every file failed is an
    InputPathError.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("n;m\\n7;1\\nn/a;2\\n")
    >>> p = driftline.recommend(d, delimiter=";").plan("n")
    >>> p.rule, p.target.key(), [(e.cause, e.count) for e in p.effects]
    ('parse_integer', 'int64', [('null_token', 1)])
    """
    from driftline.core.options import KEYWORDS
    from driftline.gate.inputs import profile_of
    from driftline.recommendation import recommend as recommend_profile
    from driftline.results.conceal import conceal

    read = {k: v for k, v in keywords.items() if k in KEYWORDS}
    opts = (scan_options or ScanOptions()).merged(**read)
    profile = conceal(profile_of(source, options=opts), opts.values)
    if (
        not isinstance(source, Profile)
        and profile.rows == 0
        and profile.error_count
        and all(not f.rows and (f.errors or not f.observations) for f in profile.files)
    ):
        raise InputPathError(
            f"nothing readable: every one of {len(profile.files)} files failed (driftline scan shows the problems)"
        )
    rest = {k: v for k, v in keywords.items() if k not in KEYWORDS}
    return recommend_profile(profile, options=options, **rest)


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
    "ScanOptions",
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
