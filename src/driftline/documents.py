"""Reading back a JSON document driftline wrote (a report, a rules file, a baseline).

One place says what went wrong and where: a file that cannot be read is an
InputPathError; one that is not JSON raises the caller's error class with the line and
column of the first problem.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import orjson

from driftline.errors import DriftlineError, InputPathError
from driftline.observe import jsonnum


def read_json_document(path: str | Path, what: str, not_json: type[DriftlineError], hint: str = "") -> Any:
    """The parsed JSON of path; `what` names the document in messages ('report', 'baseline').

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.json"; _ = p.write_text('{"a": [1,')
    >>> try:
    ...     read_json_document(p, "report", InputPathError)
    ... except InputPathError as exc:
    ...     print(str(exc).split(" is ", 1)[1])
    not JSON (unexpected end of data at line 1, column 10)
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
            f"{what} {source} is not JSON ({exc.msg} at line {exc.lineno}, column {exc.colno}){hint}"
        ) from None
