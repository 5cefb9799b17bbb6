"""`driftline scan`: profile paths and print or save the report."""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path
from typing import TYPE_CHECKING
from urllib.parse import quote

import typer

import driftline
from driftline.cli.app import EXIT_USAGE, EXIT_VIOLATION, PlainHelp, app, err_console, handles_errors, out_console
from driftline.cli.read_flags import takes_read_options
from driftline.core.options import Config, ScanOptions
from driftline.emit.atomic import is_stdout, write_output
from driftline.emit.safe import safe_text
from driftline.emit.targets import WRITE_INSIDE, check_targets
from driftline.errors import InputPathError, OptionError
from driftline.results.level_names import LEVELS

# Rendering, the readers and rich are imported where they are used: `driftline scan --help`
# needs none of them (tests/api/test_imports.py).
if TYPE_CHECKING:
    from rich.console import Console
    from rich.progress import Progress, TaskID

SCAN_HELP = """Profile files and folders: fields, types, nulls, string content and drift over batches.

Folders are walked recursively in sorted order; key=value folder names become partition
values. Files starting with '.' or '_' are skipped and counted. Formats come from the
extension (.jsonl .ndjson .json .csv .tsv .parquet, plus .gz .bz2 .zst .xz); a file
without an extension, or named on its own, is sniffed from its first bytes; one with
another extension (.sql, .txt) found in a folder is skipped and counted, or sniffed with
--sniff-unknown. A path that exists is read as it is, even with [ ] * ? in its name; one
that does not is a glob.

Examples:

  driftline scan landing/

  driftline scan landing/ --json report.json

  driftline scan a.jsonl b.csv.gz exports/ --include '*.jsonl' --exclude '_*' --batch-rows 50000

A folder holding several tables (datasets: docs/datasets.md) is profiled dataset by
dataset: an overview of the datasets and the files that fit none, then each dataset's
summary; --json writes a report set, --html one page per dataset beside the name given.
A folder that is one table prints as it always did.

  driftline scan landing/ --dataset readings       (only that dataset; repeatable)

  driftline scan landing/ --one-table              (the whole folder as one table)

An output is never written over an input, nor inside a scanned folder unless
--write-inside is given; a device, a FIFO or /dev/stdout is written into.

The terminal lists the drift events first, one line each with a short reach
(--events-detail: where each starts and ends, and an example), then the field table
(on a terminal narrower than 120 columns without its string content; --full-table).
Colours follow the terminal and NO_COLOR; --color/--no-color decide.

Exit codes: 0 the data could be read (drift is information, unless --fail-at); 1 with
--fail-at LEVEL, drift at that level or a more urgent one was found, or a file failed;
2 usage or input error (a path that does not exist, nothing readable, an unwritable
output, an output aimed at an input or at another output's target).
"""


class _Bar:
    """A progress bar on stderr, shown only on a terminal and only once a scan takes a moment."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.started = time.monotonic()
        self.progress: Progress | None = None
        self.task: TaskID | None = None

    def __call__(self, done: int, total: int, current: str) -> None:
        if not self.enabled:
            return
        if self.progress is None:
            if time.monotonic() - self.started < 0.5 or done >= total:
                return
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

            self.progress = Progress(
                TextColumn("scanning"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                TextColumn("{task.description}"),
                console=err_console(),
                transient=True,
            )
            self.progress.start()
            self.task = self.progress.add_task("", total=total)
        assert self.task is not None
        self.progress.update(self.task, completed=done, description=safe_text(current, 60))

    def close(self) -> None:
        if self.progress is not None:
            self.progress.stop()


@app.command("scan", cls=PlainHelp, help=SCAN_HELP, no_args_is_help=True)
@handles_errors
@takes_read_options
def scan_command(
    paths: list[str] = typer.Argument(..., metavar="PATH...", help="Files, folders or globs to scan."),
    json_out: str | None = typer.Option(
        None, "--json", metavar="FILE|-", help="Write the whole report as JSON ('-' for stdout)."
    ),
    html_out: str | None = typer.Option(
        None,
        "--html",
        metavar="FILE|-",
        help="Write a self-contained HTML report with drift charts (one file, works offline).",
    ),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal summary (use with --json)."),
    dataset: list[str] | None = typer.Option(
        None,
        "--dataset",
        metavar="NAME",
        help="Scan only this dataset of the root (repeatable); `driftline scan ROOT` names them.",
    ),
    one_table: bool = typer.Option(
        False, "--one-table", help="Scan the whole root as one table, even when it holds several datasets."
    ),
    write_inside: bool = typer.Option(
        False,
        WRITE_INSIDE,
        help="Let --json/--html go inside a scanned folder (a new file or an earlier driftline output, never a "
        "data file); scans leave driftline's own outputs out.",
    ),
    events_detail: bool = typer.Option(
        False, "--events-detail", help="Each drift event with where it starts and ends, and an example."
    ),
    full_table: bool = typer.Option(False, "--full-table", help="Every column of the field table at any width."),
    color: bool | None = typer.Option(
        None, "--color/--no-color", help="Colour the terminal summary or not (default: on a terminal, unless NO_COLOR)."
    ),
    fail_at: str | None = typer.Option(
        None,
        "--fail-at",
        metavar="LEVEL",
        help=f"Exit 1 when drift at this level or a more urgent one is found ({', '.join(LEVELS)}), or a file failed.",
    ),
    *,
    options: ScanOptions,
    config: Config,
) -> None:
    # Each output's renderer is imported when that output is asked for (-q: no terminal, no rich tables).
    from driftline.results.report import dumps, limit_notes

    if fail_at is not None and fail_at not in LEVELS:
        raise OptionError(f"--fail-at {fail_at!r}: a level is one of {', '.join(LEVELS)}")
    look = {"events_detail": events_detail, "full_table": full_table}
    check_targets(
        [("--json", json_out), ("--html", html_out)],
        scanned=paths,
        named=[config.file],
        write_inside=write_inside,
        include_hidden=options.include_hidden,
    )
    if dataset and (one_table or not _one_folder(paths)):
        raise OptionError("--dataset picks datasets of one root folder: give one folder, without --one-table")
    bar = _Bar(sys.stderr.isatty() and not quiet)
    try:
        # The verb is the library call (tests/test_cli_api_same.py).
        if one_table or not _one_folder(paths):
            profile = driftline.scan(paths, options=options, progress=bar)
            note = ""
        else:
            landing = driftline.scan_datasets(
                paths[0], dataset=dataset or None, whole_if_one=True, options=options, progress=bar
            )
            if landing.whole is None:
                _several(landing, options, json_out, html_out, quiet, write_inside, look, color, paths[0])
                if fail_at is not None and any(fails_at(p, fail_at) for p in landing.datasets.values()):
                    raise typer.Exit(EXIT_VIOLATION)
                return
            profile, note = landing.whole, "" if quiet else _one_table_note(landing)
    finally:
        bar.close()
    if note and not quiet:
        err_console().print(note, markup=False)
    # Every file failed: the report (with the problems) is still written, then exit 2.
    failed = profile.nothing_read
    if json_out is not None:
        write_output(json_out, dumps(profile))
    if html_out is not None:
        from driftline.emit.html import write_html

        write_html(profile, html_out)
    if quiet:
        for note in limit_notes(profile):  # a limit reached is said even without the summary
            err_console().print(f"warning: {note}", markup=False)
    if not quiet:
        from driftline.emit.terminal import render

        # Data goes to stdout; when the JSON report takes stdout, or there is no data, the summary goes to stderr.
        to_stdout = any(t is not None and is_stdout(t) for t in (json_out, html_out))
        console = terminal(failed or to_stdout, color)
        render(profile, console, options.max_events, **look, title=_file_named(paths, profile))
        if json_out is not None and not is_stdout(json_out):
            console.print(f"report written to {safe_text(Path(json_out))}", markup=False)
        if html_out is not None and not is_stdout(html_out):
            console.print(f"HTML report written to {safe_text(Path(html_out))}", markup=False)
    if failed:
        hint = (
            "see the problems above"
            if not quiet
            else "the problems are in the report"
            if json_out or html_out
            else "run without -q to see the problems"
        )
        raise InputPathError(f"nothing readable: {profile.unread_text()} ({hint})")
    if profile.rows == 0 and not profile.files:
        raise typer.Exit(EXIT_USAGE)
    if fail_at is not None and fails_at(profile, fail_at):
        raise typer.Exit(EXIT_VIOLATION)


def _one_table_note(landing: driftline.Landing) -> str:
    from driftline.emit.landing_text import one_table_note

    return one_table_note(landing)


def fails_at(profile: driftline.Profile, level: str) -> bool:
    """Whether a scan meets --fail-at: an event at level or a more urgent one (LEVELS is most
    urgent first), or a file error."""
    order = list(LEVELS)
    urgent = order[: order.index(level) + 1]
    return bool(profile.error_count) or any(profile.level_counts.get(lv, 0) for lv in urgent)


def _file_named(paths: list[str], profile: driftline.Profile) -> str | None:
    """What the header names: the path as it was typed when one was given (the profile is rooted
    at the absolute folder, a file's at its folder), else the profile's root."""
    return paths[0] if len(paths) == 1 else None


def terminal(to_stderr: bool, color: bool | None) -> Console:
    """The console of the summary: stdout or stderr; --color forces colour, --no-color none;
    neither: colour on a terminal unless NO_COLOR (rich reads it)."""

    if color is None:
        return err_console() if to_stderr else out_console(highlight=False)
    if color:
        return out_console(stderr=to_stderr, highlight=False, force_terminal=True)
    return out_console(stderr=to_stderr, highlight=False, color_system=None)


def _one_folder(paths: list[str]) -> bool:
    """Whether the scan names one local folder: the only case split into datasets."""
    from driftline.sources.remote import is_url

    return len(paths) == 1 and not is_url(paths[0]) and os.path.isdir(paths[0])


def _several(
    landing: driftline.Landing,
    options: ScanOptions,
    json_out: str | None,
    html_out: str | None,
    quiet: bool,
    write_inside: bool,
    look: dict[str, bool] | None = None,
    color: bool | None = None,
    typed_root: str | None = None,
) -> None:
    """A root of several datasets: the report set, one HTML page per dataset, the overview then
    each dataset's summary; exit 2 when every file of a dataset failed."""
    from driftline.results.landing import dumps_set
    from driftline.results.report import limit_notes

    pages = _pages(html_out, list(landing.datasets))
    if pages:  # the names are known now, before anything is written
        check_targets(
            [("--html", page) for page in pages.values()],
            scanned=[landing.root],
            write_inside=write_inside,
            include_hidden=options.include_hidden,
        )
    failed = [name for name, p in landing.datasets.items() if _all_failed(p)]
    if json_out is not None:
        write_output(json_out, dumps_set(landing))
    for name, page in pages.items():
        # Each page picks among the others by their file names: they are written side by side.
        picker = [(other, None if other == name else quote(os.path.basename(there))) for other, there in pages.items()]
        from driftline.emit.html import write_html

        write_html(landing.datasets[name], page, picker)
    if quiet:
        for name, p in landing.datasets.items():
            for note in limit_notes(p):
                err_console().print(f"warning: dataset {safe_text(name)}: {note}", markup=False)
    else:
        to_stdout = json_out is not None and is_stdout(json_out)
        console = terminal(to_stdout or len(failed) == len(landing.datasets), color)
        from driftline.emit.landing_text import render_landing

        render_landing(landing, console, options.max_events, **(look or {}), title=typed_root)
        if json_out is not None and not is_stdout(json_out):
            console.print(f"report set written to {safe_text(Path(json_out))}", markup=False)
        for page in pages.values():
            console.print(f"HTML report written to {safe_text(Path(page))}", markup=False)
    if failed:
        raise InputPathError(unread_datasets(landing, failed))


def _all_failed(p: driftline.Profile) -> bool:
    return p.nothing_read


def unread_datasets(landing: driftline.Landing, failed: list[str]) -> str:
    """The error of a root whose datasets named in failed gave no row: why, for one of them."""
    if len(failed) == 1:
        return f"nothing readable in dataset {safe_text(failed[0])}: {landing.datasets[failed[0]].unread_text()}"
    names = ", ".join(safe_text(n) for n in failed)
    return f"nothing readable in the datasets {names}: in each, every file failed or holds no row"


def _pages(html_out: str | None, names: list[str]) -> dict[str, str]:
    """One HTML page per dataset next to the name given: report.html → report.readings.html
    (a dataset's '/' becomes '.'); several pages cannot share standard output."""
    if html_out is None:
        return {}
    if is_stdout(html_out):
        raise OptionError(
            f"--html -: the root holds {len(names):,} datasets, one page each, and they cannot share standard "
            "output; give a file name (one page per dataset is written beside it) or --dataset NAME"
        )
    stem, dot, suffix = html_out.rpartition(".")
    if not dot or "/" in suffix or os.sep in suffix:
        stem, suffix = html_out, "html"
    return {name: f"{stem}.{name.replace('/', '.')}.{suffix}" for name in names}
