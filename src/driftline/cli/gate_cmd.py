"""`driftline check` and `driftline diff`: gate a pipeline on a baseline, or show what changed."""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

import typer

import driftline
from driftline.cli.app import EXIT_USAGE, EXIT_VIOLATION, PlainHelp, app, err_console, handles_errors, out_console
from driftline.cli.read_flags import policy_of, takes_read_options
from driftline.cli.scan_cmd import _Bar  # the scan's progress bar: stderr, terminals only
from driftline.core.options import Config, ScanOptions
from driftline.emit.atomic import is_stdout, write_output
from driftline.emit.safe import safe_text
from driftline.emit.targets import WRITE_INSIDE, check_targets
from driftline.errors import InputPathError
from driftline.gate.diff_kinds import DEFAULT_NULL_POINTS, DIFF_FORMAT, DIFF_KINDS, DIFF_VERSION
from driftline.gate.policy import ACTION_MEANING, key_help

# The gate's comparisons and renderers (and the profile, pyarrow, rich) are imported when a verb
# runs: its --help needs only the names above.
if TYPE_CHECKING:
    from driftline.gate.dataset_diff import DatasetDiff
    from driftline.gate.diff import Diff

EXIT_CODES = """Exit codes:

\b
  0  passed: no policy violation (warnings are allowed)
  1  a policy violation: at least one change the policy says "fail" to
  2  usage or input error: a bad option, an unknown policy key or value, a missing,
     unreadable or damaged path, baseline or policy (the message names the file and a
     JSON pointer), an unwritable output, an output aimed at an input
"""


def _policy_table() -> str:
    width = max(len(k) for k, _, _ in key_help())
    lines = [f"  {k:<{width}}  {d:<7} {m}" for k, d, m in key_help()]
    actions = "; ".join(f"{a} {m}" for a, m in ACTION_MEANING.items())
    return (
        "Policy keys (a TOML file of flat `key = value` lines; defaults shown). Actions: "
        f"{actions}.\n\n\b\n" + "\n".join(lines) + "\n"
    )


CHECK_HELP = f"""Check scanned data against a baseline under a policy; exit 1 on a violation.

The baseline is a JSON Schema 2020-12 file (as `driftline schema --to json-schema` writes
it; the x-driftline annotation adds the Arrow type and cast rule), a cast-rules file
(`driftline schema --rules`) or a saved scan report (`driftline scan --json`). PATHS may
be data files, folders or globs, or one saved report.

The terminal shows the verdict first, then each violation and warning with its field,
change, file, partition, row and an example value.

Examples:

\b
  driftline check landing/ --baseline contract.schema.json --policy gate.toml
  driftline check landing/ --baseline contract.schema.json --state .driftline-state --junit gate.xml

A folder holding several tables (datasets: docs/datasets.md) is checked dataset by dataset
against one baseline per dataset: --baseline DIR holds <dataset>.schema.json,
<dataset>.rules.json or <dataset>.report.json (a '/' in a dataset's name written '.'), or
the policy file names them in a [baselines] table. Each dataset gets its verdict under a
heading, then the overall one (the worst); --json writes a verdict set, --junit one
testsuite per dataset. A dataset no baseline names is a warning ([datasets] no_baseline =
"fail" makes it a failure); a baseline naming no dataset of the root is a warning. A root
that is one table is checked against --baseline FILE as before.

\b
  driftline check landing/ --baseline baselines/
  driftline check landing/ --baseline baselines/readings.schema.json --dataset readings
  driftline check landing/ --baseline baselines/readings.schema.json --one-table

{_policy_table()}
With --state FILE only new or changed files are read (same relative path, size and
modification time; with --verify also the same content hash); removed files drop out.
The result equals a full rescan. A damaged state file is set aside (<name>.damaged) and
every file is read again, with a warning; a foreign one is an error; --rebuild starts over.
Checked dataset by dataset, the state records each file's dataset, and a file found in
another dataset than before (or among the loose files) is reported: changed_dataset.

{EXIT_CODES}"""

DIFF_KINDS_TEXT = "\n".join(f"  {k:<15} {v}" for k, v in DIFF_KINDS.items())

DIFF_HELP = f"""Show which fields changed between two sides, or partition after partition.

A side is a saved scan report or data paths (files, folders, globs). With one side and
--by KEY, each value of partition KEY is compared with the value before it.

Examples:

\b
  driftline diff yesterday-report.json landing/day=2026-11-30/
  driftline diff landing/ --by day
  driftline diff a.json b.json --json -

Two folders that each hold several tables (datasets: docs/datasets.md), or two report sets
(`driftline scan ROOT --json FILE`), are compared dataset by dataset: an overall line, the
datasets found on one side only, then each dataset's changes under a heading `dataset NAME`.
When either side is one table, both are read as one table, as --one-table reads them.

\b
  driftline diff landing/ landing-copy/

Changes listed:

\b
{DIFF_KINDS_TEXT}

Exit codes: 0 the diff was made (changes are information, unless --fail-on-change); 1 with
--fail-on-change, the sides differ (a change listed, or a dataset on one side only);
2 usage or input error.
"""


_INSIDE = typer.Option(
    False,
    WRITE_INSIDE,
    help="Let outputs go inside a scanned folder (a new file or an earlier "
    "driftline output, never a data file); scans leave them out.",
)


@app.command("check", cls=PlainHelp, help=CHECK_HELP, no_args_is_help=True)
@handles_errors
@takes_read_options
def check_command(
    paths: list[str] = typer.Argument(
        ..., metavar="PATH...", help="Data files, folders or globs; or one saved scan report."
    ),
    baseline: str | None = typer.Option(
        None,
        "--baseline",
        "-b",
        metavar="FILE|DIR",
        help="JSON Schema, cast-rules file or saved scan report to check against; for a root of several "
        "datasets, a folder of one baseline per dataset (<dataset>.schema.json, '/' in a name as '.'). "
        "Without it, the policy file's [baselines] table.",
    ),
    policy: str | None = typer.Option(
        None,
        "--policy",
        "-p",
        metavar="FILE",
        help="TOML policy file (keys below); else the config file's [check] table; safe defaults when neither.",
    ),
    json_out: str | None = typer.Option(None, "--json", metavar="FILE|-", help="Write the verdict as JSON."),
    junit: str | None = typer.Option(
        None, "--junit", metavar="FILE|-", help="Write JUnit XML: one test case per policy rule."
    ),
    state: str | None = typer.Option(
        None, "--state", metavar="FILE", help="Incremental state: read only new or changed files."
    ),
    verify: bool = typer.Option(False, "--verify", help="With --state: also compare content hashes."),
    rebuild: bool = typer.Option(False, "--rebuild", help="With --state: ignore the old state and start over."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal summary; only the exit code and files."),
    write_inside: bool = _INSIDE,
    dataset: list[str] | None = typer.Option(
        None,
        "--dataset",
        metavar="NAME",
        help="Check only this dataset of the root (repeatable); `driftline scan ROOT` names them.",
    ),
    one_table: bool = typer.Option(
        False, "--one-table", help="Check the whole root as one table, even when it holds several datasets."
    ),
    *,
    options: ScanOptions,
    config: Config,
) -> None:
    import orjson

    from driftline.gate.verdict import junit_xml, render_split
    from driftline.gate.verdict import render as render_verdict

    if (verify or rebuild) and state is None:
        raise InputPathError("--verify and --rebuild work on a state file; add --state FILE")
    check_targets(
        [("--json", json_out), ("--junit", junit), ("--state", state)],
        scanned=paths,
        named=[baseline, policy, config.file, *_baseline_files(baseline)],
        write_inside=write_inside,
        include_hidden=options.include_hidden,
    )
    rules = policy if policy is not None else policy_of(config)
    bar = _Bar(sys.stderr.isatty() and not quiet)
    try:
        verdict = driftline.check(
            paths,
            baseline=baseline,
            policy=rules,
            state=state,
            verify=verify,
            rebuild=rebuild,
            write_inside=write_inside,
            dataset=dataset or None,
            one_table=one_table,
            options=options,
            progress=bar,
        )
    finally:
        bar.close()
    if json_out is not None:
        write_output(json_out, orjson.dumps(verdict.to_json(), option=orjson.OPT_INDENT_2) + b"\n")
    if junit is not None:
        write_output(junit, junit_xml(verdict))
    if not quiet:
        to_stdout = any(t is not None and is_stdout(t) for t in (json_out, junit))
        console = err_console() if to_stdout else out_console(highlight=False)
        (render_split if verdict.split else render_verdict)(verdict, console)
    raise typer.Exit(verdict.exit_code)


def _baseline_files(baseline: str | None) -> list[str]:
    """The baseline files of a folder of baselines (one per dataset): inputs no output may replace."""
    from driftline.gate.baselines import folder_baselines

    return list(folder_baselines(baseline).values()) if baseline is not None and os.path.isdir(baseline) else []


@app.command("diff", cls=PlainHelp, help=DIFF_HELP, no_args_is_help=True)
@handles_errors
@takes_read_options
def diff_command(
    sides: list[str] = typer.Argument(
        ..., metavar="BEFORE [AFTER]", help="Two sides (reports or paths), or one side with --by."
    ),
    by: str | None = typer.Option(None, "--by", metavar="KEY", help="Compare consecutive values of partition KEY."),
    json_out: str | None = typer.Option(None, "--json", metavar="FILE|-", help="Write the changes as JSON."),
    null_points: float = typer.Option(
        DEFAULT_NULL_POINTS,
        "--null-points",
        metavar="POINTS",
        min=0.0,
        max=100.0,
        help="Smallest change of null share listed, in percentage points.",
    ),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No terminal output (use with --json)."),
    one_table: bool = typer.Option(
        False, "--one-table", help="Read each side as one table, even when both hold several datasets."
    ),
    write_inside: bool = _INSIDE,
    fail_on_change: bool = typer.Option(
        False, "--fail-on-change", help="Exit 1 when the sides differ (for a pipeline step)."
    ),
    *,
    options: ScanOptions,
    config: Config,
) -> None:
    import orjson

    from driftline.core import jsonnum
    from driftline.gate.dataset_diff import DatasetDiff, diff_by_dataset
    from driftline.gate.diff import render

    check_targets(
        [("--json", json_out)],
        scanned=sides,
        named=[config.file],
        write_inside=write_inside,
        include_hidden=options.include_hidden,
    )
    diffs: tuple[Diff, ...]
    if by is not None:
        if len(sides) != 1:
            raise InputPathError(f"--by compares partitions of one side; got {len(sides)} sides")
        diffs = driftline.diff(sides[0], by=by, min_null_points=null_points, options=options)
    else:
        if len(sides) != 2:
            raise InputPathError(f"diff takes two sides (reports or paths), or one with --by KEY; got {len(sides)}")
        if one_table:
            diffs = (driftline.diff(sides[0], sides[1], min_null_points=null_points, options=options),)
        else:  # dataset by dataset when both sides hold several (docs/datasets.md); else as one table each
            found = diff_by_dataset(sides[0], sides[1], min_null_points=null_points, options=options)
            if isinstance(found, DatasetDiff):
                _datasets_diff(found, json_out, quiet)
                differ = found.only_before or found.only_after or any(d.changes for d in found.diffs.values())
                if fail_on_change and differ:
                    raise typer.Exit(EXIT_VIOLATION)
                return
            diffs = (found,)
    if json_out is not None:
        doc = {"format": DIFF_FORMAT, "version": DIFF_VERSION, "by": by, "diffs": [d.to_json() for d in diffs]}
        write_output(json_out, jsonnum.dumps(doc, option=orjson.OPT_INDENT_2) + b"\n")
    if not quiet:
        console = err_console() if json_out is not None and is_stdout(json_out) else out_console(highlight=False)
        if not diffs:
            console.print(f"only one value of partition {safe_text(by)}: nothing to compare", markup=False)
        render(diffs, console)
        if json_out is not None and not is_stdout(json_out):
            console.print(f"diff written to {safe_text(Path(json_out))}", markup=False)
    if fail_on_change and any(d.changes for d in diffs):
        raise typer.Exit(EXIT_VIOLATION)


def _datasets_diff(found: DatasetDiff, json_out: str | None, quiet: bool) -> None:
    """Two roots (or report sets) compared dataset by dataset: the diff document with each diff's
    dataset and the names on one side only; the overall line, then each dataset under a heading."""
    import orjson

    from driftline.core import jsonnum
    from driftline.gate.dataset_diff import render_datasets

    if json_out is not None:
        doc = {"format": DIFF_FORMAT, "version": DIFF_VERSION, "by": None, **found.to_json()}
        write_output(json_out, jsonnum.dumps(doc, option=orjson.OPT_INDENT_2) + b"\n")
    if not quiet:
        console = err_console() if json_out is not None and is_stdout(json_out) else out_console(highlight=False)
        render_datasets(found, console)
        if json_out is not None and not is_stdout(json_out):
            console.print(f"diff written to {safe_text(Path(json_out))}", markup=False)


__all__ = ["EXIT_USAGE", "check_command", "diff_command"]
