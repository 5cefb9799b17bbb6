"""`driftline scan`: profile paths and print or save the report."""

from __future__ import annotations

import sys
import time
from pathlib import Path

import typer
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TaskID, TextColumn, TimeElapsedColumn

import driftline
from driftline.cli import ENCODING_OPTION, EXIT_USAGE, app, err_console, handles_errors
from driftline.cli.values import EXAMPLE_VALUES, HASH_KEY_FILE, values_of
from driftline.drift import DEFAULT_MAX_EVENTS
from driftline.emit.atomic import is_stdout, write_output
from driftline.emit.html import write_html
from driftline.emit.safe import safe_text
from driftline.emit.targets import WRITE_INSIDE, check_targets
from driftline.emit.terminal import render
from driftline.errors import InputPathError
from driftline.ranges import RANGES
from driftline.report import dumps, limit_notes
from driftline.scan import default_jobs
from driftline.sources.base import (
    DEFAULT_BATCH_BYTES,
    DEFAULT_BATCH_ROWS,
    DEFAULT_MAX_COLUMNS,
    DEFAULT_MAX_DECOMPRESSED_BYTES,
    DEFAULT_MAX_DECOMPRESSION_RATIO,
    DEFAULT_MAX_PATHS,
    DEFAULT_MAX_RECORD_BYTES,
)
from driftline.sources.remote import DEFAULT_CONNECT_TIMEOUT, DEFAULT_REQUEST_TIMEOUT
from driftline.workers import DEFAULT_TASK_TIMEOUT

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

An output is never written over an input, nor inside a scanned folder unless
--write-inside is given; a device, a FIFO or /dev/stdout is written into.

Exit codes: 0 the data could be read (drift is information); 2 usage or input error
(a path that does not exist, nothing readable, an unwritable output, an output aimed at
an input or at another output's target).
"""


CSV_DIALECT_HELP = (
    "Pin the CSV dialect of the files matching GLOB (all CSV/TSV files without it); repeatable, later pins win. "
    "Keys: delimiter (comma, tab, semicolon, pipe, colon, space or a character), quote (double, single, none), "
    "escape (backslash, none), header (yes, no, row-names), skip (lines before the header), lines (lf, crlf, cr). "
    "Keys left out are found from the data. E.g. 'legacy/*.txt:delimiter=pipe,quote=none,header=no'."
)


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
            self.progress = Progress(
                TextColumn("scanning"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                TextColumn("{task.description}"),
                console=err_console,
                transient=True,
            )
            self.progress.start()
            self.task = self.progress.add_task("", total=total)
        assert self.task is not None
        self.progress.update(self.task, completed=done, description=safe_text(current, 60))

    def close(self) -> None:
        if self.progress is not None:
            self.progress.stop()


@app.command("scan", help=SCAN_HELP, no_args_is_help=True)
@handles_errors
def scan_command(
    paths: list[str] = typer.Argument(..., help="Files, folders or globs to scan."),
    json_out: str | None = typer.Option(
        None, "--json", metavar="FILE|-", help="Write the whole report as JSON ('-' for stdout)."
    ),
    html_out: str | None = typer.Option(
        None,
        "--html",
        metavar="FILE|-",
        help="Write a self-contained HTML report with drift charts (one file, works offline).",
    ),
    include: list[str] = typer.Option(
        [], "--include", metavar="GLOB", help="Only files whose path or name matches (repeatable)."
    ),
    exclude: list[str] = typer.Option(
        [], "--exclude", metavar="GLOB", help="Skip files whose path or name matches (repeatable)."
    ),
    batch_rows: int = typer.Option(
        DEFAULT_BATCH_ROWS,
        "--batch-rows",
        min=1,
        max=RANGES["batch_rows"][1],
        help="Rows per batch: drift is tracked batch by batch.",
    ),
    batch_bytes: int = typer.Option(
        DEFAULT_BATCH_BYTES,
        "--batch-bytes",
        min=1,
        max=RANGES["batch_bytes"][1],
        help="A batch also ends once its records reach this many bytes of input (bounds memory; default 64 MiB).",
    ),
    jobs: int = typer.Option(
        default_jobs(),
        "--jobs",
        "-j",
        min=1,
        max=RANGES["jobs"][1],
        help="Files read in parallel (processes), at most one per core and per 256 MB of free memory (a warning "
        "says when lowered). Results do not depend on it.",
    ),
    max_errors: int | None = typer.Option(
        None,
        "--max-errors",
        min=1,
        max=RANGES["max_errors"][1],
        help="Stop reading new files once this many errors were found.",
    ),
    max_record_bytes: int = typer.Option(
        DEFAULT_MAX_RECORD_BYTES,
        "--max-record-bytes",
        min=1,
        max=RANGES["max_record_bytes"][1],
        help="Longer JSON lines / CSV rows are reported, not read.",
    ),
    max_decompressed_bytes: int = typer.Option(
        DEFAULT_MAX_DECOMPRESSED_BYTES,
        "--max-decompressed-bytes",
        min=1,
        max=RANGES["max_decompressed_bytes"][1],
        help="Stop reading a file past this many bytes of content (decompression bombs); rows before are kept.",
    ),
    max_decompression_ratio: float = typer.Option(
        DEFAULT_MAX_DECOMPRESSION_RATIO,
        "--max-decompression-ratio",
        min=1,
        max=RANGES["max_decompression_ratio"][1],
        help="Stop a compressed file once it expands more than this many times (judged past 16 MiB).",
    ),
    max_columns: int = typer.Option(
        DEFAULT_MAX_COLUMNS,
        "--max-columns",
        min=1,
        max=RANGES["max_columns"][1],
        help="A CSV/TSV file with more columns is reported, not read (each column costs a pass per batch).",
    ),
    max_paths: int = typer.Option(
        DEFAULT_MAX_PATHS,
        "--max-paths",
        min=1,
        max=RANGES["max_paths"][1],
        help="Distinct field paths kept; past it, a warning and the rest counted as other fields.",
    ),
    max_events: int = typer.Option(
        DEFAULT_MAX_EVENTS,
        "--max-events",
        min=1,
        max=RANGES["max_events"][1],
        help="Drift events listed; past it they are counted by kind only (the report says so).",
    ),
    delimiter: str | None = typer.Option(None, "--delimiter", help="CSV delimiter; found from the data if not given."),
    csv_dialect: list[str] = typer.Option([], "--csv-dialect", metavar="[GLOB:]KEY=VALUE,…", help=CSV_DIALECT_HELP),
    encoding: str | None = ENCODING_OPTION,
    hidden: bool = typer.Option(False, "--hidden", help="Also read files and folders starting with '.' or '_'."),
    sniff_unknown: bool = typer.Option(
        False,
        "--sniff-unknown",
        help="Also read files of other extensions (.txt, .dat...) found in folders whose first bytes look like JSON, "
        "CSV or Parquet; without it they are skipped unread. Files without an extension, and files named on their "
        "own, are always sniffed.",
    ),
    follow_links: bool = typer.Option(
        False,
        "--follow-links",
        help="Follow symbolic links that lead out of the paths given (skipped and listed by default).",
    ),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal summary (use with --json)."),
    write_inside: bool = typer.Option(
        False,
        WRITE_INSIDE,
        help="Let --json/--html go inside a scanned folder (a new file or an earlier driftline output, never a "
        "data file); scans leave driftline's own outputs out.",
    ),
    engine: str = typer.Option(
        "local",
        "--engine",
        help="Where files are read: local (processes) or dask (a cluster; install driftline[dask]).",
    ),
    scheduler: str | None = typer.Option(
        None,
        "--scheduler",
        metavar="ADDRESS",
        help="dask scheduler, e.g. tcp://10.0.0.5:8786; without it --engine dask starts --jobs workers on 127.0.0.1.",
    ),
    where: list[str] = typer.Option(
        [],
        "--where",
        metavar="KEY OP VALUE",
        help="Only key=value partitions that pass, e.g. 'day>=2026-11-01' (repeatable; s3:// listing is pruned by it).",
    ),
    endpoint_url: str | None = typer.Option(
        None, "--endpoint-url", metavar="URL", help="S3-compatible endpoint for s3:// inputs (else AWS_ENDPOINT_URL)."
    ),
    region: str | None = typer.Option(None, "--region", help="Region of the s3:// bucket (else AWS_REGION)."),
    anonymous: bool = typer.Option(False, "--anonymous", help="Read a public s3:// bucket without credentials."),
    example_values: str | None = EXAMPLE_VALUES,
    hash_key_file: str | None = HASH_KEY_FILE,
    connect_timeout: float = typer.Option(
        DEFAULT_CONNECT_TIMEOUT,
        "--connect-timeout",
        metavar="SECONDS",
        min=0.001,
        max=86_400,
        help="Give up connecting to a dask scheduler or an object store after this long (per attempt).",
    ),
    request_timeout: float = typer.Option(
        DEFAULT_REQUEST_TIMEOUT,
        "--request-timeout",
        metavar="SECONDS",
        min=0.001,
        max=86_400,
        help="Give up an object store request that received nothing for this long (per attempt, 4 attempts).",
    ),
    task_timeout: float = typer.Option(
        DEFAULT_TASK_TIMEOUT,
        "--task-timeout",
        metavar="SECONDS",
        min=0.001,
        max=10_000_000,
        help="Stop the scan when a worker task (a file, or a run of small files) runs longer than this.",
    ),
) -> None:
    check_targets(
        [("--json", json_out), ("--html", html_out)], scanned=paths, write_inside=write_inside, include_hidden=hidden
    )
    values = values_of(example_values, hash_key_file)
    bar = _Bar(sys.stderr.isatty() and not quiet)
    try:
        # The verb is the library call, option for option (tests/test_cli_api_same.py).
        profile = driftline.scan(
            paths,
            batch_rows=batch_rows,
            batch_bytes=batch_bytes,
            include=include,
            exclude=exclude,
            include_hidden=hidden,
            sniff_unknown=sniff_unknown,
            follow_links=follow_links,
            jobs=jobs,
            max_errors=max_errors,
            max_record_bytes=max_record_bytes,
            max_decompressed_bytes=max_decompressed_bytes,
            max_decompression_ratio=max_decompression_ratio,
            max_columns=max_columns,
            max_paths=max_paths,
            max_events=max_events if max_events != DEFAULT_MAX_EVENTS else None,
            delimiter=delimiter,
            csv_dialect=csv_dialect,
            encoding=encoding,
            where=where,
            engine=engine,
            scheduler=scheduler,
            endpoint_url=endpoint_url,
            region=region,
            anonymous=anonymous,
            example_values=values.mode,
            hash_key=values.key,
            connect_timeout=connect_timeout,
            request_timeout=request_timeout,
            task_timeout=task_timeout,
            progress=bar,
        )
    finally:
        bar.close()
    # Every file failed: the report (with the problems) is still written, then exit 2.
    failed = (
        profile.rows == 0
        and profile.error_count
        and all(not f.rows and (f.errors or not f.observations) for f in profile.files)
    )
    if json_out is not None:
        write_output(json_out, dumps(profile))
    if html_out is not None:
        write_html(profile, html_out)
    if quiet:
        for note in limit_notes(profile):  # a limit reached is said even without the summary
            err_console.print(f"warning: {note}", markup=False)
    if not quiet:
        # Data goes to stdout; when the JSON report takes stdout, or there is no data, the summary goes to stderr.
        to_stdout = any(t is not None and is_stdout(t) for t in (json_out, html_out))
        console = err_console if failed or to_stdout else Console(highlight=False)
        render(profile, console)
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
        raise InputPathError(f"nothing readable: every one of {len(profile.files)} files failed ({hint})")
    if profile.rows == 0 and not profile.files:
        raise typer.Exit(EXIT_USAGE)
