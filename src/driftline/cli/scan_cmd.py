"""`driftline scan`: profile paths and print or save the report."""

from __future__ import annotations

import sys
import time
from pathlib import Path

import typer
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

import driftline
from driftline.cli import EXIT_USAGE, app, err_console, handles_errors
from driftline.emit.atomic import write_output
from driftline.emit.html import write_html
from driftline.emit.safe import safe_text
from driftline.emit.terminal import render
from driftline.errors import InputPathError
from driftline.report import dumps
from driftline.scan import default_jobs
from driftline.sources.base import (
    DEFAULT_BATCH_ROWS,
    DEFAULT_MAX_COLUMNS,
    DEFAULT_MAX_DECOMPRESSED_BYTES,
    DEFAULT_MAX_DECOMPRESSION_RATIO,
    DEFAULT_MAX_RECORD_BYTES,
)
from driftline.sources.remote import DEFAULT_CONNECT_TIMEOUT, DEFAULT_REQUEST_TIMEOUT
from driftline.workers import DEFAULT_TASK_TIMEOUT

SCAN_HELP = """Profile files and folders: fields, types, nulls, string content and drift over batches.

Folders are walked recursively in sorted order; key=value folder names become partition
values. Files starting with '.' or '_' are skipped and counted. Formats come from the
extension (.jsonl .ndjson .json .csv .tsv .parquet, plus .gz .bz2 .zst .xz) or from the
first bytes.

Examples:

  driftline scan landing/

  driftline scan landing/ --json report.json

  driftline scan a.jsonl b.csv.gz exports/ --include '*.jsonl' --exclude '_*' --batch-rows 50000

Exit codes: 0 the data could be read (drift is information); 2 usage or input error
(a path that does not exist, nothing readable, an unwritable output).
"""


class _Bar:
    """A progress bar on stderr, shown only on a terminal and only once a scan takes a moment."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.started = time.monotonic()
        self.progress: Progress | None = None
        self.task = None

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
        help="Rows per batch: drift is tracked batch by batch and memory is bounded by it.",
    ),
    jobs: int = typer.Option(
        default_jobs(), "--jobs", "-j", min=1,
        help="Files read in parallel (processes), at most one per core and per 256 MB of free memory (a warning "
        "says when lowered). Results do not depend on it.",
    ),
    max_errors: int | None = typer.Option(
        None, "--max-errors", min=1, help="Stop reading new files once this many errors were found."
    ),
    max_record_bytes: int = typer.Option(
        DEFAULT_MAX_RECORD_BYTES,
        "--max-record-bytes",
        min=1,
        help="Longer JSON lines / CSV rows are reported, not read.",
    ),
    max_decompressed_bytes: int = typer.Option(
        DEFAULT_MAX_DECOMPRESSED_BYTES,
        "--max-decompressed-bytes",
        min=1,
        help="Stop reading a file past this many bytes of content (decompression bombs); rows before are kept.",
    ),
    max_decompression_ratio: float = typer.Option(
        DEFAULT_MAX_DECOMPRESSION_RATIO,
        "--max-decompression-ratio",
        min=1,
        help="Stop a compressed file once it expands more than this many times (judged past 16 MiB).",
    ),
    max_columns: int = typer.Option(
        DEFAULT_MAX_COLUMNS,
        "--max-columns",
        min=1,
        help="A CSV/TSV file with more columns is reported, not read (each column costs a pass per batch).",
    ),
    delimiter: str | None = typer.Option(None, "--delimiter", help="CSV delimiter; sniffed when not given."),
    hidden: bool = typer.Option(False, "--hidden", help="Also read files and folders starting with '.' or '_'."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal summary (use with --json)."),
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
    connect_timeout: float = typer.Option(
        DEFAULT_CONNECT_TIMEOUT, "--connect-timeout", metavar="SECONDS", min=0.001, max=86_400,
        help="Give up connecting to a dask scheduler or an object store after this long (per attempt).",
    ),
    request_timeout: float = typer.Option(
        DEFAULT_REQUEST_TIMEOUT, "--request-timeout", metavar="SECONDS", min=0.001, max=86_400,
        help="Give up an object store request that received nothing for this long (per attempt, 4 attempts).",
    ),
    task_timeout: float = typer.Option(
        DEFAULT_TASK_TIMEOUT, "--task-timeout", metavar="SECONDS", min=0.001, max=10_000_000,
        help="Stop the scan when a worker task (a file, or a run of small files) runs longer than this.",
    ),
) -> None:
    bar = _Bar(sys.stderr.isatty() and not quiet)
    try:
        # The verb is the library call, option for option (tests/test_cli_api_same.py).
        profile = driftline.scan(
            paths,
            batch_rows=batch_rows,
            include=include,
            exclude=exclude,
            include_hidden=hidden,
            jobs=jobs,
            max_errors=max_errors,
            max_record_bytes=max_record_bytes,
            max_decompressed_bytes=max_decompressed_bytes,
            max_decompression_ratio=max_decompression_ratio,
            max_columns=max_columns,
            delimiter=delimiter,
            where=where,
            engine=engine,
            scheduler=scheduler,
            endpoint_url=endpoint_url,
            region=region,
            anonymous=anonymous,
            connect_timeout=connect_timeout,
            request_timeout=request_timeout,
            task_timeout=task_timeout,
            progress=bar,
        )
    finally:
        bar.close()
    if profile.rows == 0 and profile.error_count and all(not f.observations for f in profile.files):
        render(profile, err_console)
        raise InputPathError(
            f"nothing readable: every one of {len(profile.files)} files failed (see the problems above)"
        )
    if html_out == "-" and json_out == "-":
        raise typer.BadParameter("only one of --json and --html can write to stdout ('-')")
    if json_out is not None:
        write_output(json_out, dumps(profile))
    if html_out is not None:
        write_html(profile, html_out)
    if not quiet:
        # Data goes to stdout; when the JSON report takes stdout, the summary moves to stderr.
        console = err_console if "-" in (json_out, html_out) else Console(highlight=False)
        render(profile, console)
        if json_out not in (None, "-"):
            console.print(f"report written to {safe_text(Path(json_out))}", markup=False)
        if html_out not in (None, "-"):
            console.print(f"HTML report written to {safe_text(Path(html_out))}", markup=False)
    if profile.rows == 0 and not profile.files:
        raise typer.Exit(EXIT_USAGE)
