"""Dataset discovery (sources/datasets.py, sources/peek.py): a landing root split into datasets
and loose files, checked on the layouts of tests/fixtures/datasets/make_layouts.py against the
split worked out by hand (expected.json), against pyarrow's hive-partitioned datasets, and the
peeks against the readers of pyarrow and Python's csv module.
"""

from __future__ import annotations

import bz2
import csv
import gzip
import importlib.util
import io
import json
import lzma
import os
import shutil
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.csv as pcsv
import pyarrow.dataset as pads
import pyarrow.json as pjson
import pyarrow.parquet as pq
import pytest
import zstandard

import driftline
from conftest import fixture_path
from driftline.core.fileref import FileRef
from driftline.sources.datasets import FIELD_OVERLAP, Layout, find_datasets, peek_fields, split_datasets
from driftline.sources.discover import Discovery, discover
from driftline.sources.peek import HEAD_BYTES, Peek

EXPECTED = json.loads(fixture_path("datasets/expected.json").read_text(encoding="utf-8"))["layouts"]


def _make_layouts() -> Any:
    spec = importlib.util.spec_from_file_location("make_layouts", fixture_path("datasets/make_layouts.py"))
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def layouts(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("layouts")
    _make_layouts().main(out, [])
    return out


def test_every_layout_has_its_expectation() -> None:
    assert sorted(_make_layouts().LAYOUTS) == sorted(EXPECTED)


def _as_json(layout: Layout) -> dict[str, Any]:
    return {
        "datasets": {
            d.name: {
                "folder": d.folder,
                "files": [f.rel for f in d.files],
                "formats": list(d.formats),
                "partition_keys": list(d.partition_keys),
                "fields": list(d.fields),
            }
            for d in layout.datasets
        },
        "skipped": {s.rel: s.reason for s in layout.skipped},
        "notices": [[n.kind, list(n.paths)] for n in layout.notices],
    }


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_layout_splits_as_worked_out(layouts: Path, name: str) -> None:
    want = EXPECTED[name]
    layout = find_datasets(layouts / name)
    got = _as_json(layout)
    assert got["datasets"] == want["datasets"]
    assert got["skipped"] == want["skipped"]
    assert got["notices"] == want["notices"]
    assert sorted(x.file.rel for x in layout.loose) == sorted(want["loose"])
    for loose in layout.loose:
        assert want["loose"][loose.file.rel] in loose.reason
    assert all(n.message for n in layout.notices)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_every_file_ends_in_one_dataset_or_loose(layouts: Path, name: str) -> None:
    found = discover([layouts / name])
    layout = find_datasets(layouts / name)
    in_datasets = [f.rel for d in layout.datasets for f in d.files]
    loose = [x.file.rel for x in layout.loose]
    assert len(in_datasets) + len(loose) == len(found.files)
    assert sorted(in_datasets + loose) == [f.rel for f in found.files]  # each once, none lost
    assert layout.skipped == found.skipped  # what discovery skipped stays listed as skipped
    on_disk = sum(len(files) for _, _, files in os.walk(layouts / name))
    assert len(in_datasets) + len(loose) + len(layout.skipped) == on_disk


# -- the outside reference: pyarrow's hive-partitioned datasets ----------------------------------

# source: pyarrow.dataset.dataset: format names "json" (newline-delimited), "csv", "parquet";
# HivePartitioning reads key=value folder names; files and folders whose names start with one
# of ignore_prefixes ('.' and '_' by default) are not discovered.
_ARROW_FORMAT = {"jsonl": "json", "csv": "csv", "tsv": "csv", "parquet": "parquet"}


def _others(folder: Path, mine: set[Path]) -> list[str]:
    """The names, directly in or below folder, that lead only to files that are not the dataset's:
    passed to pyarrow as prefixes to ignore so that it lists the dataset's folder alone."""
    out = set()
    for top, dirs, files in os.walk(folder):
        for entry in [*dirs, *files]:
            path = Path(top) / entry
            if path in mine or any(m.is_relative_to(path) for m in mine):
                continue
            out.add(entry)
        dirs[:] = [d for d in dirs if any(m.is_relative_to(Path(top) / d) for m in mine)]
    return sorted(out)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_pyarrow_reads_exactly_each_dataset(layouts: Path, name: str) -> None:
    root = layouts / name
    layout = find_datasets(root)
    assert layout.datasets
    for d in layout.datasets:
        mine = {Path(f.path) for f in d.files}
        lone = d.name != d.folder  # a lone reference file: the dataset is the file itself
        source = d.files[0].path if lone else root / d.folder if d.folder != "." else root
        ignore = [".", "_", *([] if lone else _others(Path(source), mine))]
        # source: Arrow's hive partitioning (pyarrow.dataset.dataset(..., partitioning="hive"))
        arrow = pads.dataset(
            str(source), format=_ARROW_FORMAT[d.files[0].format], partitioning="hive", ignore_prefixes=ignore
        )
        assert sorted(arrow.files) == sorted(str(p) for p in mine), d.name
        found = {
            k for fragment in arrow.get_fragments() for k in pads.get_partition_keys(fragment.partition_expression)
        }
        keys = arrow.partitioning.schema.names if found else []  # the hive schema, outermost key first
        assert set(keys) == found and list(keys) == list(d.partition_keys), d.name


# -- identity ----------------------------------------------------------------------------------


def test_names_stay_when_partitions_and_files_are_added(tmp_path: Path) -> None:
    _make_layouts().done_when(tmp_path)
    before = find_datasets(tmp_path)
    day = tmp_path / "readings" / "region=west" / "day=2026-03-03"
    day.mkdir(parents=True)
    (day / "part-0.jsonl").write_text(json.dumps(_make_layouts().reading("w0", 0)) + "\n")
    shutil.copy(
        tmp_path / "depot_exports" / "depots-2026-03-01.csv", tmp_path / "depot_exports" / "depots-2026-03-04.csv"
    )
    after = find_datasets(tmp_path)
    assert [d.name for d in after.datasets] == [d.name for d in before.datasets]
    grown = {d.name: len(d.files) - len(before.dataset(d.name).files) for d in after.datasets}
    assert grown == {"depot_exports": 1, "readings": 1, "stations.parquet": 0}
    assert after.dataset("readings").partition_keys == ("region", "day")


def test_a_root_of_one_table_is_one_dataset(tmp_path: Path) -> None:
    for day in ("1", "2"):
        (tmp_path / f"day={day}").mkdir()
        (tmp_path / f"day={day}" / "a.jsonl").write_text('{"x": 1, "y": 2}\n')
    layout = driftline.datasets(tmp_path)
    assert [(d.name, d.folder, d.partition_keys, len(d.files)) for d in layout.datasets] == [(".", ".", ("day",), 2)]
    assert layout.loose == () and layout.notices == ()


# -- the field overlap rule (pure) ---------------------------------------------------------------


def _ref(rel: str, fmt: str = "jsonl") -> FileRef:
    return FileRef("/r/" + rel, rel, (), fmt, None, 1, 0)  # type: ignore[arg-type]


def _split(peeks: dict[str, tuple[str, ...]], fmt: str = "jsonl") -> Layout:
    refs = tuple(_ref(rel, fmt) for rel in sorted(peeks))
    return split_datasets(Discovery("/r", refs, ()), {rel: Peek(fields) for rel, fields in peeks.items()})


def test_jaccard_threshold_decides_one_table_or_two() -> None:
    assert FIELD_OVERLAP == 0.5
    # {a,b,c} and {b,c,d}: 2 shared of 4 names, Jaccard 0.5: one table
    half = _split({"t/1.jsonl": ("a", "b", "c"), "t/2.jsonl": ("b", "c", "d")})
    assert [(d.name, len(d.files)) for d in half.datasets] == [("t", 2)]
    # {a,b,c} and {c,d,e}: 1 shared of 5, Jaccard 0.2: the second file is another table, loose
    # beside the first one's (a folder of one file each: each is named after its file)
    apart = _split({"t/1.jsonl": ("a", "b", "c"), "t/2.jsonl": ("c", "d", "e")})
    assert [d.name for d in apart.datasets] == ["t/1.jsonl", "t/2.jsonl"]
    three = _split({"t/1.jsonl": ("a", "b"), "t/2.jsonl": ("a", "b"), "t/3.jsonl": ("x", "y"), "t/4.jsonl": ("x", "y")})
    assert [(d.name, [f.rel for f in d.files]) for d in three.datasets] == [("t", ["t/1.jsonl", "t/2.jsonl"])]
    assert [(x.file.rel, x.reason) for x in three.loose] == [
        (
            rel,
            "one of 2 files of another table in folder 't' (its fields share 0 of 4 names with dataset 't'): "
            "give that table a folder of its own",
        )
        for rel in ("t/3.jsonl", "t/4.jsonl")
    ]


def test_drift_chains_keep_one_table_and_order_does_not_matter() -> None:
    # each file adds one column and drops the oldest: far from the first file, close to the last
    peeks = {f"t/{k}.jsonl": tuple(f"c{j}" for j in range(k, k + 4)) for k in range(6)}
    layout = _split(peeks)
    assert [(d.name, len(d.files)) for d in layout.datasets] == [("t", 6)]
    backwards = {rel: Peek(fields) for rel, fields in reversed(list(peeks.items()))}
    assert split_datasets(Discovery("/r", tuple(_ref(r) for r in sorted(peeks)), ()), backwards) == layout


def test_an_empty_file_joins_its_folders_table() -> None:
    layout = _split({"t/1.jsonl": ("a", "b"), "t/2.jsonl": (), "t/3.jsonl": ("a", "b")})
    assert [(d.name, len(d.files)) for d in layout.datasets] == [("t", 3)]


# -- the peek: heads and footers, never a full read ----------------------------------------------

ROWS = [{"id": 1, "name": "a", "temp": 1.5}, {"id": 2, "name": "b", "temp": 2.5, "extra": True}]


def _one(folder: Path) -> FileRef:
    (ref,) = discover([folder]).files
    return ref


@pytest.mark.parametrize(
    ("suffix", "compress"),
    [
        ("", lambda b: b),
        (".gz", lambda b: gzip.compress(b)),  # source: Python's gzip module writes RFC 1952 members
        (".bz2", lambda b: bz2.compress(b)),
        (".xz", lambda b: lzma.compress(b)),
        (".zst", lambda b: zstandard.ZstdCompressor().compress(b)),
    ],
)
def test_json_lines_peek_through_every_compression(tmp_path: Path, suffix: str, compress: Any) -> None:
    data = "".join(json.dumps(r) + "\n" for r in ROWS).encode()
    (tmp_path / f"a.jsonl{suffix}").write_bytes(compress(data))
    got = peek_fields(_one(tmp_path))
    # source: pyarrow.json.read_json gives the same top-level columns in the same order
    (tmp_path / "plain.jsonl").write_bytes(data)
    assert got == Peek(tuple(pjson.read_json(tmp_path / "plain.jsonl").column_names))
    assert got.fields == ("id", "name", "temp", "extra")


def test_csv_peek_is_the_header_row(tmp_path: Path) -> None:
    rows = [["station id", "temp", "note"], ["a", "1.5", "x, y"], ["b", "2.5", ""]]
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\r\n").writerows(rows)
    (tmp_path / "a.csv").write_text(buf.getvalue(), encoding="utf-8")
    got = peek_fields(_one(tmp_path))
    # source: pyarrow.csv.read_csv and Python's csv.reader read the same header (RFC 4180 section 2)
    assert got.fields == tuple(pcsv.read_csv(tmp_path / "a.csv").column_names) == tuple(rows[0])


def test_tsv_in_utf16_and_semicolon_csv(tmp_path: Path) -> None:
    (tmp_path / "a.tsv").write_bytes("\ufeffk\tv\n1\t2\n".encode("utf-16-le"))
    assert peek_fields(_one(tmp_path)).fields == ("k", "v")
    (tmp_path / "a.tsv").unlink()
    (tmp_path / "b.csv").write_text("k;v;v\n1;2;3\n")
    assert peek_fields(_one(tmp_path)).fields == ("k", "v", "v_2")  # as the CSV reader names repeats


def test_parquet_peek_reads_the_footer(tmp_path: Path) -> None:
    table = pa.table({"id": [1], "pos": [{"lat": 1.0}], "tags": [["x"]]})
    pq.write_table(table, tmp_path / "a.parquet")
    assert peek_fields(_one(tmp_path)).fields == ("id", "pos", "tags")  # the top-level columns written


def test_json_document_peek(tmp_path: Path) -> None:
    (tmp_path / "a.json").write_text(json.dumps(ROWS, indent=2))
    assert peek_fields(_one(tmp_path)).fields == ("id", "name", "temp", "extra")


def test_peek_reads_only_the_head(tmp_path: Path) -> None:
    # whole lines of one table for twice the head, then bytes that are not JSON: a full read
    # would meet them, the head never does
    line = json.dumps(ROWS[0]).encode() + b"\n"
    body = line * (2 * HEAD_BYTES // len(line)) + b"\xff not json\n"
    (tmp_path / "a.jsonl").write_bytes(body)
    assert peek_fields(_one(tmp_path)) == Peek(("id", "name", "temp"))


@pytest.mark.parametrize(
    ("name", "data", "words"),
    [
        ("a.parquet", b"PAR1 cut short", "its head cannot be read"),
        ("a.jsonl.gz", gzip.compress(b'{"a": 1}\n' * 100)[:20], "its head cannot be read"),
        ("a.jsonl", b"[1, 2]\n[3]\n", "are not JSON objects"),
        ("a.jsonl", b"not json at all\n", "line 1 of its head is not JSON"),
    ],
)
def test_a_bad_head_is_a_loose_file_with_its_reason(tmp_path: Path, name: str, data: bytes, words: str) -> None:
    (tmp_path / "t").mkdir()
    (tmp_path / "t" / name).write_bytes(data)
    (tmp_path / "t" / "good.jsonl").write_text('{"a": 1}\n')
    layout = find_datasets(tmp_path)
    assert [d.name for d in layout.datasets] == ["t"]
    (loose,) = layout.loose
    assert loose.file.rel == f"t/{name}" and words in loose.reason


@pytest.mark.timeout(60)
def test_many_files_and_folders_split_in_bounded_time() -> None:
    # 12,000 files: a hive table of 2,000 days whose columns are renamed one every 50 days, and
    # 4,000 exports in plain year/month/day folders (one table spread over folders); quadratic
    # work in the files or folders would take minutes here
    peeks: dict[str, tuple[str, ...]] = {}
    for d in range(2000):
        for k in range(4):
            peeks[f"events/day={d:05d}/part-{k}.jsonl"] = tuple(f"c{j}" for j in range(d // 50, d // 50 + 6))
    for d in range(4000):
        peeks[f"exports/{2000 + d // 336}/{d // 28 % 12 + 1:02d}/{d:05d}/ledger.jsonl"] = ("entry", "amount", "booked")
    refs = tuple(_ref(rel) for rel in sorted(peeks))
    layout = split_datasets(Discovery("/r", refs, ()), {rel: Peek(f) for rel, f in peeks.items()})
    assert [(d.name, len(d.files), d.partition_keys) for d in layout.datasets] == [
        ("events", 8000, ("day",)),
        ("exports", 4000, ()),
    ]
    assert [n.kind for n in layout.notices] == ["spread"] and layout.loose == ()


def test_a_json_document_bigger_than_the_head_that_is_no_array(tmp_path: Path) -> None:
    (tmp_path / "big.json").write_text(json.dumps({"a": 1, "blob": "x" * (2 * HEAD_BYTES)}, indent=1))
    got = peek_fields(_one(tmp_path))
    assert got == Peek(problem=f"a JSON document larger than its first {HEAD_BYTES:,} bytes that is not an array")
