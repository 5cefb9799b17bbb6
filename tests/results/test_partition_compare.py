"""Partitions compared with each other (results/partition_compare.py): the values of each
partition key that never hold what most of the others hold, as episodes of their own kinds.

The totals of each episode are counted again by DuckDB over the same files (the golden cases
of tests/fixtures/drift/), and by Python's csv module over the demo's west export.
"""

from __future__ import annotations

import csv
import json
from collections.abc import Callable
from pathlib import Path

import pytest

import driftline
from _drift_cases import CASES, load_case
from conftest import write_lines
from driftline.results.drift import drift_summary
from driftline.results.partition_compare import CHANCE, compare_partitions, logical_counts, ordered_keys

PARTITION_KINDS = ("partition-lacks", "partition-type", "partition-nulls")


def _partition_events(profile) -> list:
    return [e for e in profile.events if e.kind in PARTITION_KINDS]


def _duckdb_rows(folder: Path, expr: str) -> list[tuple[str, int, str | None]]:
    """(file relative to folder, 0-based row, json_type of the JSON path expr or None when absent)."""
    import duckdb

    con = duckdb.connect()
    con.execute("SET threads = 1")  # one reader thread: rows come back in file order
    out = []
    for path in sorted(folder.rglob("*.jsonl")):
        # source: DuckDB JSON extension docs, read_ndjson_objects (one JSON value per line) and json_type
        got = con.execute(f"SELECT json_type(json, '{expr}') FROM read_ndjson_objects(?)", [str(path)]).fetchall()
        out.extend((path.relative_to(folder).as_posix(), i, t) for i, (t,) in enumerate(got))
    return out


def _in(value: str) -> Callable[[str], bool]:
    return lambda rel: value in rel.split("/")


# -- the golden cases, counted again by DuckDB --------------------------------------------------


def test_lacking_field_episode_matches_duckdb() -> None:
    case = load_case(CASES / "partition-lacks-field")
    rows = _duckdb_rows(case.input, "$.loyalty_id")
    uptown = _in("store=uptown")
    lacking = [(f, r) for f, r, t in rows if t is None]
    # DuckDB: every row without loyalty_id is uptown's, every row of the other stores holds it.
    assert {f for f, _ in lacking} == {f for f, _, _ in rows if uptown(f)}
    assert all(t == "VARCHAR" for f, _, t in rows if not uptown(f))
    (e,) = _partition_events(driftline.scan(case.input))
    assert (e.kind, e.path, e.partition_key, e.partition_values) == (
        "partition-lacks",
        "loyalty_id",
        "store",
        ("uptown",),
    )
    assert (e.file, e.row) == lacking[0]
    assert e.values == e.rows == len(lacking) == 10
    assert e.files == len({f for f, _ in lacking}) == 2
    assert (e.last_file, e.last_row) == (lacking[-1][0], max(r for f, r in lacking if f == lacking[-1][0]))
    stores = {f.split("/")[0] for f, _, _ in rows}
    assert e.partition_compared == len(stores) == 4


def test_never_had_nested_field_counts_the_struct_values_duckdb_sees() -> None:
    case = load_case(CASES / "series-never-had")
    devices = _duckdb_rows(case.input, "$.device")
    fw = _duckdb_rows(case.input, "$.device.fw")
    west = _in("region=west")
    # A device struct in every row; fw absent from exactly west's.
    assert all(t == "OBJECT" for _, _, t in devices)
    missing = [(f, r) for f, r, t in fw if t is None]
    assert missing == [(f, r) for f, r, _ in fw if west(f)]
    events = {e.path: e for e in _partition_events(driftline.scan(case.input))}
    assert sorted(events) == ["device.fw", "humidity"]
    e = events["device.fw"]
    assert (e.file, e.row, e.values, e.files, e.last_file) == (
        *missing[0],
        len(missing),
        len({f for f, _ in missing}),
        missing[-1][0],
    )
    assert e.values == 8


def test_nulls_in_one_partition_match_duckdb() -> None:
    case = load_case(CASES / "partition-nulls")
    rows = _duckdb_rows(case.input, "$.coupon")
    nulls = [(f, r) for f, r, t in rows if t == "NULL"]
    assert {f.split("/")[0] for f, _ in nulls} == {"shop=cedar"}
    profile = driftline.scan(case.input)
    (e,) = profile.events
    assert (e.kind, e.file, e.row, e.line) == ("partition-nulls", *nulls[0], nulls[0][1] + 1)
    assert e.values == e.rows == len(nulls) == 3
    assert (e.files, e.last_file) == (len({f for f, _ in nulls}), nulls[-1][0])
    # The walk's nulls-begin counted the same nulls: it is told once, by the partition event.
    assert [x.kind for x in profile.events] == ["partition-nulls"]
    assert profile.event_counts == {"partition-nulls": 1} and profile.level_counts["breaking"] == 1


def test_type_in_one_partition_matches_duckdb() -> None:
    case = load_case(CASES / "partition-type")
    rows = _duckdb_rows(case.input, "$.total")
    strings = [(f, r) for f, r, t in rows if t == "VARCHAR"]
    assert {f.split("/")[0] for f, _ in strings} == {"shop=cedar"}
    assert {t for f, _, t in rows if not f.startswith("shop=cedar")} == {"UBIGINT"}
    (e,) = driftline.scan(case.input).events
    assert (e.kind, e.before, e.after, e.level) == ("partition-type", "int64", "string", "breaking")
    assert (e.file, e.row, e.values, e.files, e.last_file) == (
        *strings[0],
        len(strings),
        len({f for f, _ in strings}),
        strings[-1][0],
    )


# -- what "the others" means -------------------------------------------------------------------


def _keyed(tmp_path: Path, n: int, lacking: set[int], rows: int = 3) -> Path:
    for i in range(n):
        recs = [json.dumps({"id": i * 10 + r, **({} if i in lacking else {"code": f"c{r}"})}) for r in range(rows)]
        write_lines(tmp_path / f"site=s{i:02d}" / "a.jsonl", recs)
    return tmp_path


def test_one_value_of_sixty_lacking_a_field_is_one_event_naming_it(tmp_path: Path) -> None:
    profile = driftline.scan(_keyed(tmp_path, 60, {37}))
    (e,) = profile.events
    assert (e.kind, e.path, e.partition_key, e.partition_values, e.partition_compared) == (
        "partition-lacks",
        "code",
        "site",
        ("s37",),
        60,
    )
    assert (e.file, e.values, e.files) == ("site=s37/a.jsonl", 3, 1)
    assert e.to_json()["partition_values"] == ["s37"] and e.to_json()["partition_compared"] == 60


def test_two_values_lacking_it_are_one_event_naming_both(tmp_path: Path) -> None:
    profile = driftline.scan(_keyed(tmp_path, 60, {5, 40}))
    (e,) = profile.events
    assert (e.kind, e.partition_values, e.values, e.files, e.file, e.last_file) == (
        "partition-lacks",
        ("s05", "s40"),
        6,
        2,
        "site=s05/a.jsonl",
        "site=s40/a.jsonl",
    )
    # With one key the walk's series is the whole folder: code leaves at s05, returns at s06,
    # leaves again at s40 (one field-gone episode, reopened once). It counts the very same
    # places, so the partition event tells it; without the comparison the walk's is there.
    (gone,) = drift_summary(profile.files, skip_keys=frozenset({"site"}))[0]
    assert (gone.kind, gone.file, gone.last_file, gone.values, gone.recurrences) == (
        "field-gone",
        "site=s05/a.jsonl",
        "site=s40/a.jsonl",
        6,
        1,
    )


def test_a_flip_in_every_seventh_day_is_told_by_the_walk_with_its_recurrences(tmp_path: Path) -> None:
    # temp_c is a number, a string in every file of every seventh day. The partition
    # comparison finds those four days, and the walk's type-conflict (reopened three times)
    # counts the very same strings. Along a key of dates the walk tells it: it says where the
    # change starts, ends and comes back, which the partition event cannot.
    for day in range(1, 29):
        recs = [json.dumps({"id": i, "temp_c": str(i + 0.5) if day % 7 == 0 else i + 0.5}) for i in range(5)]
        write_lines(tmp_path / f"day=2026-02-{day:02d}" / "a.jsonl", recs)
    strings = [(f, r) for f, r, t in _duckdb_rows(tmp_path, "$.temp_c") if t == "VARCHAR"]
    profile = driftline.scan(tmp_path)
    (e,) = profile.events
    assert (e.kind, e.before, e.after, e.partition_key, e.recurrences) == (
        "type-conflict",
        "float64",
        "string",
        None,
        3,
    )
    assert (e.file, e.row, e.values, e.files, e.last_file) == (*strings[0], len(strings), 4, strings[-1][0])
    (found,) = [f for f in compare_partitions(profile.files) if f.path == "temp_c"]
    assert (found.kind, found.key, found.compared) == ("partition-type", "day", 28)
    assert found.values == tuple(sorted({f.split("/")[0].removeprefix("day=") for f, _ in strings}))
    assert found.values == ("2026-02-07", "2026-02-14", "2026-02-21", "2026-02-28")
    assert ordered_keys(profile.files) == frozenset({"day"})


def test_a_field_of_half_the_values_or_fewer_is_no_difference(tmp_path: Path) -> None:
    profile = driftline.scan(_keyed(tmp_path, 6, {0, 2, 4}))
    assert _partition_events(profile) == []


def test_two_values_are_not_compared(tmp_path: Path) -> None:
    profile = driftline.scan(_keyed(tmp_path, 2, {1}))
    assert _partition_events(profile) == []


def test_a_field_new_in_time_is_the_walks_not_a_lacking_first_value(tmp_path: Path) -> None:
    # day=01 is before code first arrives anywhere: the walk's field-new says code arrived on day 02.
    for d in range(1, 6):
        recs = [json.dumps({"id": r, **({"code": "x"} if d > 1 else {})}) for r in range(4)]
        write_lines(tmp_path / f"day=2026-03-0{d}" / "a.jsonl", recs)
    profile = driftline.scan(tmp_path)
    assert [(e.kind, e.path) for e in profile.events] == [("field-new", "code")]


def test_a_sparse_field_lacking_in_a_small_value_is_chance(tmp_path: Path) -> None:
    # code in 1 row of 4 in the others (share 1/4): a value of 4 rows lacks it by chance with
    # probability (3/4)**4 = 0.32, far above CHANCE; with 40 rows, 0.75**40 = 1e-5, below it.
    def folder(root: Path, small_rows: int) -> Path:
        for i in range(5):
            n = small_rows if i == 4 else 8
            recs = [json.dumps({"id": r, **({"code": 1} if i != 4 and r % 4 == 0 else {})}) for r in range(n)]
            write_lines(root / f"site=s{i}" / "a.jsonl", recs)
        return root

    assert 0.75**4 > CHANCE > 0.75**40  # common practice: the arithmetic the rule relies on
    # the holders hold code in a quarter of their rows only: not the norm there, no event at all
    assert _partition_events(driftline.scan(folder(tmp_path / "a", 4))) == []
    assert _partition_events(driftline.scan(folder(tmp_path / "b", 40))) == []


def test_chance_decides_where_the_field_is_the_norm(tmp_path: Path) -> None:
    # The others hold code in 3 rows of 4 (share 3/4); s4 lacks it in all its rows: 4 rows are
    # chance ((1/4)**4 = 0.0039 ≥ 0.001), 6 rows are not ((1/4)**6 = 0.00024).
    def folder(root: Path, small_rows: int) -> Path:
        for i in range(5):
            n = small_rows if i == 4 else 8
            recs = [json.dumps({"id": r, **({"code": 1} if i != 4 and r % 4 else {})}) for r in range(n)]
            write_lines(root / f"site=s{i}" / "a.jsonl", recs)
        return root

    assert 0.25**4 >= CHANCE > 0.25**6  # common practice: the arithmetic the rule relies on
    assert _partition_events(driftline.scan(folder(tmp_path / "a", 4))) == []
    (e,) = _partition_events(driftline.scan(folder(tmp_path / "b", 6)))
    assert (e.kind, e.partition_values, e.values) == ("partition-lacks", ("s4",), 6)


def test_skip_keys_leaves_a_key_out(tmp_path: Path) -> None:
    files = driftline.scan(_keyed(tmp_path, 5, {3})).files
    assert [(f.kind, f.path, f.key, f.values) for f in compare_partitions(files)] == [
        ("partition-lacks", "code", "site", ("s03",))
    ]
    assert compare_partitions(files, skip_keys=frozenset({"site"})) == []
    events, counts, levels = drift_summary(files, skip_keys=frozenset({"site"}))
    assert [e.kind for e in events] == ["field-gone"] and counts == {"field-gone": 1} and levels == {"breaking": 1}


def test_a_narrower_type_in_one_value_is_info(tmp_path: Path) -> None:
    for i in range(4):
        write_lines(
            tmp_path / f"site=s{i}" / "a.jsonl", [json.dumps({"v": r if i == 2 else r + 0.5}) for r in range(3)]
        )
    (e,) = _partition_events(driftline.scan(tmp_path))
    # float64 holds int64 (the lattice's join): nothing to change for a reader of the others' schema
    assert (e.kind, e.before, e.after, e.level, e.partition_values) == (
        "partition-type",
        "float64",
        "int64",
        "info",
        ("s2",),
    )


def test_the_same_values_as_csv_cells_and_json_are_no_partition_difference(tmp_path: Path) -> None:
    # A CSV cell reads as its text's type: integers, decimals and RFC 3339 timestamps in one
    # region's CSV export are what the JSON regions send as numbers and strings.
    for region in ("a", "b", "c"):
        recs = [json.dumps({"n": r, "x": r + 0.5, "ts": f"2026-03-01T10:0{r}:00Z"}) for r in range(3)]
        write_lines(tmp_path / f"region={region}" / "a.jsonl", recs)
    rows = ["n,x,ts", *(f"{r},{r + 0.5},2026-03-01T10:0{r}:00Z" for r in range(3))]
    write_lines(tmp_path / "region=d" / "a.csv", rows)
    profile = driftline.scan(tmp_path)
    assert _partition_events(profile) == []
    # while text that reads as another type (labels for numbers) is one
    write_lines(
        tmp_path / "region=d" / "a.csv", ["n,x,ts", *(f"n{r},{r + 0.5},2026-03-01T10:0{r}:00Z" for r in range(3))]
    )
    (e,) = _partition_events(driftline.scan(tmp_path))
    assert (e.kind, e.path, e.before, e.after, e.partition_values) == ("partition-type", "n", "int64", "string", ("d",))


def test_logical_counts_read_csv_cells_and_temporal_strings_as_their_type() -> None:
    from driftline.core.stats import FieldStats

    assert logical_counts(
        FieldStats(types={"timestamp[us]": 4}, classes={"timestamp_local": 4, "empty": 1}, text=4)
    ) == {"timestamp[us]": 4}
    assert logical_counts(FieldStats(types={"string": 2, "int64": 1}, classes={"date": 1, "integer": 1})) == {
        "date32": 1,
        "int64": 1,
        "string": 1,
    }


# -- the demo's west export, counted by Python's csv module --------------------------------------


@pytest.fixture(scope="module")
def west_rows(demo_dir: Path) -> list[tuple[str, int, dict[str, str]]]:
    out = []
    for path in sorted((demo_dir / "landing").glob("readings/region=west/*/export.csv")):
        # source: Python's csv module, RFC 4180 quoting
        with path.open(newline="", encoding="utf-8") as fh:
            rel = path.relative_to(demo_dir / "landing").as_posix()
            out.extend((rel, i, row) for i, row in enumerate(csv.DictReader(fh)))
    return out


def test_demo_west_episodes_match_the_csv_rows(demo_profile, west_rows) -> None:
    events = {(e.kind, e.path): e for e in _partition_events(demo_profile)}
    assert sorted(events) == [
        ("partition-lacks", "battery"),
        ("partition-nulls", "tags"),
        ("partition-nulls", "temp_c"),
        ("partition-type", "tags"),
        ("partition-type", "ts"),
    ]
    files = sorted({f for f, _, _ in west_rows})
    lacks = events[("partition-lacks", "battery")]
    assert (lacks.rows, lacks.files, lacks.last_file, lacks.last_row) == (
        len(west_rows),
        len(files),
        files[-1],
        max(i for f, i, _ in west_rows if f == files[-1]),
    )
    for path, event_kind, pred in (
        ("tags", "partition-type", lambda c: c != ""),
        ("tags", "partition-nulls", lambda c: c == ""),
        ("temp_c", "partition-nulls", lambda c: c == ""),
    ):
        hits = [(f, i) for f, i, row in west_rows if pred(row[path])]
        e = events[(event_kind, path)]
        assert (e.file, e.row, e.line) == (*hits[0], hits[0][1] + 2), (event_kind, path)
        assert e.rows == e.values == len(hits), (event_kind, path)
        assert e.files == len({f for f, _ in hits})
    for e in events.values():
        assert (e.partition_key, e.partition_values, e.partition_compared) == ("region", ("west",), 4)
        assert e.level == "breaking" and e.still_going


def test_partition_episodes_do_not_depend_on_batch_size_or_jobs(demo_dir: Path) -> None:
    keys = ("kind", "path", "before", "after", "file", "row", "line", "values", "rows", "files", "last_file")
    whole = _partition_events(driftline.scan(demo_dir / "landing"))
    small = _partition_events(driftline.scan(demo_dir / "landing", batch_rows=7, jobs=2))
    assert [{k: getattr(e, k) for k in keys} for e in small] == [{k: getattr(e, k) for k in keys} for e in whole]
    assert len(whole) == 5
