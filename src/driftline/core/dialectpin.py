"""Pins of the CSV dialect: what a user fixes per glob (`--csv-dialect`, `csv_dialect=`).

A pin is `[GLOB:]KEY=VALUE[,KEY=VALUE…]`; the keys it leaves out are still found from the
data by sources/dialect.py.
"""

from __future__ import annotations

import fnmatch
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from driftline.errors import PolicyError

DELIMITER_NAMES = {
    "comma": ",",
    "tab": "\t",
    "semicolon": ";",
    "pipe": "|",
    "colon": ":",
    "caret": "^",
    "tilde": "~",
    "space": " ",
}
QUOTE_NAMES = {"double": '"', "single": "'", "none": None}
ESCAPE_NAMES = {"backslash": "\\", "none": None}
HEADER_VALUES = ("yes", "no", "row-names")
LINE_ENDS = ("LF", "CRLF", "CR")

PIN_KEYS = ("delimiter", "quote", "escape", "header", "skip", "lines", "comment")


@dataclass(frozen=True, slots=True)
class Pin:
    """What the user fixed for the files matching glob (None: every CSV/TSV file); a key left
    out (None) is still found from the data."""

    glob: str | None = None
    delimiter: str | None = None
    quote: str | None | bool = False  # False: not pinned (None is "no quoting")
    escape: str | None | bool = False
    header: str | None = None
    skip: int | None = None
    lines: str | None = None
    comment: str | None | bool = False  # False: not pinned (None: no comment lines)

    def matches(self, rel: str) -> bool:
        if self.glob is None:
            return True
        name = rel.rsplit("/", 1)[-1]
        return fnmatch.fnmatchcase(rel, self.glob) or fnmatch.fnmatchcase(name, self.glob)

    def keys(self) -> tuple[str, ...]:
        # identity, not equality: skip=0 is a pin (0 == False)
        return tuple(
            k
            for k in PIN_KEYS
            if (getattr(self, k) is not None and getattr(self, k) is not False)
            or (k in ("quote", "escape", "comment") and getattr(self, k) is None)
        )

    def over(self, other: Pin) -> Pin:
        """This pin's keys, the other's where this one leaves a key open."""
        mine = {k: getattr(self, k) for k in PIN_KEYS if k in self.keys()}
        return replace(other, **mine)


_SPEC = re.compile(r"^(?:(?P<glob>.*):)?(?P<items>[a-z]+=[^,]*(?:,[a-z]+=[^,]*)*)$")


def parse_pin(spec: str) -> Pin:
    """A --csv-dialect value: `[GLOB:]KEY=VALUE[,KEY=VALUE…]`.

    >>> parse_pin("legacy/*.csv:delimiter=pipe,quote=none,header=no,lines=cr")
    Pin(glob='legacy/*.csv', delimiter='|', quote=None, escape=False, header='no', skip=None, lines='CR', comment=False)
    >>> parse_pin("delimiter=;,skip=2").skip
    2
    """
    m = _SPEC.match(spec.strip())
    if m is None:
        raise PolicyError(
            f"--csv-dialect {spec!r}: expected [GLOB:]KEY=VALUE[,KEY=VALUE…] with keys "
            f"{', '.join(PIN_KEYS)}, e.g. 'exports/*.txt:delimiter=pipe,quote=none,header=no'"
        )
    fields: dict[str, Any] = {"glob": m.group("glob") or None}
    for item in m.group("items").split(","):
        key, _, value = item.partition("=")
        fields[key] = _pin_value(spec, key, value.strip())
    return Pin(**fields)


def _pin_value(spec: str, key: str, value: str) -> Any:
    low = value.lower()

    def bad(choices: Iterable[str]) -> PolicyError:
        return PolicyError(f"--csv-dialect {spec!r}: {key}={value!r} is not one of {', '.join(choices)}")

    if key == "delimiter":
        if low in DELIMITER_NAMES:
            return DELIMITER_NAMES[low]
        if len(value) == 1 and value not in "\r\n\"'" and not value.isalnum():
            return value
        raise bad([*DELIMITER_NAMES, "or one punctuation character"])
    if key == "quote":
        if low in QUOTE_NAMES:
            return QUOTE_NAMES[low]
        raise bad(QUOTE_NAMES)
    if key == "escape":
        if low in ESCAPE_NAMES:
            return ESCAPE_NAMES[low]
        raise bad(ESCAPE_NAMES)
    if key == "header":
        if low in HEADER_VALUES:
            return low
        raise bad(HEADER_VALUES)
    if key == "skip":
        if value.isdigit():
            return int(value)
        raise bad(["a number of lines"])
    if key == "comment":
        if low == "none":
            return None
        if len(value) == 1 and not value.isalnum() and value not in "\r\n\"'":
            return value
        raise bad(["none", "one punctuation character such as #"])
    if key == "lines":
        if value.upper() in LINE_ENDS:
            return value.upper()
        raise bad(["lf", "crlf", "cr"])
    raise PolicyError(f"--csv-dialect {spec!r}: unknown key {key!r}; keys: {', '.join(PIN_KEYS)}")


def pin_for(rel: str, specs: Sequence[str], delimiter: str | None = None) -> Pin:
    """The pin that applies to rel: the last matching spec wins key by key over earlier ones,
    and --delimiter applies under all of them."""
    pin = Pin(delimiter=delimiter)
    for spec in specs:
        p = parse_pin(spec)
        if p.matches(rel):
            pin = p.over(pin)
    return pin
