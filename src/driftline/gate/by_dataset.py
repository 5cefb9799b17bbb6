"""A root of several datasets checked dataset by dataset: one verdict per dataset, and the overall one.

Each dataset is read as scan_datasets reads it (rooted at its folder, so its verdict names the
files as a check of that folder alone does) and judged against its own baseline
(gate/baselines.py: a folder of them, or the policy file's [baselines] table). A dataset no
baseline names gets a verdict of its own (a warning, or a failure with [datasets] no_baseline =
"fail"); a baseline that names no dataset of the root is a warning of the root. With a state
file, each file's dataset is recorded, and a file found in another dataset than the state says
(or among the loose files) is a change of its own: changed_dataset.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import time
from collections.abc import Mapping, Sequence

from driftline.core.files import FileResult
from driftline.core.options import ScanOptions
from driftline.core.valuepolicy import ValuePolicy
from driftline.emit.atomic import write_output
from driftline.emit.targets import check_targets
from driftline.errors import ReportVersionError
from driftline.gate.baseline import load_baseline
from driftline.gate.baselines import Assigned, DatasetRules
from driftline.gate.compare import compare
from driftline.gate.policy import Policy
from driftline.gate.state import Placed, State, file_digest, open_state, placed_state_bytes, unchanged
from driftline.gate.verdict import RuleResult, Verdict, Violation
from driftline.results.conceal import conceal
from driftline.results.profile import Profile
from driftline.scanning.by_dataset import dataset_discovery
from driftline.scanning.run import Progress, capped_jobs, read_found
from driftline.sources.datasets import Dataset, Layout
from driftline.sources.discover import FileRef

NO_BASELINE = "no_baseline"
CHANGED_DATASET = "changed_dataset"
UNKNOWN_DATASET = "unknown_dataset"


def root_path(dataset: Dataset, rel: str) -> str:
    """A dataset file's path relative to the root, from its path relative to the dataset's folder."""
    return rel if dataset.folder == "." else f"{dataset.folder}/{rel}"


def check_layout(
    layout: Layout,
    chosen: Sequence[Dataset],
    assigned: Assigned,
    *,
    policy: Policy,
    rules: DatasetRules,
    options: ScanOptions,
    values: ValuePolicy,
    state: str | os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    write_inside: bool = False,
    progress: Progress | None = None,
) -> tuple[Verdict, str | None]:
    """Judge each chosen dataset of a split root against its baseline; the overall verdict (its
    datasets hold one verdict each) and a note for stderr (a damaged state set aside)."""
    bases = {name: load_baseline(path) for name, path in assigned.baselines.items() if path is not None}
    old: State | None = None
    note = None
    if state is not None:
        state = os.fspath(state)
        check_targets(
            [("--state", state)],
            scanned=[layout.root],
            write_inside=write_inside,
            include_hidden=options.include_hidden,
        )
        old, note = open_state(state, options.read, rebuild=rebuild)
        if old is not None and old.root != layout.root:
            raise ReportVersionError(
                f"state file {state!r} was made for {old.root!r}, not {layout.root!r}; "
                "give this scan its own --state file, or --rebuild to replace it"
            )
    kept = {(p.dataset, p.result.rel): p for p in old.placed} if old is not None else {}
    jobs = capped_jobs(options)
    total = sum(len(d.files) for d in chosen)
    done = 0
    verdicts: dict[str, Verdict] = {}
    placed: list[Placed] = []
    for d in chosen:
        reused: set[str] = set()

        def reuse(ref: FileRef, d: Dataset = d, reused: set[str] = reused) -> FileResult | None:
            prev = kept.get((d.name, ref.rel))
            if prev is None or prev.path != root_path(d, ref.rel) or not unchanged(prev.result, ref, verify=verify):
                return None
            reused.add(ref.rel)
            return prev.result

        began = time.perf_counter()
        profile = read_found(
            dataset_discovery(layout, d),
            options,
            jobs,
            started=began,
            progress=_offset(progress, done, total),
            reuse=reuse if state is not None else None,
        )
        done += len(d.files)
        if state is not None:
            profile = _with_digests(profile, layout, d, verify)
            placed.extend(Placed(d.name, root_path(d, f.rel), f) for f in profile.files)
        profile = conceal(profile, values)
        counts = {"files_read": len(profile.files) - len(reused)}
        if state is not None:
            counts["files_reused"] = len(reused)
            gone = {p.result.rel for p in kept.values() if p.dataset == d.name} - {f.rel for f in profile.files}
            counts["files_dropped"] = len(gone)
        base = bases.get(d.name)
        verdicts[d.name] = (
            compare(profile, base, policy, counts=counts)
            if base is not None
            else _no_baseline(profile, d.name, assigned.source, rules, counts)
        )
    root_findings: list[Violation] = [
        Violation(
            UNKNOWN_DATASET,
            "warn",
            None,
            f"baseline for {name!r}",
            f"the baseline {os.path.basename(path)} names {name!r}, which is not a dataset of the root",
            file=path,
        )
        for name, path in assigned.unmatched
    ]
    if old is not None:
        moves, to_loose = changed_datasets(old.placed, layout, chosen, rules.changed_dataset)
        for name, found in moves.items():
            verdicts[name] = _add(verdicts[name], found, rules.changed_dataset)
        root_findings.extend(to_loose)
    if state is not None:
        chosen_names = {d.name for d in chosen}
        others = {
            root_path(d, f.rel) for d in layout.datasets if d.name not in chosen_names for f in _rebased(layout, d)
        }
        placed.extend(
            p for p in (old.placed if old is not None else ()) if p.dataset not in chosen_names and p.path in others
        )
        write_output(state, placed_state_bytes(layout.root, placed, options.read, verify=verify))
    return overall(layout.root, verdicts, root_findings, assigned.source), note


def _rebased(layout: Layout, d: Dataset) -> Sequence[FileRef]:
    return dataset_discovery(layout, d).files


def _with_digests(profile: Profile, layout: Layout, d: Dataset, verify: bool) -> Profile:
    if not verify:
        return profile
    where = {f.rel: f.path for f in _rebased(layout, d)}
    files = []
    for f in profile.files:
        if f.digest is None and f.rel in where:
            with contextlib.suppress(OSError):  # unhashable now: the next --verify run reads it again
                f = dataclasses.replace(f, digest=file_digest(where[f.rel]))
        files.append(f)
    return dataclasses.replace(profile, files=tuple(files))


def _no_baseline(profile: Profile, name: str, source: str, rules: DatasetRules, counts: dict[str, int]) -> Verdict:
    action = rules.no_baseline
    what = Violation(
        NO_BASELINE,
        action,
        None,
        "no baseline",
        f"no baseline names the dataset {name!r} in {source or 'the baselines given'}; it is not checked",
    )
    status = "failed" if action == "fail" else "warned"
    all_counts = {"files": len(profile.files), "rows": profile.rows, "fields": len(profile.fields), **counts}
    all_counts.update({"violations": int(action == "fail"), "warnings": int(action == "warn")})
    return Verdict(
        passed=action != "fail",
        violations=(what,) if action == "fail" else (),
        warnings=(what,) if action == "warn" else (),
        rules=(RuleResult(NO_BASELINE, action, status, "no baseline names this dataset"),),
        counts=all_counts,
        baseline="",
        root=profile.root,
    )


def changed_datasets(
    before: Sequence[Placed], layout: Layout, chosen: Sequence[Dataset], action: str
) -> tuple[dict[str, list[Violation]], list[Violation]]:
    """The files now in another dataset than the state recorded (by dataset name), and those gone
    to the loose files. A file is the same file at the same path, or, gone from one path and new
    at another, with the same file name, size and modification time (a move keeps them)."""
    now: dict[str, tuple[Dataset, str]] = {}
    refs: dict[str, FileRef] = {}
    for d in chosen:
        for ref in _rebased(layout, d):
            p = root_path(d, ref.rel)
            now[p] = (d, ref.rel)
            refs[p] = ref
    listed = set(now) | {x.file.rel for x in layout.loose}
    listed |= {root_path(d, f.rel) for d in layout.datasets for f in _rebased(layout, d)}
    was = {p.path: p for p in before}
    gone = {(os.path.basename(p.path), p.result.size, p.result.mtime_ns): p for p in before if p.path not in listed}
    moves: dict[str, list[Violation]] = {}
    for path, (d, rel) in now.items():
        prev = was.get(path)
        moved_from = None
        if prev is None:
            ref = refs[path]
            prev = gone.get((os.path.basename(path), ref.size, ref.mtime_ns))
            moved_from = prev.path if prev is not None else None
        if prev is None or prev.dataset == d.name:
            continue
        where = f"was at {moved_from} in" if moved_from else "was in"
        moves.setdefault(d.name, []).append(
            Violation(
                CHANGED_DATASET,
                action,
                None,
                f"dataset {prev.dataset} → {d.name}",
                f"the file {path} {where} the dataset {prev.dataset!r} when the state was written; "
                f"now it is in {d.name!r}",
                files=1,
                file=rel,
            )
        )
    to_loose = []
    for x in layout.loose:
        prev = was.get(x.file.rel)
        moved_from = None
        if prev is None:
            prev = gone.get((os.path.basename(x.file.rel), x.file.size, x.file.mtime_ns))
            moved_from = prev.path if prev is not None else None
        if prev is None:
            continue
        where = f"was at {moved_from} in" if moved_from else "was in"
        to_loose.append(
            Violation(
                CHANGED_DATASET,
                action,
                None,
                f"dataset {prev.dataset} → loose",
                f"the file {x.file.rel} {where} the dataset {prev.dataset!r} when the state was written; "
                f"now it fits no dataset: {x.reason}",
                files=1,
                file=x.file.rel,
            )
        )
    return moves, to_loose


def _add(v: Verdict, found: list[Violation], action: str) -> Verdict:
    """A dataset's verdict with the files that changed dataset into it."""
    status = {"fail": "failed", "warn": "warned", "allow": "skipped"}[action]
    rule = RuleResult(CHANGED_DATASET, action, status, "allowed by the policy" if action == "allow" else "")
    counts = dict(v.counts)
    if action == "fail":
        counts["violations"] = counts.get("violations", 0) + len(found)
    elif action == "warn":
        counts["warnings"] = counts.get("warnings", 0) + len(found)
    return dataclasses.replace(
        v,
        passed=v.passed and action != "fail",
        violations=v.violations + tuple(found if action == "fail" else ()),
        warnings=v.warnings + tuple(found if action == "warn" else ()),
        allowed=v.allowed + tuple(found if action == "allow" else ()),
        rules=v.rules + (rule,),
        counts=counts,
    )


def overall(root: str, verdicts: Mapping[str, Verdict], findings: Sequence[Violation], source: str) -> Verdict:
    """The overall verdict: passed when every dataset passed and the root has no violation."""
    by = {"fail": [x for x in findings if x.severity == "fail"], "warn": [x for x in findings if x.severity == "warn"]}
    return Verdict(
        passed=all(v.passed for v in verdicts.values()) and not by["fail"],
        violations=tuple(by["fail"]),
        warnings=tuple(by["warn"]),
        allowed=tuple(x for x in findings if x.severity == "allow"),
        counts={
            "files": sum(v.counts.get("files", 0) for v in verdicts.values()),
            "rows": sum(v.counts.get("rows", 0) for v in verdicts.values()),
        },
        baseline=source,
        root=root,
        datasets=dict(sorted(verdicts.items())),
        split=True,
    )


def _offset(progress: Progress | None, done: int, total: int) -> Progress | None:
    if progress is None:
        return None
    report = progress

    def step(n: int, _of: int, current: str) -> None:
        report(done + n, total, current)

    return step
