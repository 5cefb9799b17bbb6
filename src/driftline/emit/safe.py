"""Make data safe to show: control characters and escape sequences become visible escapes.

Field names, values and file names come from whoever wrote the files; they must never
move the cursor, recolour the terminal or inject markup.
"""

from __future__ import annotations

import re

_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def _escape(m: re.Match[str]) -> str:
    ch = m.group(0)
    code = ord(ch)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def safe_text(value: object, limit: int | None = 120) -> str:
    r"""Text of value with control and bidi characters escaped, cut to limit characters.

    >>> safe_text("pm25\x1b[31m")
    'pm25\\x1b[31m'
    """
    text = _CONTROL.sub(_escape, str(value))
    if limit is not None and len(text) > limit:
        text = text[: limit - 1] + "…"
    return text
