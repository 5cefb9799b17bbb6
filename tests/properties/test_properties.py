"""Property tests: hypothesis composes values → records → batches → files (JSON Lines, CSV,
Parquet) with nesting, nulls, absent keys, unicode and huge/tiny numbers, and checks that

* the scan never raises and never meets an internal error;
* the rows in the profile reconcile with the records written (per file and per field);
* merge is commutative and associative (FieldStats.merge and Profile.merge);
* a parallel run (jobs=2) equals a serial one;
* every record validates against the emitted permissive JSON Schema, and the cast loss the
  recommendation predicts equals the loss of really casting the data.

The writers are outside references: Python's json and csv modules (RFC 8259 / RFC 4180)
and pyarrow.parquet 26.0.1. Example counts stay modest; the heavier ones are marked slow.
"""

from __future__ import annotations

import csv
import io
import json
import tempfile
from collections import Counter
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from jsonschema import Draft202012Validator

from driftline.core import paths
from driftline.core.options import ReadOptions
from driftline.core.stats import merge_all, merge_fields
from driftline.emit.schemas.json_schema import json_schema
from driftline.observe.records import observe_records
from driftline.recommendation import recommend
from driftline.results.profile import Profile
from driftline.scanning.run import scan_paths
from driftline.sources.parquetfile import declared_paths

FAST = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
SLOW = settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# -- values → records → batches → files -------------------------------------------------------

TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=10)  # any unicode but lone surrogates
KEYS = st.one_of(st.sampled_from(["id", "pm25", "a.b", "tags[]", "`q`", "", "ключ", "名字"]), TEXT)
TOKENS = st.sampled_from(
    [
        "",
        "NA",
        "n/a",
        "null",
        "1",
        "-0",
        "007",
        "2.50",
        "1e400",
        "true",
        "1985-04-12T23:20:50.52Z",
        "1990-12-31T23:59:60Z",
        "2026-11-30",
        "9007199254740993",
    ]
)
NUMBERS = st.one_of(
    st.integers(-(2**70), 2**70),  # past int64 and past 2**53
    st.floats(allow_nan=False, allow_infinity=False),  # includes 5e-324 and 1.7976931348623157e308
    st.sampled_from([0, -0.0, 2**53 - 1, 2**53 + 1, 2**63 - 1, -(2**63), 2**64 - 1, 5e-324, 1e-300]),
)
SCALARS = st.one_of(st.none(), st.booleans(), NUMBERS, TEXT, TOKENS)
VALUES = st.recursive(
    SCALARS, lambda kids: st.one_of(st.lists(kids, max_size=3), st.dictionaries(KEYS, kids, max_size=3)), max_leaves=10
)
RECORDS = st.dictionaries(KEYS, VALUES, max_size=4)  # keys absent from some records
BATCHES = st.lists(RECORDS, max_size=6)
JSONL_FILES = st.lists(BATCHES, min_size=1, max_size=3)  # a file: its batches one after another


def write_jsonl(path: Path, batches: list[list[dict[str, Any]]]) -> list[dict[str, Any]]:
    records = [r for b in batches for r in b]
    path.write_text("".join(json.dumps(r, ensure_ascii=False) + "\n" for r in records), encoding="utf-8")
    return records


CELLS = st.one_of(st.none(), TEXT, TOKENS)
HEADERS = st.lists(
    st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\r\n"), min_size=1, max_size=8),
    min_size=1,
    max_size=4,
    unique=True,
)


@st.composite
def csv_tables(draw: Any) -> tuple[list[str], list[list[str | None]]]:
    header = draw(HEADERS)
    rows = draw(st.lists(st.lists(CELLS, min_size=len(header), max_size=len(header)), max_size=8))
    return header, rows


def write_csv(path: Path, header: list[str], rows: list[list[str | None]]) -> None:
    buf = io.StringIO()
    # RFC 4180: CRLF line ends, and minimal quoting. (With lineterminator="\n", Python's csv
    # leaves a lone CR in a cell unquoted, which every RFC 4180 reader takes as a line end.)
    w = csv.writer(buf)
    w.writerow(header)
    w.writerows([["" if c is None else c for c in row] for row in rows])
    path.write_bytes(buf.getvalue().encode("utf-8"))


ARROW_TYPES = st.sampled_from(
    [
        pa.int64(),
        pa.float64(),
        pa.string(),
        pa.bool_(),
        pa.timestamp("us", "UTC"),
        pa.date32(),
        pa.list_(pa.int64()),
        pa.struct([("a", pa.int64()), ("b", pa.string())]),
        pa.map_(pa.string(), pa.int64()),
    ]
)


def _arrow_value(t: pa.DataType) -> st.SearchStrategy[Any]:
    if pa.types.is_int64(t):
        return st.integers(-(2**63), 2**63 - 1)
    if pa.types.is_float64(t):
        return st.floats(allow_nan=True, allow_infinity=True)
    if pa.types.is_string(t):
        return TEXT
    if pa.types.is_boolean(t):
        return st.booleans()
    if pa.types.is_timestamp(t):
        return st.integers(-(2**62), 2**62)  # microseconds, far beyond Python's datetime range
    if pa.types.is_date32(t):
        return st.integers(-(2**31), 2**31 - 1)
    if pa.types.is_list(t):
        return st.lists(st.one_of(st.none(), st.integers(-(2**63), 2**63 - 1)), max_size=3)
    if pa.types.is_struct(t):
        return st.fixed_dictionaries({"a": st.one_of(st.none(), st.integers(-5, 5)), "b": st.one_of(st.none(), TEXT)})
    return st.lists(st.tuples(TEXT, st.one_of(st.none(), st.integers(-5, 5))), max_size=3)  # map


@st.composite
def parquet_tables(draw: Any) -> pa.Table:
    names = draw(st.lists(KEYS.filter(bool), min_size=1, max_size=4, unique=True))
    n = draw(st.integers(0, 12))
    cols = {}
    for name in names:
        t = draw(ARROW_TYPES)
        vals = draw(st.lists(st.one_of(st.none(), _arrow_value(t)), min_size=n, max_size=n))
        if pa.types.is_timestamp(t) or pa.types.is_date32(t):
            cols[name] = pa.array(vals, pa.int64() if pa.types.is_timestamp(t) else pa.int32()).cast(t)
        else:
            cols[name] = pa.array(vals, t)
    return pa.table(cols)


def _scan(root: Path, *, jobs: int = 1, **opts: Any) -> Profile:
    return scan_paths([root], read=ReadOptions(**opts), jobs=jobs)


def _no_internal(profile: Profile) -> None:
    assert [i.message for i in profile.issues if i.kind == "internal"] == []


# -- the scan never raises; rows reconcile ------------------------------------------------------


@FAST
@given(files=st.lists(JSONL_FILES, min_size=1, max_size=3), batch_rows=st.integers(1, 7))
def test_jsonl_rows_and_keys_reconcile_with_the_records_written(files, batch_rows):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        written = {f"f{i}.jsonl": write_jsonl(root / f"f{i}.jsonl", batches) for i, batches in enumerate(files)}
        profile = _scan(root, batch_rows=batch_rows)
        _no_internal(profile)
        assert profile.error_count == 0
        for f in profile.files:
            assert f.rows == len(written[f.rel])
            assert all(o.rows <= batch_rows for o in f.observations)
        records = [r for recs in written.values() for r in recs]
        assert profile.rows == len(records)
        present = Counter(paths.child(None, k) for r in records for k in r)
        for path, n in present.items():
            assert profile.fields[path].stats.present == n, path  # present or null where written
            assert profile.fields[path].absent == len(records) - n, path  # absent everywhere else


@FAST
@given(table=csv_tables(), batch_rows=st.integers(1, 5))
def test_csv_rows_and_columns_reconcile_with_the_rows_written(table, batch_rows):
    header, rows = table
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        write_csv(root / "t.csv", header, rows)
        # the dialect as written: a header of any names (a numeric name above numbers would
        # read as a headerless file, which the finder is right to say)
        profile = _scan(root, batch_rows=batch_rows, delimiter=",", csv_dialects=("header=yes,skip=0",))
        _no_internal(profile)
        fr = profile.files[0]
        assert fr.errors == 0, [i.message for i in fr.issues]
        assert fr.rows == len(rows)
        if rows:
            assert sorted(profile.stats) == sorted(paths.child(None, h) for h in header)
            for h in header:
                st_ = profile.stats[paths.child(None, h)]
                assert st_.present == len(rows) == st_.text  # every cell is there, as text


@FAST
@given(table=csv_tables())
def test_csv_with_a_sniffed_delimiter_never_raises(table):
    header, rows = table
    with tempfile.TemporaryDirectory() as tmp:
        write_csv(Path(tmp) / "t.csv", header, rows)
        _no_internal(_scan(Path(tmp)))


@FAST
@given(table=parquet_tables(), batch_rows=st.integers(1, 5))
def test_parquet_rows_schema_and_nulls_reconcile_with_pyarrow(table, batch_rows):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        pq.write_table(table, root / "t.parquet", row_group_size=max(1, table.num_rows // 2 or 1))
        profile = _scan(root, batch_rows=batch_rows)
        _no_internal(profile)
        fr = profile.files[0]
        assert fr.errors == 0 and fr.rows == table.num_rows
        back = pq.read_table(root / "t.parquet")  # source: pyarrow 26.0.1, the writer and reference
        assert fr.declared == declared_paths(back.schema)
        if table.num_rows:
            for name in back.column_names:
                st_ = profile.stats[paths.child(None, name)]
                col = back[name]
                assert (st_.nulls, st_.nonnull) == (col.null_count, len(col) - col.null_count), name


@FAST
@given(
    data=st.binary(max_size=300),
    suffix=st.sampled_from([".jsonl", ".json", ".csv", ".tsv", ".parquet", ".jsonl.gz", ".csv.zst", ""]),
)
def test_arbitrary_bytes_under_any_name_never_raise(data, suffix):
    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / f"blob{suffix}").write_bytes(data)
        (Path(tmp) / "good.jsonl").write_text('{"a": 1}\n')
        profile = _scan(Path(tmp))
        _no_internal(profile)
        assert profile.file("good.jsonl").rows == 1


# -- merge laws ----------------------------------------------------------------------------------


@FAST
@given(parts=st.lists(BATCHES, min_size=3, max_size=3))
def test_fieldstats_merge_is_commutative_and_associative(parts):
    # one observation per batch, each from its own file: (file, row) places are unique, as in a scan
    obs = [observe_records(b, file=f"f{i}.jsonl", batch=0, row_start=0) for i, b in enumerate(parts)]
    a, b, c = (o.fields for o in obs)
    for path in set(a) & set(b) & set(c):
        x, y, z = a[path], b[path], c[path]
        assert x.merge(y) == y.merge(x)
        assert x.merge(y).merge(z) == x.merge(y.merge(z))
        # merging the three batches as one observation gives the same counts
        whole = observe_records([r for p in parts for r in p], file="w", batch=0, row_start=0).fields[path]
        merged = x.merge(y).merge(z)
        assert (merged.types, merged.nulls, merged.classes, merged.items) == (
            whole.types,
            whole.nulls,
            whole.classes,
            whole.items,
        )


@FAST
@given(parts=st.lists(BATCHES, min_size=1, max_size=6), same_file=st.booleans())
def test_merge_all_is_the_fold_of_merge(parts, same_file):
    # merge_all merges many maps in one pass per path; it must equal merging them one by one,
    # batches of one file (rows that overlap: equal places) or of several
    obs = [
        observe_records(b, file="f.jsonl" if same_file else f"f{i}.jsonl", batch=i, row_start=0)
        for i, b in enumerate(parts)
    ]
    folded: dict = {}
    for o in obs:
        folded = merge_fields(folded, o.fields)
    merged = merge_all(o.fields for o in obs)
    # as JSON: examples compare by place only, their values and lines must match too
    assert [(p, st_.to_json()) for p, st_ in merged.items()] == [(p, st_.to_json()) for p, st_ in folded.items()]


@FAST
@given(files=st.lists(JSONL_FILES, min_size=3, max_size=5), data=st.data())
def test_profile_merge_is_commutative_and_associative(files, data):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for i, batches in enumerate(files):
            write_jsonl(root / f"f{i}.jsonl", batches)
        whole = _scan(root)
        results = list(whole.files)
        owner = data.draw(st.lists(st.integers(0, 2), min_size=len(results), max_size=len(results)))
        p, q, r = (
            Profile(whole.root, tuple(f for f, o in zip(results, owner, strict=True) if o == k)) for k in range(3)
        )
        assert p.merge(q) == q.merge(p)
        assert p.merge(q).merge(r) == p.merge(q.merge(r)) == whole
        assert p.merge(q).merge(r).stats == whole.stats


# -- parallel equals serial ----------------------------------------------------------------------


@pytest.mark.slow
@SLOW
@given(files=st.lists(JSONL_FILES, min_size=2, max_size=4), table=csv_tables())
def test_a_parallel_scan_equals_a_serial_one(files, table):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for i, batches in enumerate(files):
            write_jsonl(root / f"f{i}.jsonl", batches)
        write_csv(root / "t.csv", *table)
        serial, parallel = _scan(root, jobs=1), _scan(root, jobs=2)
        assert parallel == serial
        assert parallel.stats == serial.stats and parallel.events == serial.events


# -- the recommendation: permissive JSON Schema and predicted cast loss ----------------------------


def _known_recommender_bugs(profile: Profile) -> list[str]:
    """Shapes on which the recommender (src/driftline/recommendation/) is known to fail, found by the
    property below and pinned by tests after it; excluded until they are fixed. The four found
    so far (mixed nested kinds, a CSV column of null tokens only) are fixed: none is excluded."""
    return []


def _validate_and_cast(root: Path, profile: Profile) -> None:
    from driftline.recommendation.apply import Tally, apply
    from driftline.recommendation.raw import iter_records, raw_batches

    rec = recommend(profile)
    # source: jsonschema 4.26.0 Draft202012Validator with its format checker (REFERENCES.md §4)
    validator = Draft202012Validator(json_schema(rec), format_checker=Draft202012Validator.FORMAT_CHECKER)
    bad = [(f, r, e.message) for f, r, x in iter_records(root) for e in validator.iter_errors(x)]
    assert bad == []
    tally = Tally()
    for raw in raw_batches(root):
        apply(raw.batch, rec, tally=tally)
    for plan in rec.walk():
        measured = {k: v for k, v in tally.counts.get(plan.path, {}).items() if k != "nulled" and ":" not in k}
        predicted = {e.cause: e.count for e in plan.effects if e.exact and e.count}
        assert measured == predicted, plan.path
        assert tally.get(plan.path, "nulled") == plan.nulled, plan.path


@st.composite
def shaped_files(draw: Any) -> list[list[list[dict[str, Any]]]]:
    """JSON Lines files whose fields keep one nested shape each (scalars of any kind mix freely),
    beside the free-form files where nested kinds mix: both are drawn for the recommender."""
    keys = draw(st.lists(KEYS, min_size=1, max_size=4, unique=True))
    shapes = {
        k: draw(st.sampled_from([SCALARS, st.lists(SCALARS, max_size=3), st.dictionaries(KEYS, SCALARS, max_size=3)]))
        for k in keys
    }
    record = st.fixed_dictionaries({}, optional={k: st.one_of(st.none(), v) for k, v in shapes.items()})
    return draw(st.lists(st.lists(st.lists(record, max_size=5), min_size=1, max_size=2), min_size=1, max_size=2))


@pytest.mark.slow
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(files=st.one_of(shaped_files(), st.lists(JSONL_FILES, min_size=1, max_size=2)), table=csv_tables())
def test_every_record_validates_and_predicted_loss_equals_real_loss(files, table):
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for i, batches in enumerate(files):
            write_jsonl(root / f"f{i}.jsonl", batches)
        write_csv(root / "t.csv", *table)
        profile = _scan(root, delimiter=",")
        assume(not _known_recommender_bugs(profile))
        _validate_and_cast(root, profile)


def test_known_bug_scalar_and_lists_of_lists(tmp_path):
    # found by: the property above, shrunk to {"id": 1} and {"id": [[1]]}
    (tmp_path / "a.jsonl").write_text('{"id": 1}\n{"id": [[1]]}\n')
    _validate_and_cast(tmp_path, _scan(tmp_path))


def test_known_bug_empty_list_and_struct_of_struct(tmp_path):
    # found by: the property above, shrunk to {"pm25": []} and {"pm25": {"id": {}}}
    (tmp_path / "a.jsonl").write_text('{"pm25": []}\n{"pm25": {"id": {}}}\n')
    _validate_and_cast(tmp_path, _scan(tmp_path))


def test_known_bug_csv_column_of_null_tokens_only(tmp_path):
    # found by: the property above, shrunk to a CSV column whose only cell is NIL
    (tmp_path / "t.csv").write_text("a,b\nNIL,1\n")
    _validate_and_cast(tmp_path, _scan(tmp_path))


def test_known_bug_list_in_one_file_struct_in_another(tmp_path):
    # found by: the property above, shrunk to {"id": []} in one file and {"id": {}} in the next
    (tmp_path / "a.jsonl").write_text('{"id": []}\n')
    (tmp_path / "b.jsonl").write_text('{"id": {}}\n')
    _validate_and_cast(tmp_path, _scan(tmp_path))


def test_csv_column_of_empty_cells_is_recommended_and_cast(tmp_path):
    # found by: the property above (apply() cast string to null); fixed in the recommender since
    (tmp_path / "t.csv").write_text("a,b\n,1\n")
    _validate_and_cast(tmp_path, _scan(tmp_path))
