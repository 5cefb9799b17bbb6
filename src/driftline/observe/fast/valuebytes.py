"""The bytes the values of an Arrow string or binary array take, for checks done on bytes in
one C call (a search, a count) instead of a compute kernel's pass per value."""

from __future__ import annotations

import pyarrow as pa


def value_view(arr: pa.Array) -> memoryview:
    """The part of the data buffer that arr's values take, without a copy (a slice of a bigger
    array takes part of it; a null value may take some bytes too)."""
    if len(arr) == 0 or arr.buffers()[2] is None:
        return memoryview(b"")
    _, offsets, data = arr.buffers()
    width = 8 if pa.types.is_large_string(arr.type) or pa.types.is_large_binary(arr.type) else 4
    end = arr.offset + len(arr)
    bounds = memoryview(offsets)[: (end + 1) * width].cast("q" if width == 8 else "i")
    return memoryview(data)[bounds[arr.offset] : bounds[end]]


def value_bytes(arr: pa.Array) -> bytes:
    """value_view as bytes (one copy), for the bytes methods (translate, count, isascii)."""
    return bytes(value_view(arr))
