"""The drift levels' names and meanings, most urgent first (results/levels.py tells an event's level).

A module of its own, free of the type lattice (and so of pyarrow): a verb's --help lists them.
"""

from __future__ import annotations

# The levels, most urgent first: the terminal lists them in this order.
LEVELS: dict[str, str] = {
    "breaking": "a reader of yesterday's schema fails or loses data",
    "widening": "the schema grows without loss (a wider type of the same kind, a new optional field)",
    "info": "the schema still holds every value; worth knowing",
}
