"""observe/fast/columnar.py: Arrow columns observed with pyarrow.compute, equal to the reference
record walk on the same values, and every Arrow and Parquet type observed, or left out for
that column alone with one warning.

pyarrow is the reference: a Parquet file per type is written with it, `pq.read_schema` says
which Arrow type the file holds, `null_count` how many nulls, and `to_pylist` how many
values sit below a nested column. The type key expected for each Arrow type is written out
beside it (the lattice folds encodings and physical widths into one logical type).
"""

from __future__ import annotations

import datetime as dt
import decimal
import json
import multiprocessing
import uuid
import warnings
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest
from jsonschema import Draft202012Validator
from typer.testing import CliRunner

import driftline
from conftest import ROOT, import_test_module
from driftline.cli import app
from driftline.core.lattice import from_arrow
from driftline.core.stats import NULL_SAMPLE, type_sample
from driftline.observe.fast import columnar
from driftline.observe.fast.bulk import Batch, observe_batches
from driftline.observe.fast.columnar import observe_table
from driftline.observe.records import observe_records
from driftline.results.report import to_dict

D = decimal.Decimal
U1, U2 = uuid.UUID("f81d4fae-7dec-11d0-a765-00a0c91e6bf6"), uuid.UUID("00000000-0000-0000-0000-000000000001")
INTERVAL_WHY = "Arrow type month_day_nano_interval has no driftline type (intervals are not supported)"


def _ext(t: pa.DataType, storage: pa.Array) -> pa.Array:
    return pa.ExtensionArray.from_storage(t, storage)


def _union(mode: str) -> pa.Array:
    codes = pa.array([0, 1, 0, 1, 0], pa.int8())
    if mode == "dense":
        offsets = pa.array([0, 0, 1, 1, 2], pa.int32())
        return pa.UnionArray.from_dense(codes, offsets, [pa.array([1, None, 3]), pa.array(["a", "b"])], ["i", "s"])
    return pa.UnionArray.from_sparse(
        codes, [pa.array([1, 9, None, 9, 5]), pa.array(["x", "a", "x", None, "x"])], ["i", "s"]
    )


# (id, column, type key of the values, Arrow type pq.read_schema reports for it).
# Parquet keeps some types in another unit or form; each such entry names its source.
_TS = dt.datetime(2024, 2, 29, 12, 30)
CASES: list[tuple[str, pa.Array, str, pa.DataType | None]] = [
    ("bool", pa.array([True, None, False, True, None]), "bool", None),
    ("null", pa.nulls(5), "null", None),
    *[
        (n, pa.array([1, None, 0, 7, 100], getattr(pa, n)()), n, None)
        for n in ("int8", "int16", "int32", "int64", "uint8", "uint16", "uint32", "uint64")
    ],
    ("uint64-max", pa.array([2**64 - 1, None, 0, 1, 2], pa.uint64()), "uint64", None),  # source: uint64 range
    ("float16", pa.array([1.5, None, -0.0, 65504.0, 2.0], pa.float16()), "float16", None),  # source: IEEE 754 binary16
    ("float32", pa.array([1.5, None, float("nan"), 2.0, None], pa.float32()), "float32", None),
    ("float64", pa.array([1.5, None, float("inf"), 2.0, -1e308], pa.float64()), "float64", None),
    ("decimal32", pa.array([D("1.23"), None, D("-4.00"), D("999.99"), None], pa.decimal32(5, 2)), "decimal(5,2)", None),
    ("decimal64", pa.array([D("1.23"), None, D("-4.00"), None, D("0")], pa.decimal64(12, 2)), "decimal(12,2)", None),
    ("decimal128", pa.array([D("1.2345"), None, D("0"), None, D("-7")], pa.decimal128(20, 4)), "decimal(20,4)", None),
    (
        "decimal256",
        pa.array([D("1.23"), None, D("-4.00"), None, D("1" * 48)], pa.decimal256(50, 2)),
        "decimal(50,2)",
        None,
    ),
    ("date32", pa.array([dt.date(2024, 2, 29), None, dt.date(1, 1, 1), dt.date(9999, 12, 31), None]), "date32", None),
    # source: Parquet LogicalTypes.md, DATE is days since the epoch (int32): pyarrow reads date64 back as date32
    (
        "date64",
        pa.array([dt.date(2024, 2, 29), None, dt.date(1970, 1, 1), None, None], pa.date64()),
        "date32",
        pa.date32(),
    ),
    # source: Parquet LogicalTypes.md, TIME units are MILLIS, MICROS, NANOS: seconds come back as ms
    ("time32-s", pa.array([1, None, 86399, 0, 5], pa.time32("s")), "time32[ms]", pa.time32("ms")),
    ("time32-ms", pa.array([1, None, 86399999, 0, 5], pa.time32("ms")), "time32[ms]", None),
    ("time64-us", pa.array([1, None, 2, 0, 5], pa.time64("us")), "time64[us]", None),
    ("time64-ns", pa.array([1, None, 2, 0, 5], pa.time64("ns")), "time64[ns]", None),
    # source: Parquet LogicalTypes.md, TIMESTAMP units are MILLIS, MICROS, NANOS: seconds come back as ms
    *[
        (
            f"timestamp-{u}-{tz or 'local'}",
            pa.array([_TS, None, dt.datetime(1970, 1, 1), None, _TS], pa.timestamp(u, tz)),
            f"timestamp[{'ms' if u == 's' else u}{', ' + tz if tz else ''}]",
            pa.timestamp("ms", tz) if u == "s" else None,
        )
        for u in ("s", "ms", "us", "ns")
        for tz in (None, "UTC", "Europe/Paris", "+05:30")
    ],
    *[
        (f"duration-{u}", pa.array([1, None, -4, 0, 2**40], pa.duration(u)), f"duration[{u}]", None)
        for u in ("s", "ms", "us", "ns")
    ],
    ("binary", pa.array([b"ab", None, b"", b"\xff\x00", None]), "binary", None),
    ("large_binary", pa.array([b"ab", None, b"", b"\xff", None], pa.large_binary()), "binary", None),
    ("fixed_size_binary", pa.array([b"abc", None, b"\x00\x01\x02", None, b"xyz"], pa.binary(3)), "binary", None),
    ("binary_view", pa.array([b"ab", None, b"a" * 40, b"", None], pa.binary_view()), "binary", None),
    ("string", pa.array(["a", None, "", "déjà vu", "42"]), "string", None),
    ("large_string", pa.array(["a", None, "", "b", None], pa.large_string()), "string", None),
    ("string_view", pa.array(["a", None, "x" * 40, "", "7"], pa.string_view()), "string", None),
    ("list", pa.array([[1, None], None, [], [3], [4, 5, 6]], pa.list_(pa.int32())), "list", None),
    ("large_list", pa.array([["a"], None, [], [None, "b"], None], pa.large_list(pa.string())), "list", None),
    (
        "list_view",
        pa.array([[1], None, [2, 3], [], [None]], pa.list_view(pa.int64())),
        "list",
        pa.list_view(pa.field("element", pa.int64())),
    ),  # source: Parquet LogicalTypes.md, LIST's child is "element"
    (
        "large_list_view",
        pa.array([[1], None, [2, 3], [], None], pa.large_list_view(pa.int64())),
        "list",
        pa.large_list_view(pa.field("element", pa.int64())),
    ),
    ("fixed_size_list", pa.array([[1, 2], None, [3, None], [0, 0], None], pa.list_(pa.int16(), 2)), "list", None),
    (
        "struct",
        pa.array(
            [{"a": 1, "b": "x"}, None, {"a": None, "b": "y"}, {"a": 3, "b": None}, {"a": 4, "b": "z"}],
            pa.struct([("a", pa.int64()), ("b", pa.string())]),
        ),
        "struct",
        None,
    ),
    (
        "map",
        pa.array([[("k", 1)], None, [], [("a", None), ("b", 2)], [("z", 3)]], pa.map_(pa.string(), pa.int64())),
        "map",
        None,
    ),
    ("dictionary-string", pa.array(["a", None, "b", "a", None]).dictionary_encode(), "string", None),
    # source: pyarrow's Parquet writer keeps a dictionary of strings or binaries as one (ARROW:schema); other
    # value types come back plain
    (
        "dictionary-large_string",
        pa.array(["a", None, "b", "a", None], pa.large_string()).dictionary_encode(),
        "string",
        pa.dictionary(pa.int32(), pa.string()),
    ),
    ("dictionary-binary", pa.array([b"a", None, b"b", b"a", None]).dictionary_encode(), "binary", None),
    *[
        (f"dictionary-{n}", arr.dictionary_encode(), key, arr.type)
        for n, arr, key in (
            ("int64", pa.array([5, None, 5, 7, 7]), "int64"),
            ("float64", pa.array([1.5, None, 1.5, 2.0, None]), "float64"),
            ("bool", pa.array([True, None, True, False, None]), "bool"),
            ("decimal128", pa.array([D("1.5"), None, D("1.5"), D("2.5"), None]), "decimal(2,1)"),
            ("date32", pa.array([dt.date(2020, 1, 1), None, dt.date(2020, 1, 1), None, None]), "date32"),
            ("timestamp-us", pa.array([_TS, None, _TS, None, _TS], pa.timestamp("us")), "timestamp[us]"),
            ("fixed_size_binary", pa.array([b"ab", None, b"ab", b"cd", None], pa.binary(2)), "binary"),
        )
    ],
    # source: pyarrow writes a dictionary of durations as its int64 storage, without the ARROW:schema hint
    (
        "dictionary-duration",
        pa.array([1, None, 1, 3, None], pa.duration("ms")).dictionary_encode(),
        "int64",
        pa.int64(),
    ),
    # Canonical extension types (Arrow format, canonical extensions): their storage, bool8 as a boolean.
    ("json", _ext(pa.json_(), pa.array(['{"a": 1}', None, "[1, 2]", "2", "null"])), "string", None),
    ("uuid", _ext(pa.uuid(), pa.array([U1.bytes, None, U2.bytes, None, U1.bytes], pa.binary(16))), "binary", None),
    ("bool8", _ext(pa.bool8(), pa.array([1, None, 0, -3, None], pa.int8())), "bool", None),
    (
        "fixed_shape_tensor",
        _ext(
            pa.fixed_shape_tensor(pa.int32(), [2]),
            pa.array([[1, 2], None, [3, 4], [5, 6], None], pa.list_(pa.int32(), 2)),
        ),
        "list",
        None,
    ),
    (
        "opaque",
        _ext(pa.opaque(pa.binary(), "geometry", "postgis"), pa.array([b"\x01", None, b"", b"\x02", None])),
        "binary",
        None,
    ),
]

# Types Parquet cannot hold (pyarrow 26 refuses to write them): observed from Arrow data.
IN_MEMORY: list[tuple[str, pa.Array, dict[str, int], int]] = [  # id, column, types observed, nulls
    ("run_end_encoded", pa.RunEndEncodedArray.from_arrays([2, 3, 5], pa.array([7, None, 8])), {"int64": 4}, 1),
    ("dense_union", _union("dense"), {"int64": 2, "string": 2}, 1),
    ("sparse_union", _union("sparse"), {"int64": 2, "string": 1}, 2),
    (
        "dictionary-string_view",
        pa.array(["a", None, "a", "b", None], pa.string_view()).dictionary_encode(),
        {"string": 3},
        2,
    ),
    (
        "dictionary-binary_view",
        pa.array([b"a", None, b"a", b"b", None], pa.binary_view()).dictionary_encode(),
        {"binary": 3},
        2,
    ),
]
NEIGHBOUR = pa.array([10, 20, None, 40, 50], pa.int64())


def _expected_counts(values: list[Any], t: pa.DataType, path: str, out: dict[str, list[int]]) -> None:
    """[non-null values, nulls] per path below a column, walking the Python values pyarrow gives."""
    while pa.types.is_dictionary(t) or isinstance(t, pa.BaseExtensionType):
        t = t.value_type if pa.types.is_dictionary(t) else t.storage_type
    counts = out.setdefault(path, [0, 0])
    present = [v for v in values if v is not None]
    counts[0] += len(present)
    counts[1] += len(values) - len(present)
    if pa.types.is_struct(t):
        for f in t:
            _expected_counts([v[f.name] for v in present], f.type, f"{path}.{f.name}", out)
    elif pa.types.is_map(t):
        entries = [e for v in present for e in v]
        _expected_counts([k for k, _ in entries], t.key_type, path + "{key}", out)
        _expected_counts([x for _, x in entries], t.item_type, path + "{value}", out)
    elif hasattr(t, "value_type") and not pa.types.is_run_end_encoded(t):  # the list kinds
        items = [x for v in present for x in v]
        if items:
            _expected_counts(items, t.value_type, path + "[]", out)


def _values(arr: pa.Array) -> list[Any]:
    """The Python values of a column; for a flat one only whether each is there (a timestamp
    in nanoseconds has no Python value)."""
    if isinstance(arr.type, pa.BaseExtensionType):
        arr = arr.storage
    if pa.types.is_nested(arr.type):
        return arr.to_pylist()
    return [True if v else None for v in pc.is_valid(arr).to_pylist()]


def _write(tmp_path: Path, name: str, arr: pa.Array) -> Path:
    folder = tmp_path / name.replace("/", "-")
    folder.mkdir()
    pq.write_table(pa.table({"col": arr, "n": NEIGHBOUR}), folder / "part.parquet")
    return folder


@pytest.mark.parametrize(("name", "arr", "key", "read_type"), CASES, ids=[c[0] for c in CASES])
def test_each_parquet_type_is_observed_as_pyarrow_reads_it(
    tmp_path: Path, name: str, arr: pa.Array, key: str, read_type: pa.DataType | None
) -> None:
    folder = _write(tmp_path, name, arr)
    schema = pq.read_schema(folder / "part.parquet")
    assert schema.field("col").type == (read_type or arr.type)
    column = pq.read_table(folder / "part.parquet").column("col")
    profile = driftline.scan(folder, batch_rows=2)  # three batches: counts must add up across them
    (file,) = profile.files
    assert file.issues == () and file.rows == 5
    stats = profile.fields["col"].stats
    valid = len(column) - column.null_count
    assert stats.types == ({key: valid} if valid and key != "null" else {})
    assert stats.nulls == column.null_count  # source: pyarrow null_count
    # what the footer declares is the type the values were observed as
    assert file.declared is not None
    assert file.declared["col"] == key == from_arrow(schema.field("col").type).shallow_key()
    expected: dict[str, list[int]] = {}
    _expected_counts(_values(column.combine_chunks()), column.type, "col", expected)
    got = {p: [f.stats.nonnull, f.stats.nulls] for p, f in profile.fields.items() if p.startswith("col")}
    assert got == expected
    # the neighbouring column: exact counts and extremes (source: pyarrow null_count, min_max)
    n = profile.fields["n"].stats
    assert (n.types, n.nulls, n.minimum, n.maximum) == ({"int64": 4}, 1, 10, 50)


@pytest.mark.parametrize(("name", "arr", "types", "nulls"), IN_MEMORY, ids=[c[0] for c in IN_MEMORY])
def test_arrow_types_parquet_cannot_hold_are_observed(
    name: str, arr: pa.Array, types: dict[str, int], nulls: int
) -> None:
    with pytest.raises(pa.ArrowNotImplementedError):  # source: pyarrow 26 Parquet writer
        pq.write_table(pa.table({"col": arr}), pa.BufferOutputStream())
    obs = observe_table(pa.table({"col": arr, "n": NEIGHBOUR}), file="mem", batch=0, row_start=0)
    values = arr.to_pylist()
    assert (obs.fields["col"].types, obs.fields["col"].nulls) == (types, nulls)
    assert sum(types.values()) == sum(v is not None for v in values) and nulls == values.count(None)
    assert (obs.fields["n"].types, obs.fields["n"].nulls) == ({"int64": 4}, 1)
    assert obs.unobserved == ()
    for start in range(1, 4):  # a slice starts within the buffers: counts follow pyarrow's values of it
        part = arr.slice(start)
        col = observe_table(pa.table({"col": part}), file="mem", batch=0, row_start=0).fields["col"]
        values = part.to_pylist()
        assert (col.nonnull, col.nulls) == (sum(v is not None for v in values), values.count(None))


def test_union_members_keep_their_rows_and_children() -> None:
    # A dense union of a struct and an int: the struct's field sits below the union's path,
    # and each example names the row of the union that held it.
    # The array is a slice: its first row is the second of the buffers.
    codes = pa.array([0, 1, 0, 1, 0], pa.int8())
    offsets = pa.array([0, 0, 1, 1, 2], pa.int32())
    structs = pa.array([{"a": 1}, {"a": None}], pa.struct([("a", pa.int64())]))
    arr = pa.UnionArray.from_dense(codes, offsets, [pa.array([7, 5, None]), structs], ["i", "s"]).slice(1)
    assert arr.to_pylist() == [{"a": 1}, 5, {"a": None}, None]
    obs = observe_table(pa.table({"u": arr}), file="f", batch=0, row_start=100)
    u, a = obs.fields["u"], obs.fields["u.a"]
    assert (u.types, u.nulls, a.types, a.nulls) == ({"int64": 1, "struct": 2}, 1, {"int64": 1}, 1)
    assert (u.first(type_sample("int64")).row, u.first(type_sample("struct")).row, u.first(NULL_SAMPLE).row) == (
        101,
        100,
        103,
    )
    assert a.first(NULL_SAMPLE).row == 102


def test_samples_show_extension_values_as_their_type_does() -> None:
    table = pa.table({c[0]: c[1] for c in CASES if c[0] in ("uuid", "bool8", "duration-ns", "json")})
    obs = observe_table(table, file="f", batch=0, row_start=0)
    assert obs.fields["uuid"].first(type_sample("binary")).value == json.dumps(str(U1))  # source: RFC 9562 section 4
    assert (
        obs.fields["bool8"].first(type_sample("bool")).value == "true"
    )  # source: Arrow canonical bool8, nonzero is true
    assert obs.fields["bool8"].classes == {} and obs.fields["bool8"].types == {"bool": 3}
    assert obs.fields["duration-ns"].first(type_sample("duration[ns]")).value == '"1 ns"'
    # the JSON texts as strings: "2" reads as an integer, "null" as a null token
    assert obs.fields["json"].classes == {"integer": 1, "null_token": 1, "text": 2}


def test_bulk_observation_agrees_with_observe_table_on_every_type() -> None:
    columns = {c[0]: c[1] for c in CASES} | {c[0] + "-mem": c[1] for c in IN_MEMORY}
    columns["interval"] = pa.array([pa.MonthDayNano([1, 2, 3]), None, None, None, None])
    batches = []
    for k in range(7):  # the same columns in several batches and files, some sliced, the last one empty
        table = pa.table(columns).slice(k % 3, 5 - k % 3) if k < 6 else pa.table(columns).slice(0, 0)
        batches.append(Batch(table, f"f{k // 2}.parquet", k % 2, (k % 2) * 5))
    one_by_one = [observe_table(b.data, file=b.file, batch=b.batch, row_start=b.row_start) for b in batches]
    assert observe_batches(batches) == one_by_one
    assert all(o.unobserved == (("interval", INTERVAL_WHY),) for o in one_by_one)


def test_an_unsupported_column_costs_that_column_only() -> None:
    # pyarrow builds month_day_nano intervals but writes them to no Parquet file; driftline
    # has no type for them.
    iv = pa.array([pa.MonthDayNano([1, 0, 0]), None, pa.MonthDayNano([0, 1, 5]), None, None])
    nested = pa.StructArray.from_arrays([iv, NEIGHBOUR], ["iv", "n"])
    table = pa.table({"iv": iv, "n": NEIGHBOUR, "s": nested})
    obs = observe_table(table, file="f", batch=0, row_start=0)
    assert obs.unobserved == (("iv", INTERVAL_WHY), ("s", INTERVAL_WHY))
    assert list(obs.fields) == ["n"] and (obs.fields["n"].types, obs.fields["n"].nulls) == ({"int64": 4}, 1)


def _landing(tmp_path: Path) -> Path:
    root = tmp_path / "land"
    root.mkdir()
    for i in range(2):
        table = pa.table(
            {
                "d": pa.array([1, None, 3, 4, None], pa.duration("ns")),
                "n": NEIGHBOUR,
                "t": pa.array([1, 2, None, 4, 5], pa.time64("us")),
            }
        )
        pq.write_table(table, root / f"part-{i}.parquet", row_group_size=2)
    return root


@pytest.mark.parametrize("jobs", [1, 2])
def test_the_reader_reports_each_unsupported_column_once_per_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, jobs: int
) -> None:
    # No type a Parquet file holds is unsupported any more, so two are made so here: durations
    # as if they had no driftline type, and times as if pyarrow had no min_max kernel for them.
    real_reason, real_min_max = columnar.unsupported_reason, columnar._min_max

    def reason(t: pa.DataType) -> str | None:
        return "made unsupported by the test" if pa.types.is_duration(t) else real_reason(t)

    def min_max(arr: pa.Array) -> tuple[Any, Any]:
        if pa.types.is_time(arr.type):
            raise pa.ArrowNotImplementedError("Function 'min_max' has no kernel matching input types (time64[us])")
        return real_min_max(arr)

    if jobs > 1 and multiprocessing.get_start_method() != "fork":
        pytest.skip("the patches reach worker processes only when they are forked")
    monkeypatch.setattr(columnar, "unsupported_reason", reason)
    monkeypatch.setattr(columnar, "_min_max", min_max)
    profile = driftline.scan(_landing(tmp_path), batch_rows=2, jobs=jobs)
    assert [(f.rel, f.rows, f.complete) for f in profile.files] == [
        ("part-0.parquet", 5, True),
        ("part-1.parquet", 5, True),
    ]
    assert [(i.file, i.kind, i.severity, i.row, i.message) for i in profile.issues] == [
        (f"part-{k}.parquet", "unsupported-type", "warning", 0, msg)
        for k in range(2)
        for msg in (
            "column 'd' not profiled: made unsupported by the test; the other columns are",
            "column 't' not profiled: pyarrow cannot compute its statistics (Function 'min_max' has no kernel "
            "matching input types (time64[us])); the other columns are",
        )
    ]
    assert list(profile.fields) == ["n"]
    # the report carries them as it carries every file problem (source: docs/report.schema.json)
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text())
    Draft202012Validator(schema).validate(json.loads(json.dumps(to_dict(profile))))
    n = profile.fields["n"].stats
    assert (n.types, n.nulls, n.minimum, n.maximum) == ({"int64": 8}, 2, 10, 50)  # source: pyarrow null_count


def _cli(*args: str | Path) -> int:
    res = CliRunner().invoke(app, [*map(str, args)])
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise res.exception
    return res.exit_code


@pytest.mark.parametrize(
    ("name", "arrow"),
    [
        ("json", "string"),
        ("uuid", "binary"),
        ("duration-ns", "duration[ns]"),
        ("duration-s", "duration[s]"),
        ("bool8", "bool"),
    ],
)
def test_check_passes_the_data_the_schema_was_written_for(tmp_path: Path, name: str, arrow: str) -> None:
    case = next(c for c in CASES if c[0] == name)
    folder = _write(tmp_path, name, case[1])
    contract, rules = tmp_path / "contract.schema.json", tmp_path / "rules.json"
    assert _cli("schema", folder, "--to", "json-schema", "--out", contract, "--rules", rules) == 0
    field = json.loads(contract.read_text())["properties"]["col"]
    note = field["x-driftline"]
    assert (note["arrow"], note["rule"]) == (arrow, "identity")
    # the observed null share is a note for the reader (no validator enforces it): the array's own
    assert note["null_share"] == round(case[1].null_count / len(case[1]), 4)
    for baseline in (contract, rules):
        assert _cli("check", folder, "--baseline", baseline, "-q") == 0, baseline.name


def test_duration_values_are_counted_not_ordered() -> None:
    # Durations keep no extremes (text does not order them, numbers would mix units), and a
    # duration[ns] value beyond Python's timedelta does not stop the column.
    arr = pa.array([2**62, None, -(2**62)], pa.duration("ns"))
    obs = observe_table(pa.table({"d": arr}), file="f", batch=0, row_start=0)
    d = obs.fields["d"]
    assert (d.types, d.nulls, d.minimum, d.maximum) == ({"duration[ns]": 2}, 1, None, None)
    assert pc.min_max(arr.cast(pa.int64()))["max"].as_py() == 2**62  # the values pyarrow holds


def _as_plain(arr: pa.Array) -> pa.Array:
    """The reference value of a column: pyarrow's own decoding of its dictionary or extension."""
    if pa.types.is_dictionary(arr.type):
        return _as_plain(arr.dictionary_decode())
    if isinstance(arr.type, pa.Bool8Type):
        return (
            pa.array(arr.to_numpy(zero_copy_only=False), pa.bool_())
            if arr.null_count == 0
            else pa.array([None if v is None else bool(v) for v in arr.storage.to_pylist()], pa.bool_())
        )
    return arr.storage if isinstance(arr.type, pa.BaseExtensionType) else arr


@pytest.mark.parametrize(("name", "arr"), [c[:2] for c in CASES], ids=[c[0] for c in CASES])
def test_apply_casts_each_type_into_the_schema_it_recommends(tmp_path: Path, name: str, arr: pa.Array) -> None:
    from driftline.recommendation.apply import apply
    from driftline.recommendation.raw import raw_batches

    folder = _write(tmp_path, name, arr)
    rec = driftline.scan(folder).recommend()
    (batch,) = [apply(b.batch, rec) for b in raw_batches(folder)]
    assert batch.schema.equals(rec.arrow_schema())
    got = batch.column("col")
    want = _as_plain(pq.read_table(folder / "part.parquet").column("col").combine_chunks())
    if pa.types.is_nested(want.type):  # values below the column: compare them as Python sees them
        assert got.to_pylist() == want.to_pylist()
    elif pa.types.is_floating(want.type):  # NaN equals nothing: compare the bit patterns
        bits = {16: pa.int16(), 32: pa.int32(), 64: pa.int64()}[got.type.bit_width]
        assert got.view(bits).equals(want.cast(got.type).view(bits))
    else:  # pyarrow's cast is the reference (timedelta and datetime cannot hold nanoseconds)
        assert got.equals(want.cast(got.type))


@pytest.fixture(scope="module")
def every_type(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One Parquet file with a column of each type of CASES."""
    root = tmp_path_factory.mktemp("every_type")
    pq.write_table(pa.table({name: arr for name, arr, _, _ in CASES}), root / "all.parquet")
    return root


def test_every_schema_format_names_each_type_or_says_what_stands_in(every_type: Path) -> None:
    import avro.errors
    import avro.schema
    import duckdb

    from driftline.emit.schemas import arrow_schema, json_schema, sql
    from driftline.emit.schemas.avro import avro_schema

    _load = import_test_module("test_sql")._load
    rec = driftline.scan(every_type).recommend()
    table = pq.read_table(every_type / "all.parquet")
    valued = {n for n in table.column_names if table.column(n).null_count < len(table)}
    # JSON Schema: a valid 2020-12 schema (source: the 2020-12 meta-schema) whose fields that
    # hold values never claim the null type; a duration says its unit.
    doc = json_schema.json_schema(rec)
    Draft202012Validator.check_schema(doc)
    props = doc["properties"]
    assert sorted(n for n in valued if props[n]["x-driftline"]["arrow"] == "null") == []
    assert props["null"]["x-driftline"]["arrow"] == "null"  # a column of nulls is one
    assert props["duration-us"]["description"].startswith("duration[us]: an integer count of microseconds; ")
    # Avro: the Apache parser takes it (source: avro 1.12 avro.schema.parse); durations say their unit
    fields = {f["x-driftline"]["path"]: f for f in avro_schema(rec, name="every")["fields"]}
    with warnings.catch_warnings():
        # The Apache package (1.12.2) knows no local-timestamp-* or *-nanos logical type of the
        # 1.12 specification: it warns and reads the long beneath, as the specification allows.
        warnings.simplefilter("ignore", avro.errors.IgnoredLogicalType)
        avro.schema.parse(json.dumps(avro_schema(rec, name="every")))
    assert fields["duration-ms"]["type"] == ["null", "long"]
    assert (
        "duration[ms] as a long count of milliseconds (Avro's duration "
        "logical type counts months, days and milliseconds); observed (not enforced): 4 values"
    ) in fields["duration-ms"]["doc"]
    # Arrow: the IPC message reads back equal (source: pyarrow.ipc.read_schema)
    assert arrow_schema.read_ipc(arrow_schema.ipc_bytes(rec)).equals(rec.arrow_schema(), check_metadata=True)
    # SQL: DuckDB creates and loads it (struct fields flattened), with as many NULLs per column as pyarrow counts
    con = duckdb.connect()
    lay = _load(con, rec, every_type, "t", flatten="__")
    ddl = sql.create_table(rec, "t", lay)
    assert '"duration_ns" BIGINT, /* duration[ns] as BIGINT, a count of nanoseconds' in ddl
    assert '"decimal256" TEXT, /* decimal(50,2) as text: wider than DECIMAL(38)' in ddl
    nulls = import_test_module("test_sql").table_nulls(con, "t", lay)
    # a struct's fields are columns of their own, null where the struct is (source: StructArray.flatten)
    flat = table.flatten()
    assert nulls == {c.name: flat.column(".".join(c.parents)).null_count for c in lay.columns}  # source: pyarrow


def test_check_passes_every_type_against_its_own_schema(every_type: Path, tmp_path: Path) -> None:
    contract, rules, report = tmp_path / "c.schema.json", tmp_path / "rules.json", tmp_path / "report.json"
    assert _cli("schema", every_type, "--to", "json-schema", "--out", contract, "--rules", rules) == 0
    assert _cli("scan", every_type, "--json", report, "-q") == 0
    for baseline in (contract, rules, report):
        assert _cli("check", every_type, "--baseline", baseline, "-q") == 0, baseline.name


def test_an_infinite_float_extreme_survives_the_report(tmp_path: Path) -> None:
    # source: RFC 8259 section 6 (no Infinity in JSON); IEEE 754 binary64: 1e308 * 10 overflows to inf
    import driftline
    from driftline.results.report import dumps, load_report

    pq.write_table(pa.table({"x": pa.array([1.5, float("inf"), float("-inf")], pa.float64())}), tmp_path / "a.parquet")
    out = tmp_path / "r.json"
    out.write_bytes(dumps(driftline.scan(tmp_path / "a.parquet")))
    field = load_report(out).fields["x"].stats
    assert (field.minimum, field.maximum) == (float("-inf"), float("inf"))


# -- the columnar path against the reference record walk ----------------------------------------


def test_columnar_and_record_paths_agree_on_typed_data():
    recs = [{"a": 1, "b": "x", "c": 2.5}, {"a": 3, "b": "2026-11-30", "c": None}]
    table = pa.Table.from_pylist(recs)
    by_records = observe_records(recs, file="f", batch=0, row_start=0)
    by_columns = observe_table(table, file="f", batch=0, row_start=0)
    for path in ("a", "b", "c"):
        r, c = by_records.fields[path], by_columns.fields[path]
        assert (r.types, r.nulls, r.classes, r.minimum, r.maximum) == (
            c.types,
            c.nulls,
            c.classes,
            c.minimum,
            c.maximum,
        )


def test_text_columns_infer_types_from_classes():
    # source: RFC 4180 gives CSV no types; an empty cell reads as null (common practice,
    # pyarrow.csv does the same, REFERENCES §3)
    table = pa.table({"n": ["1", "", "007", "x"]})
    st = observe_table(table, file="t.csv", batch=0, row_start=0, lines=[2, 3, 4, 5], text_source=True).fields["n"]
    # "007" is zero_padded: a code whose zeros an int64 would drop (common practice: ZIP codes), so text
    assert st.types == {"int64": 1, "string": 2}
    assert st.nulls == 1 and st.text == 4
    assert st.first(NULL_SAMPLE).line == 3


def test_always_empty_lists_agree_between_paths():
    recs = [{"e": []}, {"e": []}]
    by_records = observe_records(recs, file="f", batch=0, row_start=0).fields
    by_columns = observe_table(
        pa.table({"e": pa.array([[], []], pa.list_(pa.int64()))}), file="f", batch=0, row_start=0
    ).fields
    assert by_records["e[]"] == by_columns["e[]"]
