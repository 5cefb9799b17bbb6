"""The check as one call: load the policy and baseline, scan (incrementally with a state), judge.

>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
>>> schema = {"type": "object", "properties": {"x": {"type": "string"}}}
>>> v, note = run_check([d], baseline=baseline_from_json_schema(schema))
>>> v.passed, [(x.field, x.change) for x in v.violations]
(False, [('x', 'string → int64')])
"""

from __future__ import annotations

import logging
import os
from collections.abc import Sequence
from pathlib import Path

from driftline.core.options import ScanOptions
from driftline.core.valuepolicy import output_values
from driftline.errors import InputPathError
from driftline.gate.baseline import Baseline, baseline_from_json_schema, load_baseline  # noqa: F401
from driftline.gate.compare import compare
from driftline.gate.inputs import Side, is_report, profile_of
from driftline.gate.policy import Policy, load_policy
from driftline.gate.state import scan_incremental
from driftline.gate.verdict import Verdict
from driftline.results.conceal import conceal
from driftline.results.profile import Profile
from driftline.scanning.run import Progress


def run_check(
    paths: Side | Sequence[str | os.PathLike[str]],
    *,
    baseline: Baseline | str | os.PathLike[str],
    policy: Policy | str | os.PathLike[str] | None = None,
    state: str | os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    options: ScanOptions | None = None,
    progress: Progress | None = None,
    write_inside: bool = False,
) -> tuple[Verdict, str | None]:
    """Judge paths (or a Profile, or a saved report) against a baseline; also a note for stderr.

    options says how the paths are scanned; its values policy, when it hides or hashes
    example values, applies to the verdict's examples (and to those of the scanned profile
    it judges), else the policy file's [output] table may set it. write_inside lets the
    state file lie inside a scanned folder (emit/targets.py). The note (a damaged state set
    aside, read options changed) also goes to the "driftline" logger.
    """
    opts = options or ScanOptions()
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
            options=opts,
            verify=verify,
            rebuild=rebuild,
            progress=progress,
            write_inside=write_inside,
        )
        profile, note = run.profile, run.note
        counts = {"files_read": run.read, "files_reused": run.reused, "files_dropped": run.dropped}
    else:
        profile = profile_of(paths if isinstance(paths, Profile) else items, options=opts, progress=progress)
        # files_reused counts files taken as they were: from a state file or a saved report.
        counts = {"files_read": 0, "files_reused": len(profile.files)} if loaded else {"files_read": len(profile.files)}
    if note:
        log = logging.getLogger("driftline")
        log.warning(note.removeprefix("warning: ")) if note.startswith("warning: ") else log.info(note)
    values = opts.values if opts.values.mode != "show" else output_values(policy) or opts.values
    profile = conceal(profile, values)
    return compare(profile, base, pol, counts=counts), note
