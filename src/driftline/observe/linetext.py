"""What the raw text of JSON lines tells, in whole-array passes over the lines.

observe.jsonbatch asks here which lines need the exact walk (odd lines), which rows hold
the rarer kind of a field Arrow found of two kinds, which null cells are certainly
absent keys, and which values can be read off the line because their key occurs once.
Every answer errs only towards the exact walk: a row wrongly sent there costs time, never
a different result.
"""

from __future__ import annotations

import functools
import re
from collections.abc import Sequence

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.core.stagetime import staged

MAX_BRACKETS_PER_LINE = 512  # far below orjson's 1,024 levels: deeper lines take the exact walk


@staged("exactness")
def matching(data: bytes, pattern: tuple[str, str], limit: int) -> set[int] | None:
    """Rows of a batch (its lines joined, each ending in a newline) whose line gives the key
    the kind, or None when more than limit rows do.

    One regular-expression pass over the joined bytes: the key's text occurs in nearly
    every line, so a search per line costs several times more, and the hits are few.  Rows
    are counted by the newlines before each hit.  The search stops past limit hits.

    >>> matching(b'{"t": [1]}\\n{"t": "x"}\\n{"u": "t"}\\n', ('"t"', "string"), 10)
    {1}
    """
    key, kind = pattern
    found = _kind_re(key, kind).finditer(data)
    rows: set[int] = set()
    row, at = 0, 0
    for m in found:
        start = m.start()
        row += data.count(b"\n", at, start)
        at = start
        rows.add(row)
        if len(rows) > limit:
            return None
    return rows


@functools.lru_cache(maxsize=256)
def _kind_re(key: str, kind: str) -> re.Pattern[bytes]:
    # JSON whitespace within a line (RFC 8259 section 2); a newline ends the line here.
    name = re.escape(key.encode("utf-8", "surrogatepass"))
    return re.compile(name + rb"[ \t\r]*:[ \t\r]*" + _KIND_START[kind].encode())


_CONFLICT = re.compile(r"Column\((/[^)]*)\) changed from (\w+) to (\w+)")
_KIND_START = {"string": '"', "array": r"\[", "object": r"\{", "number": "[-0-9]", "boolean": "[tf]", "null": "n"}


@staged("exactness")
def conflict_rows(
    arr: pa.BinaryArray,
    why: str,
    rows: pa.Array | None = None,
) -> tuple[set[int], tuple[str, str]] | None:
    """Rows (of rows, or of all lines) that may hold the rarer of the two kinds Arrow's error
    names for one field, and the pattern that finds them.

    Which rows are set aside decides only the speed: whatever is set aside is observed
    apart (walked exactly, or typed by Arrow on its own), and Arrow must still type all
    the rest together.
    """
    m = _CONFLICT.search(why)
    if not m:
        return None
    name = m.group(1).rsplit("/", 1)[-1]
    if not name or name == "[]":
        return None
    text = arr if rows is None else arr.take(rows)
    found = []
    for kind in (m.group(2), m.group(3)):
        start = _KIND_START.get(kind)
        if start is None:
            return None
        try:
            mask = pc.match_substring_regex(text, '"' + re.escape(name) + r'"\s*:\s*' + start)
        except pa.ArrowException:
            return None
        found.append((mask, ('"' + name + '"', kind)))
    rarer, pattern = min(found, key=lambda got: got[0].true_count)
    if not rarer.true_count:
        return None
    at = pc.indices_nonzero(rarer)
    return set((at if rows is None else rows.take(at)).to_pylist()), pattern


@staged("exactness")
def odd_rows(lines: Sequence[bytes], arr: pa.BinaryArray, data: bytes) -> set[int] | None:
    """Rows to walk exactly because they are not a plain '{...}' line; None if one is not a record.

    data is the lines joined, each ending in a newline.  Lines the exact reader reports
    (blank, malformed, invalid UTF-8, CRLF, a byte order mark) send the whole batch to
    the exact walk, which reports them.
    """
    shaped = pc.and_(pc.starts_with(arr, "{"), pc.ends_with(arr, "}"))
    odd: set[int] = set()
    if shaped.false_count:
        for i in pc.indices_nonzero(pc.invert(shaped)).to_pylist():
            line = lines[i]
            if line.endswith(b"\r") or line.startswith(b"\xef\xbb\xbf") or not line.strip():
                return None
            try:
                orjson.loads(line)
            except orjson.JSONDecodeError:
                return None
            odd.add(i)
    if not data.isascii():  # one pass over the bytes; the rare batch with other text is decoded
        try:
            data.decode("utf-8")
        except UnicodeDecodeError:
            return None
    if pc.max(pc.binary_length(arr)).as_py() <= MAX_BRACKETS_PER_LINE:
        return odd  # too short to nest that deep
    brackets = pc.add(pc.count_substring(arr, "["), pc.count_substring(arr, "{"))
    if pc.max(brackets).as_py() > MAX_BRACKETS_PER_LINE:
        odd |= set(pc.indices_nonzero(pc.greater(brackets, MAX_BRACKETS_PER_LINE)).to_pylist())
    return odd


@staged("exactness")
def absent_for_sure(lines: pa.BinaryArray, rows: pa.Array, name: str) -> pa.Array:
    """Mask over rows: their line holds neither '"name"' nor a backslash, so name is absent."""
    cand = lines.take(rows)
    key = orjson.dumps(name)
    if b"\\" in key:
        return pa.repeat(False, len(rows))
    seen = pc.or_(pc.match_substring(cand, key.decode("utf-8")), pc.match_substring(cand, "\\"))
    return pc.invert(seen)


@staged("exactness")
def settle(
    lines: pa.BinaryArray,
    unique: set[str],
    at_rows: pa.Array,
    name: str | None,
    listed: bool,
    value_re: str,
    usable: pa.Array | None = None,
) -> tuple[pa.Array, pa.Array] | None:
    """Read a field's value off its line where that is certain: (rows where it matches, the rest).

    Certain where the key's text '"name"' occurs once in the line and no backslash does:
    no other path of the batch has that name (Arrow's schema lists every key), so the one
    '"name"' followed by ':' is this field's key, and what follows it is its value.
    None when nothing can be settled so (a name used twice, a field under a list).
    """
    if name is None or listed or name not in unique or not len(at_rows):
        return None
    key = orjson.dumps(name).decode("utf-8")
    if "\\" in key:
        return None
    text = lines.take(at_rows)
    once = pc.and_(pc.equal(pc.count_substring(text, key), 1), pc.invert(pc.match_substring(text, "\\")))
    if usable is not None:
        once = pc.and_(once, usable)
    hit = pc.and_(once, pc.match_substring_regex(text, re.escape(key) + r"\s*:\s*" + value_re))
    return at_rows.filter(hit), at_rows.filter(pc.invert(once))


def unique_names(schema: pa.Schema) -> set[str]:
    """Field names used by one path only, at any depth of the schema."""
    seen: dict[str, int] = {}

    def walk(t: pa.DataType) -> None:
        if pa.types.is_struct(t):
            for f in t:
                seen[f.name] = seen.get(f.name, 0) + 1
                walk(f.type)
        elif pa.types.is_list(t):
            walk(t.value_type)

    for f in schema:
        seen[f.name] = seen.get(f.name, 0) + 1
        walk(f.type)
    return {n for n, k in seen.items() if k == 1}
