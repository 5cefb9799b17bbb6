"""The command line: a thin layer over the library. Nothing below driftline.cli imports it.

Exit codes (all verbs):
  0  done (scan: the data could be read; drift is information, not failure)
  1  check: a policy violation
  2  usage or input error: bad option, missing path, nothing readable, unwritable output
"""

from __future__ import annotations

import sys

# Verbs register themselves on `app` when imported.
from driftline.cli import apply_cmd, gate_cmd, scan_cmd, schema_cmd  # noqa: F401
from driftline.cli.app import app


def main() -> None:
    """Console-script entry point."""
    try:
        app(prog_name="driftline")
    except BrokenPipeError:  # `driftline scan … | head` is fine
        sys.stderr.close()
        sys.exit(0)


__all__ = ["app", "main"]
