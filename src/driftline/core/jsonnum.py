"""JSON text to values with every integer literal kept exact, and back.

RFC 8259 section 6 sets no limit on the digits of a number; orjson reads an integer
literal outside the int64 and uint64 ranges as a float64, so a 30-digit identifier
became 1.2345678901234568e+29 and its digits were gone.  A text holding a run of 19 or
more digits is read again by Python's json module, which keeps integers exact (only such
texts pay for it; orjson has already said the text is valid JSON).  Writing back, orjson
refuses integers past 64 bits; they are written as the JSON numbers they are.

>>> loads(b'{"id": 123456789012345678901234567890, "x": 1.5}')
{'id': 123456789012345678901234567890, 'x': 1.5}
>>> dumps({"id": -(10**25)})
b'{"id":-10000000000000000000000000}'
"""

from __future__ import annotations

import json
import re
from typing import Any

import orjson

from driftline.core.stagetime import staged

# orjson keeps integers within [-2**63, 2**64): 19 digits and more may fall outside.
_LONG_DIGITS = re.compile(rb"[0-9]{19}")
INT64_MIN, UINT64_MAX = -(2**63), 2**64 - 1


@staged("parse")  # the JSON parse of records read one by one (small files, the exact walk)
def loads(data: bytes | str) -> Any:
    """orjson.loads, with integer literals beyond int64/uint64 kept as Python ints.

    Raises orjson.JSONDecodeError as orjson.loads does.
    """
    value = orjson.loads(data)
    raw = data.encode() if isinstance(data, str) else data
    if _LONG_DIGITS.search(raw) is None:
        return value
    try:
        return json.loads(raw)  # valid JSON per orjson; Python's json keeps big integers
    except ValueError:  # past sys.int_max_str_digits (4,300 digits): orjson's float stands
        return value


def is_big(v: Any) -> bool:
    """An int orjson cannot write (nor read back as an int)."""
    return type(v) is int and not INT64_MIN <= v <= UINT64_MAX


def dumps(obj: Any, option: int | None = None) -> bytes:
    """orjson.dumps, writing integers past 64 bits as JSON numbers too."""
    try:
        return orjson.dumps(obj, option=option)
    except TypeError as exc:
        if "Integer exceeds 64-bit range" not in str(exc):
            raise
    return orjson.dumps(_fragments(obj), option=option)


def _fragments(v: Any) -> Any:
    if is_big(v):
        return orjson.Fragment(str(v).encode())
    if isinstance(v, dict):
        return {k: _fragments(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [_fragments(x) for x in v]
    return v
