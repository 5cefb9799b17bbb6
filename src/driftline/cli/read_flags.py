"""The read options every verb that reads data takes (scan, schema, check, diff), declared once.

Each flag is named after the library's keyword (driftline.core.options.ScanKeywords) and shows
the library's default. `takes_read_options` adds them all, and --config, to a verb: the
verb receives one ScanOptions built as flag over config file over default (a flag counts
only when it was given on the command line), and the Config it came from.
"""

from __future__ import annotations

import functools
import inspect
import typing
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import typer

from driftline.cli.app import ENCODING_OPTION
from driftline.core.bytesize import exact_bytes, parse_bytes
from driftline.core.options import (
    DEFAULT_BATCH_BYTES,
    DEFAULT_BATCH_ROWS,
    DEFAULT_CONNECT_TIMEOUT,
    DEFAULT_JOBS,
    DEFAULT_MAX_COLUMNS,
    DEFAULT_MAX_DECOMPRESSED_BYTES,
    DEFAULT_MAX_DECOMPRESSION_RATIO,
    DEFAULT_MAX_EVENTS,
    DEFAULT_MAX_PATHS,
    DEFAULT_MAX_RECORD_BYTES,
    DEFAULT_REQUEST_TIMEOUT,
    DEFAULT_TASK_TIMEOUT,
    Config,
    ScanOptions,
    find_config,
    load_config,
)
from driftline.core.ranges import RANGES
from driftline.core.valuepolicy import MODES

if TYPE_CHECKING:
    from driftline.gate.policy import Policy

CSV_DIALECT_HELP = (
    "Pin the CSV dialect of the files matching GLOB (all CSV/TSV files without it); repeatable, later pins win. "
    "Keys: delimiter (comma, tab, semicolon, pipe, colon, space or a character), quote (double, single, none), "
    "escape (backslash, none), header (yes, no, row-names), skip (lines before the header), lines (lf, crlf, cr). "
    "Keys left out are found from the data. E.g. 'legacy/*.txt:delimiter=pipe,quote=none,header=no'."
)


@dataclass(frozen=True)
class Flag:
    """One shared flag: the keyword it sets, its Python type and its typer declaration."""

    name: str
    annotation: Any
    option: Any


def _int(name: str, default: int | None, flag: str, help: str, *more: str) -> Flag:
    kind: Any = int if default is not None else int | None
    return Flag(name, kind, typer.Option(default, flag, *more, metavar="N", min=1, max=RANGES[name][1], help=help))


def byte_size(option: str, value: object) -> int:
    """A byte size as a person writes it ('64GiB', '64 MiB', '1048576'), within the option's range.

    >>> byte_size("batch_bytes", "64MiB")
    67108864
    """
    try:
        n = value if isinstance(value, int) else parse_bytes(str(value))
    except ValueError as exc:
        raise typer.BadParameter(str(exc)) from None
    low, high = RANGES[option]
    if not low <= n <= high:
        raise typer.BadParameter(f"{n:,} bytes is outside {exact_bytes(int(low))}..{exact_bytes(int(high))}")
    return n


def _bytes(name: str, default: int, help: str) -> Flag:
    flag = "--" + name.replace("_", "-")
    # The default in words ('64 GiB'), as the help shows the others; click would bracket a text default.
    shown = f"{help}  [default: {exact_bytes(default)}]"
    option = typer.Option(
        default, flag, metavar="BYTES", parser=functools.partial(byte_size, name), show_default=False, help=shown
    )
    return Flag(name, int, option)


def _seconds(name: str, default: float, top: int, help: str) -> Flag:
    flag = "--" + name.replace("_", "-")
    return Flag(name, float, typer.Option(default, flag, metavar="SECONDS", min=0.001, max=top, help=help))


READ_FLAGS: tuple[Flag, ...] = (
    Flag(
        "include",
        list[str],
        typer.Option([], "--include", metavar="GLOB", help="Only files whose path or name matches (repeatable)."),
    ),
    Flag(
        "exclude",
        list[str],
        typer.Option([], "--exclude", metavar="GLOB", help="Skip files whose path or name matches (repeatable)."),
    ),
    Flag(
        "where",
        list[str],
        typer.Option(
            [],
            "--where",
            metavar="KEY OP VALUE",
            help="Only key=value partitions that pass, e.g. 'day>=2026-11-01' (repeatable; s3:// listing is "
            "pruned by it).",
        ),
    ),
    Flag(
        "include_hidden",
        bool,
        typer.Option(False, "--hidden", help="Also read files and folders starting with '.' or '_'."),
    ),
    Flag(
        "sniff_unknown",
        bool,
        typer.Option(
            False,
            "--sniff-unknown",
            help="Also read files of other extensions (.txt, .dat...) found in folders whose first bytes look like "
            "JSON, CSV or Parquet; without it they are skipped unread. Files without an extension, and files named "
            "on their own, are always sniffed.",
        ),
    ),
    Flag(
        "follow_links",
        bool,
        typer.Option(
            False,
            "--follow-links",
            help="Follow symbolic links that lead out of the paths given (skipped and listed by default).",
        ),
    ),
    _int("batch_rows", DEFAULT_BATCH_ROWS, "--batch-rows", "Rows per batch: drift is tracked batch by batch."),
    _bytes(
        "batch_bytes",
        DEFAULT_BATCH_BYTES,
        "A batch also ends once its records reach this many bytes of input (bounds memory); e.g. 64MiB.",
    ),
    _int(
        "jobs",
        DEFAULT_JOBS,
        "--jobs",
        "Files read in parallel (processes); 1 reads in this process. At most one per core and per 256 MB of free "
        "memory (a warning says when lowered); a scan of under about a second of reading stays in this process. "
        "Results do not depend on it.",
        "-j",
    ),
    _int("max_errors", None, "--max-errors", "Stop reading new files once this many errors were found."),
    _bytes(
        "max_record_bytes",
        DEFAULT_MAX_RECORD_BYTES,
        "Longer JSON lines / CSV rows are reported, not read.",
    ),
    _bytes(
        "max_decompressed_bytes",
        DEFAULT_MAX_DECOMPRESSED_BYTES,
        "Stop reading a file past this many bytes of content (decompression bombs); rows before are kept.",
    ),
    Flag(
        "max_decompression_ratio",
        float,
        typer.Option(
            DEFAULT_MAX_DECOMPRESSION_RATIO,
            "--max-decompression-ratio",
            metavar="RATIO",
            min=1,
            max=RANGES["max_decompression_ratio"][1],
            help="Stop a compressed file once it expands more than this many times (judged past 16 MiB).",
        ),
    ),
    _int(
        "max_columns",
        DEFAULT_MAX_COLUMNS,
        "--max-columns",
        "A CSV/TSV file with more columns is reported, not read (each column costs a pass per batch).",
    ),
    _int(
        "max_paths",
        DEFAULT_MAX_PATHS,
        "--max-paths",
        "Distinct field paths kept; past it, a warning and the rest counted as other fields.",
    ),
    _int(
        "max_events",
        DEFAULT_MAX_EVENTS,
        "--max-events",
        "Drift events the terminal lists (breaking first); the JSON report (--json) holds them all.",
    ),
    Flag(
        "delimiter",
        str | None,
        typer.Option(None, "--delimiter", metavar="CHAR", help="CSV delimiter; found from the data if not given."),
    ),
    Flag(
        "csv_dialect",
        list[str],
        typer.Option([], "--csv-dialect", metavar="[GLOB:]KEY=VALUE,…", help=CSV_DIALECT_HELP),
    ),
    Flag("encoding", str | None, ENCODING_OPTION),
    Flag(
        "engine",
        str,
        typer.Option(
            "local",
            "--engine",
            metavar="local|dask",
            help="Where files are read: local (processes) or dask (a cluster; install driftline[dask]).",
        ),
    ),
    Flag(
        "scheduler",
        str | None,
        typer.Option(
            None,
            "--scheduler",
            metavar="ADDRESS",
            help="dask scheduler, e.g. tcp://10.0.0.5:8786; without it --engine dask starts --jobs workers on "
            "127.0.0.1.",
        ),
    ),
    Flag(
        "endpoint_url",
        str | None,
        typer.Option(
            None,
            "--endpoint-url",
            metavar="URL",
            help="S3-compatible endpoint for s3:// inputs (else AWS_ENDPOINT_URL).",
        ),
    ),
    Flag(
        "region",
        str | None,
        typer.Option(None, "--region", metavar="NAME", help="Region of the s3:// bucket (else AWS_REGION)."),
    ),
    Flag(
        "anonymous",
        bool,
        typer.Option(False, "--anonymous", help="Read a public s3:// bucket without credentials."),
    ),
    _seconds(
        "connect_timeout",
        DEFAULT_CONNECT_TIMEOUT,
        86_400,
        "Give up connecting to a dask scheduler or an object store after this long (per attempt).",
    ),
    _seconds(
        "request_timeout",
        DEFAULT_REQUEST_TIMEOUT,
        86_400,
        "Give up an object store request that received nothing for this long (per attempt, 4 attempts).",
    ),
    _seconds(
        "task_timeout",
        DEFAULT_TASK_TIMEOUT,
        10_000_000,
        "Stop the scan when a worker task (a file, or a run of small files) runs longer than this.",
    ),
    Flag(
        "example_values",
        str | None,
        typer.Option(
            None,
            "--example-values",
            metavar="|".join(MODES),
            help="Example values in every output: show (default), hide, or hash (a keyed HMAC-SHA256, so a report "
            "can be shared). Also settable as example_values in a config file's [output] table.",
        ),
    ),
    Flag(
        "hash_key_file",
        str | None,
        typer.Option(
            None,
            "--hash-key-file",
            metavar="FILE",
            help="The key for --example-values hash (else the DRIFTLINE_HASH_KEY environment variable).",
        ),
    ),
    Flag(
        "config",
        str | None,
        typer.Option(
            None,
            "--config",
            metavar="FILE",
            help="Config file with [scan], [output], [recommend] and [check] tables (else driftline.toml, or "
            "pyproject.toml's [tool.driftline], in the current folder); flags override it.",
        ),
    ),
)
FLAG_NAMES = tuple(f.name for f in READ_FLAGS)


def policy_of(config: Config) -> Policy | None:
    """The config file's [check] table as the policy of driftline check, or None when it has none."""
    if not config.check:
        return None
    from driftline.gate.policy import policy_from_mapping  # the gate only when there is a table to read

    return policy_from_mapping(config.check, source=config.where("check"))


def options_of(flags: dict[str, Any], given: set[str]) -> tuple[ScanOptions, Config]:
    """The options of a run: the config file's (named, or found here), then the flags given."""
    config_path = flags.get("config")
    config = load_config(config_path if config_path is not None else find_config())
    policy_of(config)  # every table is checked before anything is read, whichever verb runs
    if config.recommend:
        from driftline.recommendation.options import RecommendOptions

        RecommendOptions.from_mapping(config.recommend, source=config.where("recommend"))
    chosen = {k: v for k, v in flags.items() if k in given and k != "config"}
    return config.scan_options().merged(**chosen), config


_CONTEXT = "_read_flags_context"  # typer hands the command's context to a parameter of this type


def _given(ctx: typer.Context, name: str) -> bool:
    """Whether a flag was given (on the command line or by environment), not left at its default."""
    source = ctx.get_parameter_source(name)
    return source is not None and source.name not in ("DEFAULT", "DEFAULT_MAP")


def takes_read_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Give a verb every read flag; it is called with options=ScanOptions and config=Config instead."""
    hints = typing.get_type_hints(fn)
    own = [p for p in inspect.signature(fn).parameters.values() if p.name not in ("options", "config")]
    extra = [
        inspect.Parameter(f.name, inspect.Parameter.KEYWORD_ONLY, default=f.option, annotation=f.annotation)
        for f in READ_FLAGS
    ]

    @functools.wraps(fn)
    def verb(**kwargs: Any) -> Any:
        flags = {name: kwargs.pop(name) for name in FLAG_NAMES}
        ctx: typer.Context = kwargs.pop(_CONTEXT)
        given = {n for n in FLAG_NAMES if _given(ctx, n)}
        options, config = options_of(flags, given)
        return fn(options=options, config=config, **kwargs)

    context = inspect.Parameter(_CONTEXT, inspect.Parameter.KEYWORD_ONLY, annotation=typer.Context)
    verb.__signature__ = inspect.Signature([*own, *extra, context])  # type: ignore[attr-defined]
    verb.__annotations__ = {
        _CONTEXT: typer.Context,
        **{p.name: hints[p.name] for p in own},
        **{f.name: f.annotation for f in READ_FLAGS},
        "return": hints.get("return"),
    }
    return verb
