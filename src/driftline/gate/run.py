"""The check as one call: load the policy and baseline, scan (incrementally with a state), judge.

>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
>>> schema = {"type": "object", "properties": {"x": {"type": "string"}}}
>>> v, note = run_check([d], baseline=baseline_from_json_schema(schema))
>>> v.passed, [(x.field, x.change) for x in v.violations]
(False, [('x', 'string → int64')])
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from driftline.conceal import ValuePolicy, conceal, output_values
from driftline.errors import InputPathError
from driftline.gate.baseline import Baseline, baseline_from_json_schema, load_baseline  # noqa: F401
from driftline.gate.compare import compare
from driftline.gate.inputs import Side, is_report, profile_of
from driftline.gate.policy import Policy, load_policy
from driftline.gate.state import scan_incremental
from driftline.gate.verdict import Verdict
from driftline.profile import Profile
from driftline.scan import Progress
from driftline.sources.base import ReadOptions


@dataclass(frozen=True, kw_only=True)
class ScanSettings:
    """How the check scans its paths (the same options as `driftline scan`)."""

    read: ReadOptions = ReadOptions()
    include: Sequence[str] = ()
    exclude: Sequence[str] = ()
    include_hidden: bool = False
    jobs: int = 1
    max_errors: int | None = None
    write_inside: bool = False  # the state file may lie inside a scanned folder (emit/targets.py)


def run_check(
    paths: Side | Sequence[str | os.PathLike[str]],
    *,
    baseline: Baseline | str | os.PathLike[str],
    policy: Policy | str | os.PathLike[str] | None = None,
    state: str | os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    scan: ScanSettings | None = None,
    progress: Progress | None = None,
    values: ValuePolicy | None = None,
) -> tuple[Verdict, str | None]:
    """Judge paths (or a Profile, or a saved report) against a baseline; also a note for stderr.

    values, when it hides or hashes example values, applies to the verdict's examples (and
    to those of the scanned profile it judges); the policy file's [output] table may set it.
    """
    settings = scan or ScanSettings()
    pol = policy if isinstance(policy, Policy) else load_policy(os.fspath(policy)) if policy is not None else Policy()
    base = baseline if isinstance(baseline, Baseline) else load_baseline(os.fspath(baseline))
    note = None
    items = [] if isinstance(paths, Profile) else [paths] if isinstance(paths, str | os.PathLike) else list(paths)
    loaded = isinstance(paths, Profile) or (len(items) == 1 and is_report(items[0]))
    if state is not None:
        if loaded:
            raise InputPathError("--state keeps per-file results of a scan; give data paths, not a saved report")
        run = scan_incremental(
            items,
            Path(state),
            read=settings.read,
            include=settings.include,
            exclude=settings.exclude,
            include_hidden=settings.include_hidden,
            jobs=settings.jobs,
            max_errors=settings.max_errors,
            verify=verify,
            rebuild=rebuild,
            progress=progress,
            write_inside=settings.write_inside,
        )
        profile, note = run.profile, run.note
        counts = {"files_read": run.read, "files_reused": run.reused, "files_dropped": run.dropped}
    else:
        profile = profile_of(
            paths if isinstance(paths, Profile) else items,
            read=settings.read,
            include=settings.include,
            exclude=settings.exclude,
            include_hidden=settings.include_hidden,
            jobs=settings.jobs,
            max_errors=settings.max_errors,
            progress=progress,
        )
        # files_reused counts files taken as they were: from a state file or a saved report.
        counts = {"files_read": 0, "files_reused": len(profile.files)} if loaded else {"files_read": len(profile.files)}
    values = values if values is not None and values.mode != "show" else output_values(policy) or values
    if values is not None:
        profile = conceal(profile, values)
    return compare(profile, base, pol, counts=counts), note
