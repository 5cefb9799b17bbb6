"""Byte sizes as people write them: '64GiB', '64 MiB', '1.5 GB', '1048576', and back.

The units are those of IEC 80000-13: the binary prefixes Ki, Mi, Gi, Ti, Pi, Ei (powers of
1024) and the decimal k, M, G, T, P, E (powers of 1000), before B. A plain number is bytes.
"""

from __future__ import annotations

import re
from fractions import Fraction

# source: IEC 80000-13:2008 items 13-9.a-f (binary prefixes) and SI prefixes for the decimal ones
BINARY = {"KiB": 2**10, "MiB": 2**20, "GiB": 2**30, "TiB": 2**40, "PiB": 2**50, "EiB": 2**60}
DECIMAL = {"kB": 10**3, "MB": 10**6, "GB": 10**9, "TB": 10**12, "PB": 10**15, "EB": 10**18}
_UNITS = {"b": 1, **{k.lower(): v for k, v in BINARY.items()}, **{k.lower(): v for k, v in DECIMAL.items()}}
_SIZE = re.compile(r"\s*(\d+(?:\.\d+)?)\s*([A-Za-z]*)\s*")


def parse_bytes(text: str) -> int:
    """A byte count from a number with an optional unit (the unit's case is not significant:
    'kb' is kB, 'gib' GiB).

    >>> parse_bytes("64GiB"), parse_bytes("64 MiB"), parse_bytes("1048576"), parse_bytes("1.5 kB")
    (68719476736, 67108864, 1048576, 1500)
    """
    m = _SIZE.fullmatch(text)
    unit = m.group(2).lower() if m else ""
    if m is None or (unit and unit not in _UNITS):
        raise ValueError(
            f"{text!r} is not a byte size; write a number of bytes, or one with a unit: "
            "KiB, MiB, GiB, TiB (powers of 1024) or kB, MB, GB, TB (powers of 1000), e.g. 64MiB"
        )
    value = Fraction(m.group(1)) * _UNITS.get(unit, 1)
    if value.denominator != 1:
        raise ValueError(f"{text!r} is not a whole number of bytes ({float(value):g})")
    return int(value)


def exact_bytes(n: int) -> str:
    """n in the largest binary unit that holds it exactly, for a default shown in --help.

    >>> exact_bytes(68719476736), exact_bytes(67108864), exact_bytes(1536), exact_bytes(1000)
    ('64 GiB', '64 MiB', '1.5 KiB', '1000 B')
    """
    for unit, size in reversed(BINARY.items()):
        if n >= size and (n * 2) % size == 0:  # whole, or a half: 1.5 KiB
            whole = n // size
            return f"{whole} {unit}" if n % size == 0 else f"{whole}.5 {unit}"
    return f"{n} B"
