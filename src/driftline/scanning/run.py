"""The scan: discover files, read each into a FileResult (in a process pool when asked), build a Profile."""

from __future__ import annotations

import functools
import logging
import os
import time
from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import Any

from driftline.core.files import FileResult
from driftline.core.options import DEFAULT_TASK_TIMEOUT, ReadOptions, ScanOptions, StorageOptions
from driftline.core.partitions import filter_problem, partitions_pass, where_text
from driftline.errors import InputPathError
from driftline.observe.thinning import ScanThinner, cap_paths, thin_result, thin_scan
from driftline.results.profile import Profile
from driftline.scanning.workers import cap_jobs, pool_pays, run_ordered
from driftline.sources.discover import Discovery, FileRef, discover
from driftline.sources.readers import read_file, read_files
from driftline.sources.registry import OBSERVED_TOGETHER, suffix_list
from driftline.sources.remote import discover_remote, is_url
from driftline.sources.split import assemble, can_split, plan, read_span

Progress = Callable[[int, int, str], None]  # (files done, files total, current file)


def scan_paths(
    paths: str | os.PathLike[str] | Sequence[str | os.PathLike[str]],
    *,
    options: ScanOptions | None = None,
    read: ReadOptions | None = None,
    storage: StorageOptions | None = None,
    progress: Progress | None = None,
    reuse: Callable[[FileRef], FileResult | None] | None = None,
    **keywords: Any,
) -> Profile:
    """Scan paths into a Profile: options (the defaults when None) with read, storage and the
    flat keywords of ScanKeywords applied, then scan_with. For code that holds parts at hand."""
    base = options or ScanOptions()
    if read is not None:
        base = replace(base, read=read)
    if storage is not None:
        base = replace(base, storage=storage)
    return scan_with(base.merged(paths=paths, **keywords), progress=progress, reuse=reuse)


def scan_with(
    options: ScanOptions,
    *,
    progress: Progress | None = None,
    reuse: Callable[[FileRef], FileResult | None] | None = None,
) -> Profile:
    """Scan options.paths into a Profile. Raises InputPathError when nothing can be found at all.

    reuse, when given, is asked first for each discovered file: a FileResult it returns
    stands for that file unread (an incremental state), None means read the file.
    engine 'dask' reads the files on a dask cluster (scheduler address, or a loopback local
    cluster of `jobs` workers); the Profile is the same as the local one.
    paths may be s3:// URLs (reached through options.storage); options.where keeps only
    matching key=value partitions (pruned while listing).
    jobs is capped by the cores and memory (a warning on the "driftline" logger says so);
    the storage's connect_timeout also bounds reaching a dask scheduler;
    task_timeout bounds each worker task (a WorkerError or EngineError past it).
    The example values are not concealed here: driftline.scan does that (options.values).
    """
    jobs = capped_jobs(options)
    started = time.perf_counter()
    found = discover_for(options)
    return read_found(found, options, jobs, started=started, progress=progress, reuse=reuse)


def capped_jobs(o: ScanOptions) -> int:
    """The jobs a scan runs with: a mistyped dask address fails here, before any listing; local
    workers are capped by the cores and memory (a warning on the "driftline" logger says so)."""
    jobs = o.jobs
    if o.engine == "dask" and o.scheduler:
        from driftline.scanning.engines import scheduler_endpoint

        scheduler_endpoint(o.scheduler)
    if o.engine == "local" or not o.scheduler:  # workers on this machine
        jobs, why = cap_jobs(jobs)
        if why:
            logging.getLogger("driftline").warning(why)
    return jobs


def discover_for(o: ScanOptions) -> Discovery:
    """The files options.paths name, listed as a scan lists them (local or s3://, include and
    exclude, where); InputPathError when nothing readable is found at all."""
    paths = o.paths
    conditions = list(o.where)
    if any(is_url(p) for p in paths):
        found = discover_remote(
            paths,
            storage=o.storage,
            include=o.include,
            exclude=o.exclude,
            include_hidden=o.include_hidden,
            where=conditions,
        )
    else:
        found = discover(
            paths,
            include=o.include,
            exclude=o.exclude,
            include_hidden=o.include_hidden,
            sniff_unknown=o.sniff_unknown,
            follow_links=o.follow_links,
        )
        if conditions:
            kept = tuple(f for f in found.files if partitions_pass(f.partitions, conditions))
            if not kept and found.files:  # the filter, not the folder, left nothing: say which part of it
                raise InputPathError(filter_problem([f.partitions for f in found.files], conditions))
            found = replace(found, files=kept)
    if not found.files:
        # Object store listings apply --where as they go: the filter may be why nothing is left.
        kept_by = f" that passes {where_text(conditions)}" if conditions else ""
        raise InputPathError(
            f"no readable data file{kept_by} under {', '.join(map(str, paths))} "
            f"({_skipped_summary(found.skipped)}); formats read: {suffix_list()}, optionally compressed"
        )
    return found


def read_found(
    found: Discovery,
    o: ScanOptions,
    jobs: int,
    *,
    started: float,
    progress: Progress | None = None,
    reuse: Callable[[FileRef], FileResult | None] | None = None,
) -> Profile:
    """Read the files of a discovery (jobs from capped_jobs) into a Profile rooted at found.root."""
    opts = o.read
    read_all: Callable[..., list[FileResult]] = functools.partial(_read_all, task_timeout=o.task_timeout)
    if o.engine == "dask":
        from driftline.scanning.engines import dask_reader

        read_all = dask_reader(
            found.root, o.scheduler, connect_timeout=o.storage.connect_timeout, task_timeout=o.task_timeout
        )
    if reuse is None:
        results = read_all(found.files, opts, jobs, o.max_errors, progress)
    else:
        results = _read_reusing(found.files, opts, jobs, o.max_errors, progress, reuse, read_all)
    results = cap_paths(thin_scan(results), opts.max_paths)
    return Profile(found.root, tuple(results), found.skipped, o.to_report(), time.perf_counter() - started)


def _skipped_summary(skipped: Sequence[Any]) -> str:
    """'3 skipped: 2 other-extension, 1 hidden', and how to read the files of other extensions."""
    if not skipped:
        return "0 skipped"
    counts: dict[str, int] = {}
    for s in skipped:
        counts[s.reason] = counts.get(s.reason, 0) + 1
    text = f"{len(skipped)} skipped: " + ", ".join(f"{n} {r}" for r, n in sorted(counts.items()))
    if "other-extension" in counts:
        text += " (--sniff-unknown reads files of other extensions that look like data)"
    return text


def _read_all(
    files: Sequence[FileRef],
    opts: ReadOptions,
    jobs: int,
    max_errors: int | None,
    progress: Progress | None,
    *,
    task_timeout: float = DEFAULT_TASK_TIMEOUT,
) -> list[FileResult]:
    if not pool_pays(files, jobs):
        jobs = 1  # small work: the serial run, whose results the pool's equal (tests/differential/)
    if jobs > 1 and any(can_split(ref, opts) for ref in files):
        return _read_split(files, opts, jobs, max_errors, progress, task_timeout)
    keep = ScanThinner()  # batch observations summarised as they come: memory stays bounded
    errors = 0
    total = len(files)
    pool = jobs > 1 and total > 1
    groups = _groups(files, max(1, total // (jobs * 8)) if pool else _GROUP_FILES)
    started = 0

    def before(ref: FileRef) -> None:  # serial: progress names the file about to be read
        nonlocal started
        if progress:
            progress(started, total, ref.rel)
        started += 1

    # Results come in input order, so stopping at max_errors is the same as the serial run.
    done = (
        run_ordered(read_files, groups, opts, jobs=jobs, names=_group_names, task_timeout=task_timeout)
        if pool
        else (read_files(g, opts, before=before) for g in groups)
    )
    try:
        for res in (res for group in done for res in group):
            if progress and pool:
                progress(len(keep.results), total, res.rel)
            keep.add(res)
            errors += res.errors
            if max_errors is not None and errors >= max_errors:
                break
    finally:
        close = getattr(done, "close", None)
        if close:
            close()  # stops the worker pool of an early stop
    if progress:
        progress(len(keep.results), total, "")
    return keep.results


_GROUP_FILES = 256  # Parquet files read one after another and observed together (observe.bulk)
_GROUP_BYTES = 64 * 2**20


def _groups(files: Sequence[FileRef], most: int) -> list[list[FileRef]]:
    """Files in order, runs of Parquet files (the registry's observed_together) in groups of at most
    `most` files and _GROUP_BYTES; any other file is a group of its own, so stopping at max_errors
    reads little more than it must."""
    groups: list[list[FileRef]] = []
    size = 0
    for ref in files:
        grow = (
            ref.format in OBSERVED_TOGETHER
            and groups
            and groups[-1][-1].format in OBSERVED_TOGETHER
            and len(groups[-1]) < min(most, _GROUP_FILES)
            and size + ref.size <= _GROUP_BYTES
        )
        if grow:
            groups[-1].append(ref)
            size += ref.size
        else:
            groups.append([ref])
            size = ref.size
    return groups


def _group_names(group: list[FileRef]) -> list[str]:
    return [ref.rel for ref in group]


def _task_names(task: tuple[str, Any]) -> list[str]:
    kind, what = task
    return [what.rel if kind == "file" else what.ref.rel]


def _task(task: tuple[str, Any], opts: ReadOptions) -> Any:
    kind, what = task
    if kind == "file":
        return read_file(what, opts)
    try:
        return read_span(what, opts)
    except Exception:  # the parent reads the whole file the ordinary way instead
        return None


def _read_split(
    files: Sequence[FileRef],
    opts: ReadOptions,
    jobs: int,
    max_errors: int | None,
    progress: Progress | None,
    task_timeout: float = DEFAULT_TASK_TIMEOUT,
) -> list[FileResult]:
    """Files as tasks, big JSON Lines and CSV files as several byte spans; the same results as one by one."""
    tasks: list[tuple[str, Any]] = []
    for ref in files:
        spans = plan(ref, opts, 2 * jobs) if can_split(ref, opts) else []
        tasks.extend(("span", sp) for sp in spans) if len(spans) > 1 else tasks.append(("file", ref))
    done = list(
        run_ordered(
            _task,
            tasks,
            opts,
            jobs=jobs,
            names=_task_names,
            task_timeout=task_timeout,
            chunk=max(1, len(tasks) // (jobs * 8)),
        )
    )
    keep = ScanThinner()
    errors, k, total = 0, 0, len(files)
    for i, ref in enumerate(files):
        if progress:
            progress(i, total, ref.rel)
        if tasks[k][0] == "file":
            res = done[k]
            k += 1
        else:
            n = sum(1 for kind, sp in tasks[k:] if kind == "span" and sp.ref is tasks[k][1].ref)
            res = _assemble(ref, done[k : k + n], opts)
            k += n
        keep.add(thin_result(res))
        errors += res.errors
        if max_errors is not None and errors >= max_errors:
            break
    if progress:
        progress(len(keep.results), total, "")
    return keep.results


def _assemble(ref: FileRef, parts: list[Any], opts: ReadOptions) -> FileResult:
    if any(p is None for p in parts):
        return read_file(ref, opts)
    while True:
        got = assemble(ref, parts, opts)
        if isinstance(got, FileResult):
            return got
        # A span met something that moves batch starts: read on from it, in order.
        k = next(i for i, p in enumerate(parts) if p.span.start == got.start)
        try:
            parts = [*parts[:k], read_span(got, opts)]
        except Exception:
            return read_file(ref, opts)


def _read_reusing(
    files: Sequence[FileRef],
    opts: ReadOptions,
    jobs: int,
    max_errors: int | None,
    progress: Progress | None,
    reuse: Callable[[FileRef], FileResult | None],
    read_all: Callable[..., list[FileResult]] = _read_all,
) -> list[FileResult]:
    kept = {ref.rel: res for ref in files if (res := reuse(ref)) is not None}
    todo = [ref for ref in files if ref.rel not in kept]
    fresh = iter(read_all(todo, opts, jobs, max_errors, progress) if todo else ())
    # Back in discovery order; max_errors counts reused files' errors as the full scan would.
    results: list[FileResult] = []
    errors = 0
    for ref in files:
        res = kept[ref.rel] if ref.rel in kept else next(fresh, None)
        if res is None:
            break
        results.append(res)
        errors += res.errors
        if max_errors is not None and errors >= max_errors:
            break
    return results
