"""sources/footer.py: the top-level column names decoded from a Parquet footer alone, held to
pyarrow's pq.read_schema on the Apache Parquet conformance files and on files written here.
"""

from __future__ import annotations

from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import SHARED_TESTDATA
from driftline.sources.footer import TAIL_BYTES, top_level_names

SUITE = SHARED_TESTDATA / "parquet-conformance"
FILES = sorted(p for d in ("data", "bad_data") for p in (SUITE / d).rglob("*.parquet*") if p.is_file())
# Footers pyarrow 26.0.1 refuses although their schema list decodes (R: run on these files):
# the names are still those of the schema the file declares, and the scan reports the file.
PYARROW_REFUSES = {"bad_data/PARQUET-1481.parquet": ("Handle",), "data/incorrect_map_schema.parquet": ("my_map",)}


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.relative_to(SUITE).as_posix())
def test_conformance_files_give_pyarrows_names(path: Path) -> None:
    name = path.relative_to(SUITE).as_posix()
    got = top_level_names(str(path))
    if name in PYARROW_REFUSES:
        assert got == PYARROW_REFUSES[name]
        with pytest.raises(Exception):  # noqa: B017 - whichever error pyarrow raises, it refuses
            pq.read_schema(path)
        return
    try:
        want = tuple(pq.read_schema(path).names)  # source: pyarrow's reading of the footer
    except Exception:  # noqa: BLE001 - an encrypted or broken footer: None, and the caller asks pyarrow
        assert got is None
        return
    assert got in (want, None)
    if path.name.endswith(".parquet") and not path.name.startswith("encrypt"):
        assert got == want


def test_nested_and_wide_schemas(tmp_path: Path) -> None:
    # more than 14 columns (a list size past the compact protocol's short form), nested structs,
    # lists and maps whose children are skipped, names outside ASCII, a long name
    cols = {f"c{i:02d}": pa.array([i]) for i in range(20)}
    cols["pos"] = pa.array([{"lat": 1.0, "inner": {"deep": [1, 2]}}])
    cols["tags"] = pa.array([["a", "b"]])
    cols["attrs"] = pa.array([[("k", 1)]], pa.map_(pa.string(), pa.int64()))
    cols["température"] = pa.array([1.5])
    cols["n" * 300] = pa.array([True])
    cols["price"] = pa.array([1], pa.decimal128(9, 2))
    cols["at"] = pa.array([0], pa.timestamp("us", tz="UTC"))
    path = tmp_path / "wide.parquet"
    pq.write_table(pa.table(cols), path)
    assert top_level_names(str(path)) == tuple(pq.read_schema(path).names) == tuple(cols)


def test_a_footer_bigger_than_the_tail_read(tmp_path: Path) -> None:
    cols = {f"column_with_a_long_name_{i:05d}": pa.array([i]) for i in range(3000)}
    path = tmp_path / "big-footer.parquet"
    pq.write_table(pa.table(cols), path)
    assert pq.read_metadata(path).serialized_size > TAIL_BYTES
    assert top_level_names(str(path)) == tuple(cols)


@pytest.mark.parametrize(
    "data", [b"", b"PAR1", b"PAR1" + b"\x00" * 8 + b"PAR1", b"PAR1\xff\xff\xff\xff\x05\x00\x00\x00PAR1"]
)
def test_not_a_footer_is_none(tmp_path: Path, data: bytes) -> None:
    (tmp_path / "x.parquet").write_bytes(data)
    assert top_level_names(str(tmp_path / "x.parquet")) is None


def test_footers_of_one_writer_decode_alike(tmp_path: Path) -> None:
    # the same schema with other row groups (the start of the footer seen before), then schemas
    # that differ from it only in their last column's name or type
    for k, extra in enumerate(["zz", "zz", "zy"]):
        cols = {"id": pa.array(range(k + 1)), "name": pa.array(["a"] * (k + 1)), extra: pa.array([1.5] * (k + 1))}
        pq.write_table(pa.table(cols), tmp_path / f"p{k}.parquet")
    pq.write_table(pa.table({"id": [1], "name": ["a"], "zz": ["text"]}), tmp_path / "p3.parquet")
    for k in range(4):
        path = tmp_path / f"p{k}.parquet"
        assert top_level_names(str(path)) == tuple(pq.read_schema(path).names)  # source: pyarrow
    assert top_level_names(str(tmp_path / "p2.parquet")) == ("id", "name", "zy")
