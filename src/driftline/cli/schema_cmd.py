"""`driftline schema`: recommend a unified schema with cast rules, and write it as schema files."""

from __future__ import annotations

import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import typer

import driftline
from driftline.cli.app import EXIT_VIOLATION, PlainHelp, app, err_console, handles_errors, out_console
from driftline.cli.read_flags import takes_read_options
from driftline.core.options import Config, ScanOptions
from driftline.core.schemaformats import DEFAULT_DIALECT, DIALECTS, FORMATS
from driftline.emit.atomic import is_stdout, own_descriptor
from driftline.emit.safe import safe_text
from driftline.emit.targets import WRITE_INSIDE, check_targets
from driftline.errors import InputPathError, OptionError, OutputError, PolicyError

# The recommender, the schema writers (sqlglot), the gate's report sets, rich and the readers are
# imported where they are used: `driftline schema --help` needs none of them (tests/api/test_imports.py).
if TYPE_CHECKING:
    from rich.console import Console

    from driftline.cli.schema_datasets import Targets
    from driftline.recommendation import RecommendOptions


SCHEMA_HELP = """Recommend one schema for files and folders (or a saved scan report), with a cast
rule per field and what each rule would null or change, counted by the scan.

The terminal shows the schema and every rule that does something. --to writes the schema
as a file in an open standard; --rules writes the cast rules as JSON (docs/rules.schema.json).
docs/recommend.md describes the rules, the options and the formats.

Examples:

  driftline schema landing/ --to json-schema --out landing.schema.json

  driftline schema landing/ --to arrow --out landing.arrow-schema

  driftline schema landing/ --to sql --table raw_readings --out create.sql

  driftline schema landing/ --to sql --dialect postgres --flatten __

  driftline schema landing/ --to avro --out landing.avsc

  driftline schema landing/ --to iceberg --out landing.iceberg.json   (needs driftline[iceberg])

  driftline schema landing/ --to spark --out landing.spark.json

  driftline schema landing/ --rules rules.json

  driftline schema report.json --to sql          (a saved `driftline scan --json` report)

A folder holding several tables (datasets: docs/datasets.md) gets one schema per dataset:
--out DIR/ (and --rules DIR/) writes one file per dataset into DIR, named after the dataset
with '/' as '.' (readings.schema.json, crm.orders.schema.json), each equal to the file
`driftline schema` writes for that dataset's folder alone. A file name or standard output
takes one dataset: pick it with --dataset NAME. A saved report set (`driftline scan ROOT
--json FILE` on such a folder) works as the folder does. A folder that is one table reads as
it always did.

  driftline schema landing/ --to json-schema --out schemas/

  driftline schema landing/ --dataset readings --to sql --out readings.sql

  driftline schema landing/ --one-table --to avro       (the whole folder as one table)

Exit codes: 0 done; 1 --strict and some field needs a lossy or conflicting rule (they are
listed; with several datasets, the worst over them, and a conflicting dataset's files are not
written); 2 usage or input error (unknown --to, bad option or config, a path that does not
exist, a report of another format version, an unwritable output, several datasets and one
output file, every file of a dataset unreadable).
"""


def _options(
    config: Config,
    strict: bool,
    prefer_decimal: bool,
    timestamp_unit: str | None,
    timestamp_zone: str | None,
    parse_strings: str | None,
    null_tokens: str | None,
    max_null_share: float | None,
    min_field_share: float | None,
    leading_zeros: str | None = None,
) -> RecommendOptions:
    from driftline.recommendation import RecommendOptions

    # The config file's [recommend] table first, then the flags that were given on the command line.
    source = config.where("recommend")
    base = RecommendOptions.from_mapping(config.recommend, source=source) if config.recommend else RecommendOptions()
    return base.replace(
        mode="strict" if strict else None,
        prefer_decimal=True if prefer_decimal else None,
        timestamp_unit=timestamp_unit,
        timestamp_zone=timestamp_zone,
        parse_strings=parse_strings,
        leading_zeros=leading_zeros,
        null_tokens=null_tokens,
        max_null_share=max_null_share,
        min_field_share=min_field_share,
    )


def _check_out(target: str | None, what: str, *, folder_ok: bool = False) -> None:
    """Refuse an unwritable output before any scanning is done (folder_ok: a folder, for one file per
    dataset, must exist or have a parent folder that does)."""
    from driftline.emit.dataset_files import is_folder_target

    if target is None or target == "-" or own_descriptor(target) is not None:
        return
    if folder_ok and is_folder_target(target):
        parent = Path(target).resolve().parent
        if not Path(target).is_dir() and not parent.is_dir():
            raise OutputError(f"cannot write into {target!r} ({what}): folder {str(parent)!r} does not exist")
        return
    folder = Path(target).resolve().parent
    if not folder.is_dir():
        raise OutputError(f"cannot write {target!r} ({what}): folder {str(folder)!r} does not exist")
    if Path(target).is_dir():
        raise OutputError(f"cannot write {target!r} ({what}): it is a folder; give a file name")


@app.command("schema", cls=PlainHelp, help=SCHEMA_HELP, no_args_is_help=True)
@handles_errors
@takes_read_options
def schema_command(
    paths: list[str] = typer.Argument(
        ..., metavar="PATH...", help="Data files, folders or globs; or one saved scan report (or report set)."
    ),
    to: str | None = typer.Option(
        None, "--to", metavar="FORMAT", help=f"Write the schema as one of: {', '.join(FORMATS)}."
    ),
    out: str = typer.Option(
        "-",
        "--out",
        "-o",
        metavar="FILE|DIR/|-",
        help="Where --to writes ('-' for stdout; DIR/: one file per dataset).",
    ),
    table: str | None = typer.Option(
        None, "--table", metavar="NAME", help="Table name (SQL) or record name (Avro); default: the root folder's name."
    ),
    dialect: str | None = typer.Option(
        None,
        "--dialect",
        metavar="NAME",
        help=f"SQL dialect of --to sql: {', '.join(DIALECTS)} (default {DEFAULT_DIALECT}).",
    ),
    flatten: str | None = typer.Option(
        None,
        "--flatten",
        metavar="SEP",
        help="--to sql: each struct field a column of its own, its names joined by SEP (gps__alt with __); "
        "default: struct columns.",
    ),
    rules: str | None = typer.Option(
        None, "--rules", metavar="FILE|DIR/|-", help="Write the cast rules as JSON (DIR/: one file per dataset)."
    ),
    strict: bool = typer.Option(False, "--strict", help="A conflict is an error: exit 1 and list the fields."),
    prefer_decimal: bool = typer.Option(False, "--prefer-decimal", help="Decimal-looking strings become decimal(p,s)."),
    timestamp_unit: str | None = typer.Option(
        None, "--timestamp-unit", metavar="s|ms|us|ns", help="Unit of timestamps parsed from strings (default us)."
    ),
    timestamp_zone: str | None = typer.Option(
        None, "--timestamp-zone", metavar="ZONE", help="Zone of zoned timestamps, assumed for local ones (default UTC)."
    ),
    parse_strings: str | None = typer.Option(
        None,
        "--parse-strings",
        metavar="mixed|always",
        help="Parse number-looking strings only beside real numbers (mixed).",
    ),
    leading_zeros: str | None = typer.Option(
        None,
        "--leading-zeros",
        metavar="keep|parse",
        help="Digits with leading zeros (09001) stay strings (keep), or "
        "become numbers, each counted as changed (parse).",
    ),
    null_tokens: str | None = typer.Option(
        None,
        "--null-tokens",
        metavar="parse|always|never",
        help="Where null tokens such as 'n/a' become null (default parse).",
    ),
    max_null_share: float | None = typer.Option(
        None, "--max-null-share", metavar="SHARE", help="Null up to this share of values that do not parse (default 0)."
    ),
    min_field_share: float | None = typer.Option(
        None, "--min-field-share", metavar="SHARE", help="Drop fields present in less than this share (0: keep all)."
    ),
    json_mode: str | None = typer.Option(
        None,
        "--json-mode",
        metavar="permissive|strict",
        help="JSON Schema of the data as it arrives, or after the rules (default: the --strict setting).",
    ),
    bounds_from_sample: bool = typer.Option(
        False,
        "--bounds-from-sample",
        help="Enforce the longest string and the number range seen (maxLength, minimum/maximum, "
        "VARCHAR(n)). Warning: the sample is not the contract; the next longer id or larger value "
        "then fails. By default these figures are only described.",
    ),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal summary."),
    dataset: list[str] | None = typer.Option(
        None,
        "--dataset",
        metavar="NAME",
        help="Only this dataset of the root (repeatable); `driftline scan ROOT` names them.",
    ),
    one_table: bool = typer.Option(
        False, "--one-table", help="Read the whole root as one table, even when it holds several datasets."
    ),
    write_inside: bool = typer.Option(
        False,
        WRITE_INSIDE,
        help="Let --out/--rules go inside a scanned folder (a new file or an earlier "
        "driftline output, never a data file).",
    ),
    *,
    options: ScanOptions,
    config: Config,
) -> None:
    from driftline.cli.scan_cmd import _all_failed as all_failed
    from driftline.cli.schema_datasets import Targets, by_dataset, picked_from_set
    from driftline.emit.dataset_files import is_folder_target
    from driftline.emit.landing_text import one_table_note
    from driftline.emit.schemas.sql import check_dialect, check_flatten
    from driftline.gate.dataset_diff import is_report_set

    if to is not None and to not in FORMATS:
        raise PolicyError(f"unknown --to {to!r}; choose one of {', '.join(FORMATS)}")
    if json_mode is not None and json_mode not in ("permissive", "strict"):
        raise PolicyError(f"unknown --json-mode {json_mode!r}; choose permissive or strict")
    if dialect is not None:
        check_dialect(dialect)
    check_flatten(flatten)
    sql: dict[str, Any] = {"dialect": dialect, "flatten": flatten, "bounds_from_sample": bounds_from_sample}
    from_set = not one_table and len(paths) == 1 and is_report_set(paths[0])
    several = not one_table and (_one_folder(paths) or from_set)
    if dataset and not several:
        raise OptionError("--dataset picks datasets of one root folder: give one folder, without --one-table")
    targets = Targets(out if to else None, rules)
    check_targets(
        [(option, None if several and is_folder_target(t) else t) for option, t in targets.given()],
        scanned=paths,
        named=[config.file],
        write_inside=write_inside,
        include_hidden=options.include_hidden,
    )
    if to == "arrow" and is_stdout(out) and sys.stdout.isatty():
        raise OutputError("--to arrow writes a binary IPC message; give --out FILE (or use --to arrow-text)")
    for option, target in targets.given():
        _check_out(target, option, folder_ok=several)
    opts = _options(
        config,
        strict,
        prefer_decimal,
        timestamp_unit,
        timestamp_zone,
        parse_strings,
        null_tokens,
        max_null_share,
        min_field_share,
        leading_zeros,
    )
    to_stdout = any(is_stdout(t) for _, t in targets.given())
    console = err_console() if to_stdout else out_console(highlight=False)
    if not several:
        rec = _recommended(lambda: driftline.recommend(paths, options=opts, scan_options=options), console, quiet)
        return _write_one(rec, to, targets, table, json_mode, console, quiet, **sql)
    if from_set:  # a saved report set (`driftline scan ROOT --json FILE`): its datasets as they were read
        landing = picked_from_set(driftline.load_report_set(paths[0]), dataset or None, options)
        return by_dataset(
            landing, opts, to, targets, table, json_mode, console, quiet, write_inside, options, paths, **sql
        )
    # One root folder: split into datasets as `driftline scan` does (the verb is that library call).
    landing = driftline.scan_datasets(paths[0], dataset=dataset or None, whole_if_one=True, options=options)
    if landing.whole is not None:
        for option, target in targets.given():
            if is_folder_target(target):
                raise OutputError(
                    f"{option} {target!r} is a folder, for one file per dataset, but {paths[0]!r} reads as one "
                    "table; give a file name (or --dataset NAME)"
                )
        note = one_table_note(landing)
        if note and not quiet:
            err_console().print(note, markup=False)
        whole = landing.whole
        if all_failed(whole):
            raise InputPathError(f"nothing readable: {whole.unread_text()} (driftline scan shows the problems)")
        rec = _recommended(lambda: driftline.recommend(whole, options=opts), console, quiet)
        return _write_one(rec, to, targets, table, json_mode, console, quiet, **sql)
    by_dataset(landing, opts, to, targets, table, json_mode, console, quiet, write_inside, options, paths, **sql)


def _one_folder(paths: list[str]) -> bool:
    """Whether the paths name one local folder: the only case split into datasets (as scan does)."""
    from driftline.sources.remote import is_url

    return len(paths) == 1 and not is_url(paths[0]) and os.path.isdir(paths[0])


def _recommended(
    make: Callable[[], driftline.Recommendation], console: Console, quiet: bool
) -> driftline.Recommendation:
    """The recommendation; on a conflict in strict mode, the summary and the conflicts, then exit 1."""
    from driftline.emit.schemas import summary
    from driftline.recommendation import SchemaConflictError

    try:
        return make()
    except SchemaConflictError as exc:
        if not quiet:
            summary.render(exc.recommendation, console)
        err_console().print(f"error: {safe_text(exc, None)}", markup=False)
        for plan in exc.conflicts:
            err_console().print("  " + summary.rule_line(plan), markup=False)
        raise typer.Exit(EXIT_VIOLATION) from None


def _write_one(
    rec: driftline.Recommendation,
    to: str | None,
    targets: Targets,
    table: str | None,
    json_mode: str | None,
    console: Console,
    quiet: bool,
    *,
    dialect: str | None = None,
    flatten: str | None = None,
    bounds_from_sample: bool = False,
) -> None:
    from driftline.emit.schemas import summary
    from driftline.emit.schemas.files import write_file

    files = [(targets.out, to)] if to is not None else []
    for path, fmt in [*files, (targets.rules, "rules")]:
        if path is not None:
            write_file(
                rec,
                path,
                fmt,  # type: ignore[arg-type]
                table=table,
                json_mode=json_mode,  # type: ignore[arg-type]
                dialect=dialect,
                flatten=flatten,
                bounds_from_sample=bounds_from_sample,
            )
    if not quiet:
        summary.render(rec, console)
        for target, what in ((targets.out, to), (targets.rules, "cast rules")):
            if target is not None and not is_stdout(target):
                console.print(f"{what} written to {safe_text(target)}", markup=False)
