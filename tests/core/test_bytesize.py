"""Byte sizes as people write them, held to the definitions of IEC 80000-13."""

from __future__ import annotations

import pytest

from driftline.core.bytesize import exact_bytes, parse_bytes

# source: IEC 80000-13 binary prefixes: Ki = 2^10, Mi = 2^20, Gi = 2^30, Ti = 2^40;
# source: SI prefixes (BIPM SI Brochure 9th ed., table 7): k = 10^3, M = 10^6, G = 10^9
PARSED = [
    ("1048576", 1_048_576),
    ("64GiB", 64 * 1024**3),
    ("64 GiB", 68_719_476_736),
    ("64MiB", 67_108_864),
    ("1KiB", 1024),
    ("1 TiB", 1_099_511_627_776),
    ("1.5KiB", 1536),
    ("1kB", 1000),
    ("1 MB", 1_000_000),
    ("2GB", 2_000_000_000),
    ("512B", 512),
    ("64gib", 68_719_476_736),
]


@pytest.mark.parametrize(("text", "n"), PARSED)
def test_parse_bytes_follows_the_prefixes(text, n):
    assert parse_bytes(text) == n


@pytest.mark.parametrize("text", ["", "GiB", "64XB", "-1", "1.3B", "64 Gi B"])
def test_what_is_not_a_byte_size_is_refused(text):
    with pytest.raises(ValueError):
        parse_bytes(text)


def test_the_refusal_names_the_units():
    with pytest.raises(ValueError) as info:
        parse_bytes("64XB")
    assert str(info.value) == (
        "'64XB' is not a byte size; write a number of bytes, or one with a unit: KiB, MiB, GiB, TiB "
        "(powers of 1024) or kB, MB, GB, TB (powers of 1000), e.g. 64MiB"
    )


@pytest.mark.parametrize(
    ("n", "text"),
    [(68_719_476_736, "64 GiB"), (67_108_864, "64 MiB"), (1024, "1 KiB"), (1536, "1.5 KiB"), (1000, "1000 B")],
)
def test_exact_bytes_reads_back(n, text):
    assert exact_bytes(n) == text
    assert parse_bytes(text) == n
