"""`driftline schema ROOT` on a root of several datasets: one recommendation per dataset, one file
per dataset in the folder --out (or --rules) names, each dataset's summary under a heading."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, replace
from pathlib import Path

import typer
from rich.console import Console
from rich.rule import Rule
from rich.text import Text

import driftline
from driftline.cli.app import EXIT_VIOLATION, err_console
from driftline.cli.scan_cmd import _all_failed as all_failed
from driftline.cli.scan_cmd import unread_datasets
from driftline.core.options import ScanOptions
from driftline.emit.atomic import is_stdout
from driftline.emit.dataset_files import dataset_files, is_folder_target
from driftline.emit.safe import safe_text
from driftline.emit.schemas import summary
from driftline.emit.schemas.files import write_file
from driftline.emit.targets import check_targets
from driftline.errors import InputPathError, OptionError, OutputError
from driftline.recommendation import RecommendOptions, SchemaConflictError
from driftline.results.conceal import conceal


@dataclass(frozen=True)
class Targets:
    """Where the schema file (--out, when --to is given) and the cast rules (--rules) go."""

    out: str | None
    rules: str | None

    def given(self) -> Iterator[tuple[str, str]]:
        for option, target in (("--out", self.out), ("--rules", self.rules)):
            if target is not None:
                yield option, target


def _files(landing: driftline.Landing, to: str | None, targets: Targets) -> dict[str, list[tuple[str, str, str]]]:
    """Each dataset's outputs as (option, what, file): a folder target gives one file per dataset; a file
    or standard output takes one dataset only (a usage error otherwise, listing the datasets)."""
    names = list(landing.datasets)
    files: dict[str, list[tuple[str, str, str]]] = {n: [] for n in names}
    for option, target in targets.given():
        kind = "rules" if option == "--rules" else str(to)
        what = "cast rules" if option == "--rules" else str(to)
        if is_folder_target(target):
            for name, path in dataset_files(target, names, kind, root=landing.root).items():
                files[name].append((option, what, path))
        elif len(names) == 1:
            files[names[0]].append((option, what, target))
        else:
            where = "standard output" if is_stdout(target) else f"one file ({target!r})"
            listed = ", ".join(safe_text(n, 80) for n in names)
            raise OptionError(
                f"{option} {target}: {landing.root!r} holds {len(names)} datasets ({listed}) and {option} writes "
                f"{where}; give a folder ({option} DIR/, one file per dataset) or pick one with --dataset NAME"
            )
    return files


def picked_from_set(landing: driftline.Landing, names: list[str] | None, options: ScanOptions) -> driftline.Landing:
    """A report set's datasets, or those named (OptionError for a name it does not hold, listing those
    it does), their example values concealed as --example-values asks, as a saved report's are."""
    known = list(landing.datasets)
    unknown = [n for n in dict.fromkeys(names or ()) if n not in known]
    if unknown:
        listed = ", ".join(repr(n) for n in known) or "none"
        raise OptionError(f"no dataset named {', '.join(map(repr, unknown))} in the report set; its datasets: {listed}")
    chosen = {
        n: driftline.Profile._of(conceal(p, options.values))
        for n, p in landing.datasets.items()
        if names is None or n in names
    }
    return replace(landing, datasets=chosen)


def by_dataset(
    landing: driftline.Landing,
    opts: RecommendOptions,
    to: str | None,
    targets: Targets,
    table: str | None,
    json_mode: str | None,
    console: Console,
    quiet: bool,
    write_inside: bool,
    options: ScanOptions,
    inputs: list[str],
    *,
    dialect: str | None = None,
    flatten: str | None = None,
    bounds_from_sample: bool = False,
) -> None:
    """One recommendation per dataset, its files written, its summary under a heading `dataset NAME`
    (no heading for a lone dataset); exit 1 when a dataset conflicts under --strict (its files are not
    written), 2 when every file of a dataset failed, the worst over the datasets."""
    files = _files(landing, to, targets)
    several = len(landing.datasets) > 1
    if several and table is not None:
        raise OptionError(
            f"--table names one table, and {landing.root!r} holds {len(landing.datasets)} datasets; each takes its "
            "folder's name, or pick one with --dataset NAME"
        )
    check_targets(
        [(option, path) for outs in files.values() for option, _, path in outs],
        scanned=[landing.root, *inputs],
        write_inside=write_inside,
        include_hidden=options.include_hidden,
    )
    recs: dict[str, driftline.Recommendation] = {}
    conflicts: dict[str, SchemaConflictError] = {}
    failed = [name for name, p in landing.datasets.items() if all_failed(p)]
    for name, profile in landing.datasets.items():
        if name in failed:
            continue
        try:
            recs[name] = driftline.recommend(profile, options=opts)
        except SchemaConflictError as exc:
            conflicts[name] = exc
    for _, target in targets.given():
        if is_folder_target(target) and recs:
            try:
                Path(target).mkdir(exist_ok=True)
            except OSError as exc:
                raise OutputError(f"cannot make the folder {target!r}: {exc.strerror or exc}") from None
    for name, rec in recs.items():
        for option, _, path in files[name]:
            write_file(
                rec,
                path,
                "rules" if option == "--rules" else to,  # type: ignore[arg-type]
                table=table,
                json_mode=json_mode,  # type: ignore[arg-type]
                dialect=dialect,
                flatten=flatten,
                bounds_from_sample=bounds_from_sample,
            )
    for name in landing.datasets:
        if not quiet:
            if several:
                console.print()
                console.print(Rule(Text(f"dataset {safe_text(name)}", style="bold"), align="left"))
            if name in recs or name in conflicts:
                summary.render(recs[name] if name in recs else conflicts[name].recommendation, console)
            else:
                console.print(f"nothing readable: {landing.datasets[name].unread_text()}")
            for _, what, path in files[name] if name in recs else ():
                if not is_stdout(path):
                    console.print(f"{what} written to {safe_text(path)}", markup=False)
        if name in conflicts:
            conflict = conflicts[name]
            prefix = f"dataset {safe_text(name)}: " if several else ""
            err_console().print(f"error: {prefix}{safe_text(conflict, None)}", markup=False)
            for plan in conflict.conflicts:
                err_console().print("  " + summary.rule_line(plan), markup=False)
    if failed:
        raise InputPathError(unread_datasets(landing, failed))
    if conflicts:
        raise typer.Exit(EXIT_VIOLATION)
