"""`python -m driftline.cli` runs the command line."""

from driftline.cli import main

main()
