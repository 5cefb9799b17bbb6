"""The --example-values and --hash-key-file options, shared by every verb that writes values."""

from __future__ import annotations

import typer

from driftline.conceal import MODES, ValuePolicy, output_values, value_policy

EXAMPLE_VALUES = typer.Option(
    None,
    "--example-values",
    metavar="|".join(MODES),
    help="Example values in every output: show (default), hide, or hash (a keyed HMAC-SHA256, so a report can be "
    "shared). Also settable as example_values in a config file's [output] table.",
)
HASH_KEY_FILE = typer.Option(
    None,
    "--hash-key-file",
    metavar="FILE",
    help="The key for --example-values hash (else the DRIFTLINE_HASH_KEY environment variable).",
)


def values_of(mode: str | None, key_file: str | None, config: str | None = None) -> ValuePolicy:
    """The flag when given, else the config file's [output] table, else show."""
    if mode is not None:
        return value_policy(mode, key_file=key_file)
    return output_values(config) or value_policy("show")
