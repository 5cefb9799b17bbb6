"""Reading back a JSON document driftline wrote (a report, a rules file, a baseline).

One place says what went wrong and where: a file that cannot be read is an
InputPathError; one that is not JSON raises the caller's error class with the line and
column of the first problem, and the JSON pointer of the value it was reading there.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import orjson

from driftline.core import jsonnum
from driftline.core.validation import pointer, shown
from driftline.errors import DriftlineError, InputPathError

_TOKEN = re.compile(rb'"(?:[^"\\]|\\.)*"|[{}\[\],:]')


def pointer_at(raw: bytes, pos: int) -> str:
    """The JSON pointer (RFC 6901) of the innermost value being read at byte pos of raw.

    >>> pointer_at(b'{"files": [{"path": "a"}, {"path": "b", "rows": 1', 50)
    '/files/1/rows'
    """
    frames: list[list[Any]] = []  # [is_object, key or index, a key comes next]
    for m in _TOKEN.finditer(raw, 0, pos):
        tok = m.group()
        if tok == b"{":
            frames.append([True, None, True])
        elif tok == b"[":
            frames.append([False, 0, False])
        elif tok in (b"}", b"]"):
            if frames:
                frames.pop()
        elif not frames:
            continue
        elif tok == b",":
            top = frames[-1]
            if top[0]:
                top[1], top[2] = None, True
            else:
                top[1] += 1
        elif tok == b":":
            frames[-1][2] = False
        elif frames[-1][0] and frames[-1][2]:
            try:
                frames[-1][1] = json.loads(tok)
            except ValueError:
                frames[-1][1] = tok.decode("utf-8", "replace").strip('"')
    path: list[str | int] = []
    for _, key, _ in frames:
        if key is None:
            break
        path.append(key)
    return pointer(path)


def read_json_document(path: str | Path, what: str, not_json: type[DriftlineError], hint: str = "") -> Any:
    """The parsed JSON of path; `what` names the document in messages ('report', 'baseline').

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.json"; _ = p.write_text('{"a": [1,')
    >>> try:
    ...     read_json_document(p, "report", InputPathError)
    ... except InputPathError as exc:
    ...     print(str(exc).split(" is ", 1)[1])
    not JSON (unexpected end of data at line 1, column 10, inside the value at /a/1)
    """
    source = repr(str(path))
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise InputPathError(f"cannot read {what} {source}: {exc.strerror}") from None
    try:
        return jsonnum.loads(raw)  # integers past 64 bits stay exact (a report's extremes)
    except orjson.JSONDecodeError as exc:
        raise not_json(
            f"{what} {source} is not JSON ({exc.msg} at line {exc.lineno}, column {exc.colno}, "
            f"inside the value at {shown(pointer_at(raw, exc.pos))}){hint}"
        ) from None
