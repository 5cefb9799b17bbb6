"""The top-level column names of a Parquet file, from the start of its footer alone.

A Parquet footer is a Thrift FileMetaData in the compact protocol; its first fields are the
version and the schema, a flat list of SchemaElements in depth-first order, the root first
with its num_children.  The names of the root's children are all dataset discovery needs, so
this reads the footer's bytes (one read from the end of the file) and decodes only that list,
never the row groups after it: about half the cost of building pyarrow's full metadata, which
matters on folders of thousands of small files.  Anything this decoder does not expect gives
None, and the caller asks pyarrow (pq.read_schema).

source: Apache Parquet format, "File format" (footer: metadata, 4-byte little-endian length,
"PAR1") and parquet.thrift (FileMetaData: 1 version, 2 schema; SchemaElement: 4 name,
5 num_children); Apache Thrift compact protocol specification (thrift/doc/specs/thrift-compact-protocol.md).
"""

from __future__ import annotations

import os

TAIL_BYTES = 64 * 1024  # read from the end at once: the footer of a small file fits
_MAGIC = b"PAR1"  # an encrypted footer ends in "PARE": left to pyarrow
_STOP, _TRUE, _FALSE, _BYTE, _I16, _I32, _I64, _DOUBLE, _BINARY, _LIST, _SET, _MAP, _STRUCT = range(13)


def top_level_names(path: str) -> tuple[str, ...] | None:
    """The names of a local Parquet file's top-level columns, or None when its footer is not a
    plain (unencrypted) compact-protocol FileMetaData this decoder reads."""
    try:
        with open(path, "rb") as fh:
            size = fh.seek(0, os.SEEK_END)
            if size < 12:
                return None
            fh.seek(max(0, size - TAIL_BYTES))
            tail = fh.read()
            if tail[-4:] != _MAGIC:
                return None
            length = int.from_bytes(tail[-8:-4], "little")
            if length + 8 > size - 4:
                return None
            if length + 8 > len(tail):
                fh.seek(size - 8 - length)
                tail = fh.read()
        footer = tail[len(tail) - 8 - length : len(tail) - 8]
        return _decoded(footer)
    except (OSError, ValueError, IndexError):  # bytes this decoder does not expect: pyarrow decides
        return None


# The footers of one writer's files start with the same bytes (the version, then the schema
# list) and differ after them (row groups, statistics): a start seen before is not decoded
# again.  Bytes equal, names equal: the result is the same as decoding.
_SEEN: dict[int, dict[bytes, tuple[str, ...]]] = {}  # length of the start → start → names
_SEEN_MAX = 256


def _decoded(footer: bytes) -> tuple[str, ...]:
    for n, starts in _SEEN.items():
        names = starts.get(footer[:n])
        if names is not None:
            return names
    reader = _Reader(footer)
    names = reader.names()
    if sum(len(v) for v in _SEEN.values()) < _SEEN_MAX:
        _SEEN.setdefault(reader.at, {})[footer[: reader.at]] = names
    return names


class _Reader:
    def __init__(self, data: bytes) -> None:
        self.data = data
        self.at = 0

    def byte(self) -> int:
        b = self.data[self.at]
        self.at += 1
        return b

    def varint(self) -> int:
        shift = out = 0
        while True:
            b = self.byte()
            out |= (b & 0x7F) << shift
            if not b & 0x80:
                return out
            shift += 7
            if shift > 70:
                raise ValueError("varint too long")

    def zigzag(self) -> int:
        n = self.varint()
        return (n >> 1) ^ -(n & 1)

    def binary(self) -> bytes:
        n = self.varint()
        if self.at + n > len(self.data):
            raise ValueError("binary past the end")
        out = self.data[self.at : self.at + n]
        self.at += n
        return out

    def field(self, last: int) -> tuple[int, int]:
        """(field id, type) of the next field of a struct; type _STOP at its end."""
        head = self.byte()
        kind = head & 0x0F
        if kind == _STOP:
            return 0, _STOP
        delta = head >> 4
        return (last + delta if delta else self.zigzag()), kind

    def list_head(self) -> tuple[int, int]:
        head = self.byte()
        size = head >> 4
        return (self.varint() if size == 15 else size), head & 0x0F

    def skip(self, kind: int, depth: int = 0) -> None:
        if depth > 64:
            raise ValueError("nested too deep")
        if kind in (_TRUE, _FALSE):
            return
        if kind == _BYTE:
            self.at += 1
        elif kind in (_I16, _I32, _I64):
            self.varint()
        elif kind == _DOUBLE:
            self.at += 8
        elif kind == _BINARY:
            self.binary()
        elif kind in (_LIST, _SET):
            size, elem = self.list_head()
            for _ in range(size):
                self.at += 1 if elem in (_TRUE, _FALSE) else 0
                if elem not in (_TRUE, _FALSE):
                    self.skip(elem, depth + 1)
        elif kind == _MAP:
            size = self.varint()
            if size:
                types = self.byte()
                for _ in range(size):
                    self.skip(types >> 4, depth + 1)
                    self.skip(types & 0x0F, depth + 1)
        elif kind == _STRUCT:
            last = 0
            while True:
                last, inner = self.field(last)
                if inner == _STOP:
                    return
                self.skip(inner, depth + 1)
        else:
            raise ValueError(f"unknown compact type {kind}")
        if self.at > len(self.data):
            raise ValueError("field past the end")

    def names(self) -> tuple[str, ...]:
        last = 0
        while True:
            last, kind = self.field(last)
            if kind == _STOP:
                raise ValueError("no schema")
            if last == 2 and kind == _LIST:
                break
            self.skip(kind)
        size, elem = self.list_head()
        if elem != _STRUCT or size < 1:
            raise ValueError("schema is not a list of structs")
        elements = [self.element() for _ in range(size)]
        out = []
        at = 1
        for _ in range(elements[0][1]):
            if at >= len(elements):
                raise ValueError("fewer schema elements than the root's children")
            out.append(elements[at][0])
            at = _after(elements, at)
        return tuple(out)

    def element(self) -> tuple[str, int]:
        """(name, num_children) of one SchemaElement."""
        name, children, last = None, 0, 0
        while True:
            last, kind = self.field(last)
            if kind == _STOP:
                break
            if last == 4 and kind == _BINARY:
                name = self.binary().decode("utf-8")
            elif last == 5 and kind == _I32:
                children = self.zigzag()
            else:
                self.skip(kind)
        if name is None or children < 0:
            raise ValueError("schema element without a name")
        return name, children


def _after(elements: list[tuple[str, int]], at: int) -> int:
    """The index just past the subtree of elements[at] (depth first, by num_children)."""
    pending = 1
    while pending:
        if at >= len(elements):
            raise ValueError("schema ends inside a subtree")
        pending += elements[at][1] - 1
        at += 1
    return at
