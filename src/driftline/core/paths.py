"""Field paths: 'a.b' for a struct field, 'a[]' for list elements, 'm{key}' / 'm{value}' for maps.

A name holding any of the characters ``.[]{}`` or a backtick, or an empty name, is
written between backticks, with backticks doubled, so every path parses back.
"""

from __future__ import annotations

import re

ROOT = "$"  # the path of a record that is not an object (a bare JSON value)
_PLAIN = re.compile(r"^[^.\[\]{}`]+$")


def quote(name: str) -> str:
    """Quote a field name for use in a path.

    >>> quote("pm25"), quote("a.b"), quote("")
    ('pm25', '`a.b`', '``')
    """
    if _PLAIN.match(name) and name != ROOT:
        return name
    return "`" + name.replace("`", "``") + "`"


def child(parent: str | None, name: str) -> str:
    q = quote(name)
    return q if parent is None else f"{parent}.{q}"


def element(parent: str) -> str:
    return parent + "[]"


def map_part(parent: str, part: str) -> str:
    return parent + "{" + part + "}"


def split(path: str) -> list[tuple[str, str]]:
    """Segments of a path as (kind, name): kind is 'field', 'element', 'key' or 'value'.

    >>> split("battery.level")
    [('field', 'battery'), ('field', 'level')]
    >>> split("tags[]")
    [('field', 'tags'), ('element', '')]
    """
    out: list[tuple[str, str]] = []
    i, n = 0, len(path)
    while i < n:
        c = path[i]
        if c == ".":
            i += 1
            continue
        if path.startswith("[]", i):
            out.append(("element", ""))
            i += 2
        elif path.startswith("{key}", i):
            out.append(("key", ""))
            i += 5
        elif path.startswith("{value}", i):
            out.append(("value", ""))
            i += 7
        elif c == "`":
            j, buf = i + 1, []
            while j < n:
                if path[j] == "`":
                    if j + 1 < n and path[j + 1] == "`":
                        buf.append("`")
                        j += 2
                        continue
                    break
                buf.append(path[j])
                j += 1
            out.append(("field", "".join(buf)))
            i = j + 1
        else:
            j = i
            while j < n and path[j] not in ".[{`":
                j += 1
            out.append(("field", path[i:j]))
            i = j
    return out


def join(segments: list[tuple[str, str]]) -> str:
    path: str | None = None
    for kind, name in segments:
        if kind == "field":
            path = child(path, name)
        elif kind == "element":
            path = element(path or "")
        else:
            path = map_part(path or "", kind)
    return path or ""


def parent(path: str) -> tuple[str | None, str]:
    """The container path and how path hangs from it ('field' | 'element' | 'key' | 'value').

    >>> parent("battery.level"), parent("tags[]"), parent("pm25")
    (('battery', 'field'), ('tags', 'element'), (None, 'field'))
    """
    segs = split(path)
    if len(segs) <= 1 and (not segs or segs[0][0] == "field"):
        return None, "field"
    return join(segs[:-1]), segs[-1][0]


def depth(path: str) -> int:
    return len(split(path))
