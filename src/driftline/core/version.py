"""The version of driftline: one home, read by the outputs that record it and by --version."""

__version__ = "0.1.0"
