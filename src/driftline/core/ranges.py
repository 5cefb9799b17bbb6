"""The range of every numeric option, checked in one place for the library and the CLI.

A value outside its range, or of the wrong type, is an OptionError (a DriftlineError, so
the CLI prints it and exits 2), never a traceback from deep inside a reader or from the
JSON writer (orjson refuses integers past 64 bits).

>>> check("batch_rows", 10)
10
>>> check("batch_rows", 10**20)
Traceback (most recent call last):
driftline.errors.OptionError: batch_rows must be an integer from 1 to 1,099,511,627,776, got 100000000000000000000
"""

from __future__ import annotations

import math

from driftline.errors import OptionError

# name → (lowest, highest). The highest values are far past any real use and keep every
# count inside a signed 64-bit integer (the report's JSON numbers, Arrow's lengths).
RANGES: dict[str, tuple[int | float, int | float]] = {
    "batch_rows": (1, 2**40),
    "batch_bytes": (1, 2**30),  # Arrow's binary offsets are 32-bit: a batch's text stays below 2 GiB
    "max_record_bytes": (1, 2**40),
    "max_decompressed_bytes": (1, 2**62),
    "max_decompression_ratio": (1, 1e12),
    "max_columns": (1, 10**7),
    "max_paths": (1, 10**7),
    "max_events": (1, 10**9),
    "max_errors": (1, 2**62),
    "jobs": (1, 2**20),
}
_FLOATS = {"max_decompression_ratio"}


def check(name: str, value: object) -> int | float:
    """value when it is a number of the right kind within RANGES[name]; else OptionError."""
    lo, hi = RANGES[name]
    kind = "a number" if name in _FLOATS else "an integer"
    ok_type = isinstance(value, int | float) if name in _FLOATS else isinstance(value, int)
    if isinstance(value, bool) or not ok_type:
        raise OptionError(f"{name} must be {kind} from {lo:,} to {hi:,}, got {value!r}")
    assert isinstance(value, int | float)
    if not (math.isfinite(value) and lo <= value <= hi):
        raise OptionError(f"{name} must be {kind} from {lo:,} to {hi:,}, got {value!r}")
    return value
