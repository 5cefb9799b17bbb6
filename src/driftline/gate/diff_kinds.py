"""The diff's vocabulary: its kinds of change, its default threshold and its document's format.

A module of its own, free of the profile and the type lattice: `driftline diff --help` lists them.
"""

from __future__ import annotations

# Kinds of change, in the order they are listed.
DIFF_KINDS: dict[str, str] = {
    "added": "a field the second side has and the first has not",
    "removed": "a field the first side has and the second has not",
    "type-changed": "values of another kind of type: the two types meet only in a union",
    "widened": "the type grew to a wider one of the same kind (int64 → float64)",
    "narrowed": "the type shrank to a narrower one (float64 → int64)",
    "newly-nullable": "null or absent values where the first side had none",
    "null-share": "the share of null or absent values moved by at least the threshold (points)",
    "content-class": "string content classes appeared or disappeared",
}
DEFAULT_NULL_POINTS = 1.0

DIFF_FORMAT, DIFF_VERSION = "driftline-diff", 2  # 2: each side of a change as data, the prose in "message"
