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
from collections.abc import Mapping, Sequence
from pathlib import Path

from driftline.core.options import ScanOptions
from driftline.core.valuepolicy import output_values
from driftline.errors import InputPathError, OptionError
from driftline.gate.baseline import Baseline, baseline_from_json_schema, load_baseline  # noqa: F401
from driftline.gate.baselines import Assigned, DatasetRules, assign, load_dataset_rules
from driftline.gate.by_dataset import check_layout
from driftline.gate.compare import compare
from driftline.gate.inputs import Side, is_report, profile_of
from driftline.gate.policy import Policy, load_policy
from driftline.gate.state import scan_incremental
from driftline.gate.verdict import Verdict
from driftline.results.conceal import conceal
from driftline.results.profile import Profile
from driftline.scanning.by_dataset import is_one_table, picked, survey
from driftline.scanning.run import Progress
from driftline.sources.datasets import Layout
from driftline.sources.remote import is_url


def run_check(
    paths: Side | Sequence[str | os.PathLike[str]],
    *,
    baseline: Baseline | str | os.PathLike[str] | Mapping[str, str | os.PathLike[str]] | None,
    policy: Policy | str | os.PathLike[str] | None = None,
    state: str | os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    options: ScanOptions | None = None,
    progress: Progress | None = None,
    write_inside: bool = False,
    dataset: str | Sequence[str] | None = None,
    one_table: bool = False,
) -> tuple[Verdict, str | None]:
    """Judge paths (or a Profile, or a saved report) against a baseline; also a note for stderr.

    options says how the paths are scanned; its values policy, when it hides or hashes
    example values, applies to the verdict's examples (and to those of the scanned profile
    it judges), else the policy file's [output] table may set it. write_inside lets the
    state file lie inside a scanned folder (emit/targets.py). The note (a damaged state set
    aside, read options changed) also goes to the "driftline" logger.

    One root folder is checked dataset by dataset (gate/by_dataset.py) when the baselines are
    per dataset (a folder of them, a mapping, or the policy file's [baselines] table) or
    dataset names some; else, unless one_table, a root of several datasets and one baseline
    file is an OptionError that says how to go on. A root that reads as one table, several
    paths, a file or a saved report are checked as one table, as always.
    """
    opts = options or ScanOptions()
    pol = policy if isinstance(policy, Policy) else load_policy(os.fspath(policy)) if policy is not None else Policy()
    rules = load_dataset_rules(policy) if isinstance(policy, str | os.PathLike) else DatasetRules()
    if baseline is None and not rules.baselines:
        raise OptionError(
            "check needs a baseline: --baseline FILE (or a folder of one baseline per dataset), "
            "or a [baselines] table in the policy file"
        )
    per_dataset = (
        isinstance(baseline, Mapping)
        or baseline is None
        or (isinstance(baseline, str | os.PathLike) and os.path.isdir(baseline))
    )
    items = [] if isinstance(paths, Profile) else [paths] if isinstance(paths, str | os.PathLike) else list(paths)
    one_folder = len(items) == 1 and not is_url(items[0]) and os.path.isdir(items[0])
    values = opts.values if opts.values.mode != "show" else output_values(policy) or opts.values
    if one_table or not one_folder:
        if dataset is not None or per_dataset:
            why = "--one-table checks the root as one table" if one_table else "the paths are not one root folder"
            raise OptionError(
                f"{why}: a baseline per dataset and --dataset need one root folder checked dataset by dataset; "
                "give one baseline file"
            )
    else:
        _, layout = survey(opts.merged(paths=[items[0]]))
        if per_dataset or dataset is not None or not is_one_table(layout):
            chosen = picked(layout, dataset)
            assigned = _assigned(baseline, rules, [d.name for d in chosen], layout, os.fspath(items[0]), dataset)
            verdict, note = check_layout(
                layout,
                chosen,
                assigned,
                policy=pol,
                rules=rules,
                options=opts,
                values=values,
                state=state,
                verify=verify,
                rebuild=rebuild,
                write_inside=write_inside,
                progress=progress,
            )
            _log(note)
            return verdict, note
    assert baseline is not None and not isinstance(baseline, Mapping)
    base = baseline if isinstance(baseline, Baseline) else load_baseline(os.fspath(baseline))
    note = None
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
    _log(note)
    profile = conceal(profile, values)
    return compare(profile, base, pol, counts=counts), note


def _assigned(
    baseline: Baseline | str | os.PathLike[str] | Mapping[str, str | os.PathLike[str]] | None,
    rules: DatasetRules,
    names: list[str],
    layout: Layout,
    root: str,
    dataset: str | Sequence[str] | None,
) -> Assigned:
    """Each chosen dataset's baseline: from a mapping, the policy's [baselines] table, a folder, or
    one file for each dataset picked; OptionError for one baseline on a root of several datasets."""
    found = [d.name for d in layout.datasets]
    if isinstance(baseline, Mapping):
        return assign(names, found, mapping={k: os.fspath(v) for k, v in baseline.items()})
    if baseline is None:
        return assign(names, found, mapping=rules.baselines, source=rules.source)
    if isinstance(baseline, Baseline):
        raise OptionError("a Baseline value is one baseline; a root of several datasets needs a baseline per dataset")
    if os.path.isdir(baseline):
        return assign(names, found, folder=os.fspath(baseline), root_name=os.path.basename(os.path.abspath(root)))
    if dataset is None:
        listed = ", ".join(repr(n) for n in found)
        raise OptionError(
            f"{root!r} holds {len(found):,} datasets ({listed}) and {os.fspath(baseline)!r} is one baseline: give "
            "--baseline a folder with one baseline per dataset (<dataset>.schema.json, '/' in a name as '.'), a "
            "[baselines] table in the policy file, --dataset NAME to check one dataset, or --one-table to check "
            "the root as one table"
        )
    return Assigned(dict.fromkeys(names, os.fspath(baseline)), (), os.fspath(baseline))


def _log(note: str | None) -> None:
    if note:
        log = logging.getLogger("driftline")
        log.warning(note.removeprefix("warning: ")) if note.startswith("warning: ") else log.info(note)
