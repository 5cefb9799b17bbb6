"""A landing root scanned dataset by dataset: discover once, split (sources/datasets), read each
dataset's files into a Profile of its own.

Each dataset is read from the files discovery listed, never by listing its folder again, and
rooted at its folder: its files' relative paths and partitions are those a scan of that folder
alone gives, so its Profile equals that scan when the folder holds nothing else.  A lone
reference file beside other datasets (its name is its path) is rooted at the root's folder, as a
scan of that file alone is.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Sequence
from dataclasses import replace

from driftline.core.files import Skipped
from driftline.core.options import ScanOptions
from driftline.errors import OptionError
from driftline.results.landing import Landing
from driftline.results.profile import Profile
from driftline.scanning.run import Progress, capped_jobs, discover_for, read_found
from driftline.sources.datasets import (
    ROOT_NAME,
    Dataset,
    Layout,
    folders_below,
    peek_fields,
    split_datasets,
)
from driftline.sources.discover import Discovery, FileRef, partition_values
from driftline.sources.remote import is_url


def is_one_table(layout: Layout) -> bool:
    """Whether a root reads as one table, as a scan of it always did: it holds a single dataset,
    or its own folder is a dataset's (the dataset "."; the files beside that table are its
    oddities), or every dataset is a file directly in it (a flat folder of files, split by their
    field names alone, is a table whose columns drift as often as it is several tables).

    >>> from driftline.sources.datasets import Dataset
    >>> def ds(name, folder): return Dataset(name, folder, (), ("jsonl",), (), ())
    >>> is_one_table(Layout("/r", (ds("a", "a"), ds("b.parquet", ".")), (), ()))
    False
    >>> is_one_table(Layout("/r", (ds("a.jsonl", "."), ds("b.jsonl", ".")), (), ()))
    True
    """
    names = [d.name for d in layout.datasets]
    return len(names) <= 1 or ROOT_NAME in names or all(d.folder == ROOT_NAME for d in layout.datasets)


def survey(options: ScanOptions) -> tuple[Discovery, Layout]:
    """Discover options.paths (one root) as a scan does and split it into datasets from each
    file's head or footer."""
    found = discover_for(options)
    peeks = {ref.rel: peek_fields(ref) for ref in found.files}
    (top,) = options.paths
    folders = folders_below(top, options.include_hidden) if not is_url(top) and os.path.isdir(top) else ()
    return found, split_datasets(found, peeks, folders)


def picked(layout: Layout, names: str | Sequence[str] | None) -> tuple[Dataset, ...]:
    """The datasets asked for (all when names is None), in name order; OptionError for a name
    the layout does not hold, listing those it does."""
    if names is None:
        return layout.datasets
    wanted = [names] if isinstance(names, str) else list(names)
    if not all(isinstance(n, str) for n in wanted):
        raise OptionError(f"dataset must be a name or a list of names, not {names!r}")
    known = {d.name for d in layout.datasets}
    unknown = [n for n in dict.fromkeys(wanted) if n not in known]
    if unknown:
        listed = ", ".join(repr(d.name) for d in layout.datasets) or "none"
        raise OptionError(
            f"no dataset named {', '.join(map(repr, unknown))} under {layout.root}; its datasets: {listed}"
        )
    return tuple(d for d in layout.datasets if d.name in set(wanted))


def dataset_discovery(layout: Layout, dataset: Dataset) -> Discovery:
    """A dataset's files as a discovery of its folder alone would list them: rooted at the folder,
    relative paths and partitions below it, the skipped files under it (none for a lone file)."""
    if dataset.folder == ROOT_NAME:
        root, prefix = layout.root, ""
    else:
        root, prefix = os.path.join(layout.root, *dataset.folder.split("/")), dataset.folder + "/"
    files = tuple(_rebased(ref, prefix) for ref in dataset.files)
    lone = dataset.name != dataset.folder
    skipped = (
        ()
        if lone
        else tuple(Skipped(s.rel[len(prefix) :], s.reason) for s in layout.skipped if s.rel.startswith(prefix))
    )
    return Discovery(root, files, skipped)


def _rebased(ref: FileRef, prefix: str) -> FileRef:
    rel = ref.rel[len(prefix) :]
    return replace(ref, rel=rel, partitions=partition_values(rel))


def scan_landing(
    options: ScanOptions,
    *,
    names: str | Sequence[str] | None = None,
    whole_if_one: bool = False,
    progress: Progress | None = None,
) -> Landing:
    """Scan one root (options.paths) dataset by dataset, or only the datasets named.

    whole_if_one (the command line's default): when no name is given and the root reads as one
    table (is_one_table), it is read whole as scan_with reads it, into Landing.whole, with no
    second listing; Landing.datasets is then empty.  jobs and the engine apply to each dataset as
    to a scan.  The example values are not concealed here: driftline.scan_datasets does that.
    """
    jobs = capped_jobs(options)
    started = time.perf_counter()
    found, layout = survey(options)
    if whole_if_one and names is None and is_one_table(layout):
        whole = read_found(found, options, jobs, started=started, progress=progress)
        return _landing(layout, {}, whole)
    chosen = picked(layout, names)
    total = sum(len(d.files) for d in chosen)
    profiles: dict[str, Profile] = {}
    done = 0
    for d in chosen:
        began = time.perf_counter()
        profiles[d.name] = read_found(
            dataset_discovery(layout, d), options, jobs, started=began, progress=_offset(progress, done, total)
        )
        done += len(d.files)
    return _landing(layout, profiles)


def _landing(layout: Layout, profiles: dict[str, Profile], whole: Profile | None = None) -> Landing:
    found = tuple(d.name for d in layout.datasets)
    return Landing(layout.root, profiles, layout.loose, layout.skipped, layout.notices, found, whole)


def _offset(progress: Progress | None, done: int, total: int) -> Progress | None:
    """A dataset's progress as a share of the whole scan's files."""
    if progress is None:
        return None
    report: Callable[[int, int, str], None] = progress

    def step(n: int, _of: int, current: str) -> None:
        report(done + n, total, current)

    return step
