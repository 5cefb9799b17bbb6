"""The mark every driftline output carries, so that a scan never reads its own outputs as data.

Each format carries it where the format allows a remark without changing what its
consumers read:

  JSON documents (report, rules, verdict, diff, state,  the first key: "format": "driftline-<kind>"
  apply's marker, reconciliation and state)
  JSON Schema                                           the first key: "$comment": "driftline-output: ..."
  Avro schema, Iceberg schema                           the first key: "doc": "driftline-output: ..."
  Spark struct type JSON                                the first field's first metadata key:
                                                        "driftline": "driftline-output: ..."
  SQL                                                   the first line: -- driftline-output: ...
  Arrow schema as text                                  the first line: # driftline-output: ...
  Arrow IPC schema message                              the schema metadata key driftline.rules
  HTML                                                  a comment before the doctype: <!-- driftline-output: ... -->
  JUnit XML                                             a comment after the XML declaration

Discovery looks at the first bytes of each file (`carries_marker`) and skips the ones that
carry it, counted with the reason OWN_OUTPUT.

>>> carries_marker_bytes(b'{\\n  "format": "driftline-report",\\n  "version": 1}')
True
>>> carries_marker_bytes(b'{"format": "csv", "rows": 3}')
False
>>> carries_marker_bytes(b"-- driftline-output: schema of landing\\nCREATE TABLE t (x BIGINT);")
True
"""

from __future__ import annotations

import os
import re

MARKER = "driftline-output"
OWN_OUTPUT = "own-output"  # the reason discovery gives for a skipped output of driftline's
HEAD_BYTES = 4096
OWN_JSON_FORMATS = (
    "report-set",
    "report",
    "rules",
    "verdict",
    "diff",
    "state",
    "apply-state",
    "apply",
    "reconciliation",
)
ARROW_KEY = b"driftline.rules"  # recommendation/plan.RULES_KEY: every IPC schema driftline writes has it
_IPC_CONTINUATION = b"\xff\xff\xff\xff"
_MAX_IPC_MESSAGE = 64 << 20  # an Arrow schema message longer than this is not one of ours

_HEAD = re.compile(
    rb"\A(?:\xef\xbb\xbf)?\s*(?:"
    rb'\{\s*"format"\s*:\s*"driftline-(?:' + b"|".join(k.encode() for k in OWN_JSON_FORMATS) + rb')"'
    rb'|\{\s*"(?:\$comment|doc)"\s*:\s*"'
    + MARKER.encode()
    + rb'|\{\s*"type"\s*:\s*"struct"\s*,\s*"fields"\s*:\s*\[\s*\{\s*"metadata"\s*:\s*\{\s*"driftline"\s*:\s*"'
    + MARKER.encode()
    + rb"|(?:<\?xml[^>]{0,200}\?>\s*)?<!--\s*"
    + MARKER.encode()
    + rb"|(?:--|\#)\s*"
    + MARKER.encode()
    + rb")"
)


def remark(what: str) -> str:
    """The marker sentence a text output starts with ('driftline-output: <what>')."""
    return f"{MARKER}: {what}"


def carries_marker_bytes(head: bytes) -> bool:
    """True when these first bytes of a file begin like a driftline output (Arrow IPC aside)."""
    return _HEAD.match(head) is not None


def carries_marker(path: str | os.PathLike[str]) -> bool:
    """True when the file at path is an output of driftline's; False when it is not or cannot be read.

    Reads the first HEAD_BYTES bytes; an Arrow IPC schema message is read whole (it is
    where its metadata sits), up to 64 MiB.
    """
    return read_head(path)[0]


def read_head(path: str | os.PathLike[str]) -> tuple[bool, bytes]:
    """(carries_marker(path), the file's first HEAD_BYTES bytes) from one open: discovery asks both
    of every file, and on a folder of many small files the opens are most of its cost (hence the
    bare descriptor, without a buffered file object).  (False, b'') when the file cannot be read."""
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return False, b""
    try:
        head = _read_upto(fd, HEAD_BYTES)
        if head.startswith(_IPC_CONTINUATION) and len(head) >= 8:
            length = int.from_bytes(head[4:8], "little", signed=True)
            if not 0 < length <= _MAX_IPC_MESSAGE:
                return False, head
            message = head[8:] + _read_upto(fd, max(0, length - len(head) + 8))
            return ARROW_KEY in message[:length], head
    except OSError:
        return False, b""
    finally:
        os.close(fd)
    return carries_marker_bytes(head), head


def _read_upto(fd: int, n: int) -> bytes:
    """n bytes from fd, fewer only at the end of the file."""
    parts = []
    while n > 0:
        got = os.read(fd, n)
        if not got:
            break
        parts.append(got)
        n -= len(got)
    return b"".join(parts)
