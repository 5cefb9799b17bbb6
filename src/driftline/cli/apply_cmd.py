"""`driftline apply`: cast a landing folder into a typed Parquet table, with a quarantine and a
reconciliation (a thin layer over driftline.apply)."""

from __future__ import annotations

import sys

import typer

import driftline
from driftline.cli.app import EXIT_VIOLATION, PlainHelp, app, handles_errors
from driftline.cli.read_flags import takes_read_options
from driftline.core.jsontypes import JSONObject
from driftline.core.options import Config, ScanOptions
from driftline.core.words import count
from driftline.emit.atomic import write_output
from driftline.emit.safe import safe_text

APPLY_HELP = """Cast a landing folder with the recommended cast rules (or a saved rules file)
into a typed Parquet table, partitioned like the input, with exactly the recommended schema.

Every value a rule turns into null or changes goes to OUT/_quarantine/ with its file,
partition, row, line, field path, raw text, rule and reason; a row that cannot be cast at
all goes whole to OUT/_rejected/. OUT/_reconciliation.json accounts for every row (in =
written + rejected) and compares the values quarantined with the loss the recommendation
predicted: any difference is exit 1, naming the field and the files. docs/apply.md
describes the layout.

Examples:

  driftline apply landing/ --out clean/

  driftline apply landing/ --rules rules.json --out clean/

  driftline apply landing/ --out clean/ --state .apply-state

  driftline apply landing/ --out clean/ --partition-by day

  driftline apply landing/ --out clean/ --table-format delta   (the deltalake package)

  driftline apply s3://lake/landing/ --out s3://lake/clean --engine dask
"""


def _summary(doc: JSONObject) -> str:
    rows = doc["rows"]
    assert isinstance(rows, dict)
    lines = [
        f"rows: {rows['in']:,} in = {rows['written']:,} written + {rows['rejected']:,} rejected",
    ]
    effects = doc["effects"]
    assert isinstance(effects, list)
    for e in effects:
        assert isinstance(e, dict)
        got = e.get("quarantined", e.get("counted"))
        verb = "quarantined" if "quarantined" in e else "counted"
        want = "not counted by the scan" if e["predicted"] is None else f"predicted {e['predicted']:,}"
        mark = "ok" if e["matches"] else "DIFFERS"
        lines.append(f"  {mark:7} {safe_text(e['path'], None)}  {e['cause']}: {verb} {got:,}, {want}")
    differences = doc["differences"]
    assert isinstance(differences, list)
    for d in differences:
        lines.append(f"difference: {safe_text(d, None)}")
    return "\n".join(lines)


@app.command("apply", cls=PlainHelp, help=APPLY_HELP, no_args_is_help=True)
@handles_errors
@takes_read_options
def apply_command(
    paths: list[str] = typer.Argument(..., metavar="LANDING...", help="The landing folders (or files) to cast."),
    out: str = typer.Option(
        ..., "--out", "-o", metavar="DIR", help="The output folder or s3:// prefix (new, empty, or apply's own)."
    ),
    rules: str | None = typer.Option(
        None,
        "--rules",
        metavar="FILE",
        help="Cast with this rules file (driftline schema --rules) instead of a scan's.",
    ),
    state: str | None = typer.Option(
        None, "--state", metavar="FILE", help="Remember the files written; rewrite only partitions whose files changed."
    ),
    partition_by: list[str] = typer.Option(
        [],
        "--partition-by",
        metavar="KEY",
        help="Partition by these folder keys or columns (repeat, or KEY,KEY) instead of the input's folders.",
    ),
    table_format: str = typer.Option(
        "parquet", "--table-format", metavar="parquet|delta", help="Parquet files, or a Delta Lake table (deltalake)."
    ),
    options: ScanOptions | None = None,
    config: Config | None = None,
) -> None:
    keys = [k.strip() for given in partition_by for k in given.split(",") if k.strip()]
    result = driftline.apply(
        paths, out=out, rules=rules, state=state, partition_by=keys, table_format=table_format, options=options
    )
    kept = f"; {count(len(result.kept), 'partition')} unchanged, kept" if result.kept else ""
    write_output(
        "-",
        f"wrote {count(len(result.written), 'partition')} to {safe_text(str(result.out), None)}{kept}\n"
        + _summary(result.reconciliation)
        + "\n",
    )
    if not result.matches:
        sys.stderr.write("error: the outcome differs from the recommendation's prediction (see above)\n")
        raise typer.Exit(EXIT_VIOLATION)
