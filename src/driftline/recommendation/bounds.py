"""Upper bounds of text lengths (characters), from the profile: for VARCHAR(n) and maxLength.

A bound is never smaller than a real value's text. Strings use their longest length; every
other kind uses the longest text its type can print as (int64: 20, float64: 24 ...). JSON
text escapes at most 6 characters per character ('\\u001f'), and a list holds at most the
elements of the largest batch, so those bounds can be generous; they are still bounds.
"""

from __future__ import annotations

from driftline.core.lattice import DType, parse_key
from driftline.recommendation.facts import Facts, FactsTree

_ESCAPE = 6  # the longest JSON escape of one character: \\u00XX

# Longest text of a value of each kind, as pyarrow casts it to string or orjson writes it.
_KIND_CHARS: dict[str, int] = {
    "bool": 5,
    "int8": 4,
    "int16": 6,
    "int32": 11,
    "int64": 20,
    "uint8": 3,
    "uint16": 5,
    "uint32": 10,
    "uint64": 20,
    "float16": 24,
    "float32": 24,
    "float64": 24,
    "null": 4,
    "date32": 10,
    "date64": 10,
    "time32": 12,
    "time64": 18,
    "duration": 20,
    "timestamp": 35,  # 'YYYY-MM-DD HH:MM:SS.fffffffff' plus a zone
}


def kind_chars(key: str) -> int | None:
    """Longest text of a typed (non-string) value of kind key; None when there is no bound.

    >>> kind_chars("int64"), kind_chars("decimal(6,2)"), kind_chars("timestamp[us, UTC]")
    (20, 9, 35)
    """
    t = parse_key(key) if key not in ("struct", "list", "map", "union") else DType("null")
    if t.name == "decimal":
        assert t.precision is not None
        return t.precision + 3  # sign, point, and a leading zero when scale == precision
    return _KIND_CHARS.get(t.name)


def value_chars(f: Facts) -> int | None:
    """Longest text of any scalar input value (a string's content, a number's text, a cell)."""
    lengths: list[int] = []
    for key in f.kinds:
        if key == "string":
            lengths.append(f.typed.max_length)
        elif key == "binary":
            lengths.append(f.typed.max_length * 4)  # bytes shown as text: \\xNN at most
        else:
            n = kind_chars(key)
            if n is None:
                return None
            lengths.append(n)
    if f.text_values:
        lengths.append(f.text.max_length)
    return max(lengths, default=0)


def json_chars(tree: FactsTree, f: Facts) -> int | None:
    """Longest JSON text of any value at f's path, nested values included."""
    lengths: list[int] = []
    for key in f.kinds:
        if key == "string":
            lengths.append(2 + _ESCAPE * f.typed.max_length)
        elif key == "struct":
            total = 2
            for child in f.children:
                c = tree[child]
                inner = json_chars(tree, c)
                if inner is None:
                    return None
                total += 2 + _ESCAPE * len(c.name) + 1 + max(inner, 4) + 1
            lengths.append(total)
        elif key in ("list", "map"):
            per = 0
            for child in f.children:
                inner = json_chars(tree, tree[child])
                if inner is None:
                    return None
                per += max(inner, 4) + 2
            lengths.append(2 + f.max_batch_items * (per + 1))
        else:
            n = kind_chars(key)
            if n is None:
                return None
            lengths.append(n + 2)  # a temporal value is written as a JSON string
    if f.text_values:
        lengths.append(2 + _ESCAPE * f.text.max_length)
    return max(lengths, default=4)
