"""Column names every engine accepts: one rule, shared by the schema files that name columns.

The rule (docs/recommend.md, "Names every engine accepts"), applied to each set of
siblings (the top-level columns, or the fields of one struct):

1. A character outside ``A-Z a-z 0-9 _`` becomes ``_`` (``gps.alt`` → ``gps_alt``,
   ``a b`` → ``a_b``, ``x[0]`` → ``x_0_``); a name that is then empty or starts with a
   digit gets a leading ``_`` (``2nd`` → ``_2nd``).
2. A name longer than 63 characters (PostgreSQL's identifier limit, NAMEDATALEN - 1) is cut
   to 63.
3. Names are compared ignoring case (DuckDB, Spark, BigQuery, Snowflake and Trino match
   column names that way). In sibling order, the first keeps its name; each later one that
   equals an earlier one, ignoring case, gets the lowest free suffix ``_2``, ``_3`` ...
   (cut so the whole stays within 63 characters): ``Duck`` and ``duck`` become ``Duck`` and
   ``duck_2``.

A name the rule leaves alone is kept as it is, case included; every changed name is a
``Rename`` with the reason.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

MAX_NAME = 63  # source: PostgreSQL manual 4.1.1 (identifiers longer than NAMEDATALEN-1 = 63 bytes are cut)
_OUTSIDE = re.compile(r"[^A-Za-z0-9_]")
_SEPARATOR = re.compile(r"[A-Za-z0-9_]+")


@dataclass(frozen=True, slots=True)
class Rename:
    """One name the rule changed: the field's path, its name as the data spells it, the new name, why."""

    path: str
    name: str
    to: str
    why: str

    def to_json(self) -> dict[str, str]:
        return {"path": self.path, "from": self.name, "to": self.to, "why": self.why}


def plain(name: str) -> tuple[str, str]:
    """Steps 1 and 2 of the rule: (the name made of A-Z a-z 0-9 _, why it changed or '').

    >>> plain("gps.alt"), plain("2nd"), plain("ok")
    (('gps_alt', 'a character outside A-Z a-z 0-9 _'), ('_2nd', 'starts with a digit'), ('ok', ''))
    """
    out, why = _OUTSIDE.sub("_", name), ""
    if out != name:
        why = "a character outside A-Z a-z 0-9 _"
    if not out:
        out, why = "_", "empty"
    elif out[0].isdigit():
        out, why = "_" + out, why or "starts with a digit"
    if len(out) > MAX_NAME:
        out, why = out[:MAX_NAME], why or f"longer than {MAX_NAME} characters"
    return out, why


def distinct(names: Sequence[str], paths: Sequence[str] | None = None) -> tuple[list[str], list[Rename]]:
    """The rule over one set of siblings, in order: (the new names, the renames).

    paths name each sibling in the renames (default: the names themselves).

    >>> new, renames = distinct(["Duck", "a b", "a.b", "duck"])
    >>> new
    ['Duck', 'a_b', 'a_b_2', 'duck_2']
    >>> [r.why.split("; ")[-1] for r in renames]
    ['a character outside A-Z a-z 0-9 _', "the same as 'a_b'", "equal to 'Duck' ignoring case"]
    """
    paths = list(names) if paths is None else list(paths)
    taken: dict[str, str] = {}  # lower-cased name -> the name that holds it
    plains = [plain(n) for n in names]
    out: list[str] = []
    renames: list[Rename] = []
    for name, path, (base, why) in zip(names, paths, plains, strict=True):
        new = base
        if new.lower() in taken:
            holder = taken[new.lower()]
            n = 2
            while (new := f"{base[: MAX_NAME - len(str(n)) - 1]}_{n}").lower() in taken:
                n += 1
            clash = f"the same as {holder!r}" if holder == base else f"equal to {holder!r} ignoring case"
            why = f"{why}; {clash}" if why else clash
        taken[new.lower()] = new
        out.append(new)
        if new != name:
            renames.append(Rename(path, name, new, why))
    return out, renames


def check_separator(sep: str) -> str | None:
    """Why a flattening separator is refused (it must be made of A-Z a-z 0-9 _), or None.

    >>> check_separator("__"), check_separator(".")
    (None, "'.' holds a character outside A-Z a-z 0-9 _")
    """
    if _SEPARATOR.fullmatch(sep):
        return None
    return f"{sep!r} holds a character outside A-Z a-z 0-9 _" if sep else "the separator is empty"
