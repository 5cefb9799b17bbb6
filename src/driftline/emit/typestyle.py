"""Each type's one colour and fill pattern, the same in every report: one table.

The HTML report draws a type with a colour AND a pattern, so that it reads without colour
and in greyscale print. Both come from TYPE_STYLES by the type's name, never from how
common the type is in a scan, so int64 looks the same in every report: the type bars,
timelines and legends (emit.svg, by fill_id) and the partition matrix's cell tints (the
style sheet rules type_css writes) all ask this table. A numeric family shares a colour
(the integers are moss, the floats and decimals tide) and its members differ by pattern.
"""

from __future__ import annotations

from typing import NamedTuple

from driftline.emit.html_data import ABSENT, NULL


class Colour(NamedTuple):
    fill: str  # the chart fill: at least 3:1 on white (WCAG 2.1 SC 1.4.11)
    tint: str  # a light background for matrix cells: ink text on it at least 4.5:1 (SC 1.4.3)


COLOURS: dict[str, Colour] = {
    "tide": Colour("#1f6f8b", "#d9e8ee"),
    "ember": Colour("#b8491f", "#f3ddd3"),
    "moss": Colour("#55731a", "#e1e9d3"),
    "iris": Colour("#6148a8", "#e4dff1"),
    "clay": Colour("#8f5f22", "#ece1d2"),
    "berry": Colour("#a3306a", "#f1dbe6"),
    "slate": Colour("#3f5068", "#dde1e8"),
    "lagoon": Colour("#0e7a66", "#d4ebe5"),
}
PATTERNS = ("solid", "stripes", "dots", "grid", "rows", "columns", "checks", "backslash")

# Type name (DType.name; "timestamp-tz" for a timestamp with a time zone) -> (colour, pattern).
# The eight most common types have a colour and a pattern each that no other of them has.
TYPE_STYLES: dict[str, tuple[str, str]] = {
    "int64": ("moss", "dots"),
    "float64": ("tide", "solid"),
    "string": ("ember", "stripes"),
    "bool": ("iris", "grid"),
    "timestamp": ("clay", "rows"),
    "timestamp-tz": ("lagoon", "backslash"),
    "list": ("berry", "columns"),
    "struct": ("slate", "checks"),
    "int8": ("moss", "solid"),
    "int16": ("moss", "stripes"),
    "int32": ("moss", "grid"),
    "uint8": ("moss", "rows"),
    "uint16": ("moss", "columns"),
    "uint32": ("moss", "checks"),
    "uint64": ("moss", "backslash"),
    "float16": ("tide", "dots"),
    "float32": ("tide", "stripes"),
    "decimal": ("tide", "grid"),
    "binary": ("ember", "dots"),
    "date32": ("clay", "dots"),
    "date64": ("clay", "grid"),
    "time32": ("lagoon", "dots"),
    "time64": ("lagoon", "grid"),
    "duration": ("lagoon", "rows"),
    "map": ("slate", "columns"),
    "union": ("berry", "checks"),
    "unknown": ("slate", "solid"),
}
FALLBACK = "unknown"  # a name this version does not know (from a newer report) looks like unknown


def type_name(key: str) -> str:
    """The table's name for a type key as the report holds it (DType.key or shallow_key).

    >>> [type_name(k) for k in ("timestamp[us]", "timestamp[ms, UTC]", "decimal(10,2)", "list<int64>")]
    ['timestamp', 'timestamp-tz', 'decimal', 'list']
    """
    name = key.split("[", 1)[0].split("(", 1)[0].split("<", 1)[0]
    if name == "timestamp" and "," in key:
        return "timestamp-tz"
    return name if name in TYPE_STYLES else FALLBACK


def style_of(key: str) -> tuple[str, str]:
    """(colour name, pattern) of a type key.

    >>> style_of("int64"), style_of("timestamp[us, UTC]")
    (('moss', 'dots'), ('lagoon', 'backslash'))
    """
    return TYPE_STYLES[type_name(key)]


def fill_id(key: str) -> str:
    """The id of the SVG pattern that draws a series: a type's style, or null's and absent's own.

    >>> fill_id("int64"), fill_id("null"), fill_id("absent")
    ('fill-moss-dots', 'fill-null', 'fill-absent')
    """
    if key in (NULL, ABSENT):
        return f"fill-{key}"
    colour, pattern = style_of(key)
    return f"fill-{colour}-{pattern}"


def tint_class(key: str) -> str:
    """The class of a matrix cell whose values are mostly of this type: its colour's tint.

    >>> tint_class("int32"), tint_class("string")
    ('c-moss', 'c-ember')
    """
    return "c-" + style_of(key)[0]


def type_css() -> str:
    """The style sheet's rules for the tints, written from COLOURS (report.css has the rest)."""
    return "\n".join(f".c-{name} {{ background: {c.tint}; }}" for name, c in COLOURS.items()) + "\n"


def used_styles() -> list[tuple[str, str]]:
    """Every (colour, pattern) the table uses, once each, in table order (emit.svg.defs draws them)."""
    return list(dict.fromkeys(TYPE_STYLES.values()))
