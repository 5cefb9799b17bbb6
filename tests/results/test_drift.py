"""Drift events on data with changes injected at known rows.

The demo generator records each injected change (field, first file, row, line) in its
manifest, checked independently by tests/scripts/test_make_demo.py; the scan must name every one.
"""

from __future__ import annotations

import json
from pathlib import Path

import driftline
from conftest import write_lines
from driftline.results.drift import EVENT_KINDS, Event, drift_summary
from driftline.results.report import to_dict


def test_every_injected_change_is_named_with_field_file_and_row(demo_profile, demo_manifest):
    events = {(e.kind, e.path, e.file): e for e in demo_profile.events}
    for change in demo_manifest["changes"]:
        if change["change"] == "malformed-line":
            continue
        key = (change["change"], change["field"], change["file"])
        assert key in events, f"no {key} among {sorted(events)}"
        event = events[key]
        assert event.row == change["row"], change
        assert event.line == change["line"], change


def test_nothing_breaks_but_the_injected_changes(demo_profile, demo_manifest):
    # Every breaking episode of the demo is one of the manifest's injected changes, at its file
    # and row: the scan raises no breaking event the generator did not put there.
    injected = {(c["change"], c["field"], c["file"], c["row"]) for c in demo_manifest["changes"]}
    breaking = [(e.kind, e.path, e.file, e.row) for e in demo_profile.events if e.level == "breaking"]
    assert [b for b in breaking if b not in injected] == []
    assert len(breaking) == 11


def test_malformed_line_is_an_error_with_line_and_offset(demo_profile, demo_manifest):
    (bad,) = [c for c in demo_manifest["changes"] if c["change"] == "malformed-line"]
    issues = [i for i in demo_profile.issues if i.file == bad["file"] and i.severity == "error"]
    assert [(i.kind, i.line) for i in issues] == [("malformed-json", bad["line"])]
    # The offset points into the bad line: at or after its first byte.
    assert issues[0].byte_offset is not None and issues[0].byte_offset >= bad["byte_offset"]


def test_each_event_kind_is_documented(demo_profile):
    assert {e.kind for e in demo_profile.events} <= set(EVENT_KINDS)


def _kinds(profile):
    return [(e.kind, e.path, e.before, e.after, e.file, e.row, e.line) for e in profile.events]


def test_exact_events_across_batches(tmp_path: Path):
    # Batches of 2 rows: row 2 starts batch 1, row 4 starts batch 2. s.y arrives in the
    # same batch as its struct s, so it is part of s's arrival, not an event of its own.
    write_lines(
        tmp_path / "a.jsonl",
        [
            '{"id": 1, "v": 1}',
            '{"id": 2, "v": 2}',
            '{"id": 3, "v": 2.5, "s": {"x": 1}}',
            '{"id": 4, "v": null, "s": {"x": 1, "y": "a"}}',
            '{"id": "5", "v": 3, "s": {"x": 2}}',
            '{"id": 6, "v": 4, "s": {"x": 2}}',
        ],
    )
    profile = driftline.scan(tmp_path, batch_rows=2)
    assert _kinds(profile) == [
        ("field-new", "s", None, "struct", "a.jsonl", 2, 3),
        ("type-widened", "v", "int64", "float64", "a.jsonl", 2, 3),
        ("nulls-begin", "v", None, "null", "a.jsonl", 3, 4),
        ("nested-gone", "s.y", "string", None, "a.jsonl", 4, 5),
        ("type-conflict", "id", "int64", "string", "a.jsonl", 4, 5),
    ]


def test_field_gone_is_found_per_series_of_partitions(tmp_path: Path):
    # temp stops in region=b while region=c still sends it: gone within region=b.
    for region, day, rec in [
        ("b", "1", '{"k": 1, "temp": 1.5}'),
        ("b", "2", '{"k": 1}'),
        ("c", "1", '{"k": 1, "temp": 2.5}'),
        ("c", "2", '{"k": 1, "temp": 3.5}'),
    ]:
        write_lines(tmp_path / f"region={region}" / f"day={day}" / "p.jsonl", [rec])
    profile = driftline.scan(tmp_path)
    gone = [(e.kind, e.path, e.file, e.count) for e in profile.events if e.kind == "field-gone"]
    assert gone == [("field-gone", "temp", "region=b/day=2/p.jsonl", 1)]


def test_list_element_change_and_timestamp_format_change(tmp_path: Path):
    write_lines(
        tmp_path / "t.jsonl",
        [
            '{"tags": [1, 2], "ts": "1985-04-12T23:20:50.52Z"}',
            '{"tags": ["a"], "ts": "1985-04-12 23:20:50"}',
        ],
    )
    profile = driftline.scan(tmp_path)
    kinds = [(e.kind, e.path, e.before, e.after, e.row) for e in profile.events]
    # source: RFC 3339 section 5.8 (first example); the second value has a space and no offset
    assert kinds == [
        ("element-changed", "tags[]", "int64", "union<int64 | string>", 1),
        ("textclass-changed", "ts", "timestamp_rfc3339", "timestamp_local", 1),
    ]


def test_events_do_not_depend_on_parallelism(demo_dir):
    serial = driftline.scan(demo_dir / "landing", jobs=1)
    parallel = driftline.scan(demo_dir / "landing", jobs=2)
    assert serial.events == parallel.events
    assert serial == parallel


def test_a_member_of_a_union_widens(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1}', '{"x": "a"}', '{"x": 2.5}'])
    kinds = [(e.kind, e.before, e.after, e.row) for e in driftline.scan(tmp_path).events]
    assert kinds == [
        ("type-conflict", "int64", "string", 1),
        ("type-widened", "union<int64 | string>", "union<float64 | string>", 2),
    ]


def test_a_type_the_field_already_holds_is_no_drift(tmp_path: Path):
    # float64 holds int64 (the widening join): an integer after floats changes nothing
    write_lines(tmp_path / "a.jsonl", ['{"x": 1.5, "l": [1.5]}', '{"x": 2, "l": [2]}'])
    assert driftline.scan(tmp_path).events == ()


# -- episodes: the reach of each change, counted again by DuckDB over the same files ------------


def _json_types(folder: Path, field: str) -> list[tuple[str, int, str | None]]:
    """(file, 0-based row, JSON type of field or None when the key is missing) for every row, read by DuckDB."""
    import duckdb

    con = duckdb.connect()
    con.execute("SET threads = 1")  # one reader thread: rows come back in file order
    out = []
    for path in sorted(folder.glob("*.jsonl")):
        # source: DuckDB JSON extension docs, read_ndjson_objects (one JSON value per line) and json_type
        got = con.execute(f"SELECT json_type(json, '$.{field}') FROM read_ndjson_objects(?)", [str(path)]).fetchall()
        out.extend((path.name, i, t) for i, (t,) in enumerate(got))
    return out


def _flip_folder(tmp_path: Path, with_tail: bool) -> Path:
    """temp_c is a float; strings arrive in b (rows 25-39) and c (rows 0-4), none in d, and again in e."""

    def rows(n: int, strings: set[int]) -> list[str]:
        return [json.dumps({"id": i, "temp_c": str(i + 0.5) if i in strings else i + 0.5}) for i in range(n)]

    write_lines(tmp_path / "a.jsonl", rows(30, set()))
    write_lines(tmp_path / "b.jsonl", rows(40, set(range(25, 40))))
    write_lines(tmp_path / "c.jsonl", rows(20, set(range(5))))
    write_lines(tmp_path / "d.jsonl", rows(10, set()))
    if with_tail:
        write_lines(tmp_path / "e.jsonl", rows(12, {3, 7}))
    return tmp_path


def _one(profile, kind: str, path: str):
    (event,) = [e for e in profile.events if (e.kind, e.path) == (kind, path)]
    return event


def test_type_flip_episode_reach_matches_duckdb_and_recurs(tmp_path: Path):
    folder = _flip_folder(tmp_path, with_tail=True)
    strings = [(f, r) for f, r, t in _json_types(folder, "temp_c") if t == "VARCHAR"]
    e = _one(driftline.scan(folder), "type-conflict", "temp_c")
    assert (e.before, e.after) == ("float64", "string")
    assert (e.file, e.row) == strings[0] == ("b.jsonl", 25)
    assert e.rows == e.values == len(strings) == 15 + 5 + 2
    assert e.files == len({f for f, _ in strings}) == 3
    last_file = strings[-1][0]
    # One batch a file (the default batch is far larger): the last batch is the whole last file.
    assert (e.last_file, e.last_row) == (last_file, min(r for f, r in strings if f == last_file)) == ("e.jsonl", 3)
    # Gone in d.jsonl (floats only), back in e.jsonl: the same episode, reopened once, still going.
    assert (e.recurrences, e.still_going, e.ended_file) == (1, True, None)
    assert e.batches == 3
    assert [x for x in driftline.scan(folder).events if x.kind == "type-conflict"] == [e]


def test_type_flip_that_stops_ends_where_it_no_longer_shows(tmp_path: Path):
    folder = _flip_folder(tmp_path, with_tail=False)
    types = _json_types(folder, "temp_c")
    strings = [(f, r) for f, r, t in types if t == "VARCHAR"]
    e = _one(driftline.scan(folder), "type-conflict", "temp_c")
    assert e.rows == len(strings) == 20 and e.files == 2
    # It ends in the first file after the last string that holds temp_c values, at that batch's first row.
    after = [f for f, _, t in types if f > strings[-1][0] and t == "DOUBLE"]
    assert (e.still_going, e.ended_file, e.ended_batch, e.ended_row, e.recurrences) == (False, after[0], 0, 0, 0)
    assert e.ended_file == "d.jsonl"
    assert e.to_json()["ended"] == {"file": "d.jsonl", "batch": 0, "row": 0}


def test_episode_totals_do_not_depend_on_batch_size(tmp_path: Path):
    folder = _flip_folder(tmp_path, with_tail=True)
    whole = _one(driftline.scan(folder), "type-conflict", "temp_c")
    small = _one(driftline.scan(folder, batch_rows=7), "type-conflict", "temp_c")
    same = ("file", "row", "line", "values", "rows", "files", "last_file")
    assert {k: getattr(small, k) for k in same} == {k: getattr(whole, k) for k in same}
    # Batches are the unit of showing, so batches touched (and where it pauses) follow the batch size:
    # b rows 21-27, 28-34, 35-39 and c rows 0-6 and e rows 0-6, 7-11 hold strings.
    assert (whole.batches, small.batches) == (3, 6)


def test_a_field_that_leaves_and_returns_ends_its_gone_episode_where_it_returns(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"x": 1, "y": 1}'] * 4)
    write_lines(tmp_path / "b.jsonl", ['{"x": 1}'] * 5)
    write_lines(tmp_path / "c.jsonl", ['{"x": 1}'] * 6)
    write_lines(tmp_path / "d.jsonl", ['{"x": 1, "y": 2}'] * 3)
    missing = [(f, r) for f, r, t in _json_types(tmp_path, "y") if t is None]
    e = _one(driftline.scan(tmp_path), "field-gone", "y")
    assert (e.file, e.row) == missing[0] == ("b.jsonl", 0)
    assert e.rows == e.values == len(missing) == 11
    assert (e.files, e.last_file, e.last_row) == (2, "c.jsonl", max(r for f, r in missing if f == "c.jsonl"))
    # The return is reported: the episode ends at the first row of d.jsonl, where y is back.
    assert (e.still_going, e.ended_file, e.ended_row) == (False, "d.jsonl", 0)


def test_nulls_that_begin_and_go_on_are_counted_in_full(tmp_path: Path):
    write_lines(tmp_path / "a.jsonl", ['{"h": 1}'] * 3)
    write_lines(tmp_path / "b.jsonl", ['{"h": 1}', '{"h": null}', '{"h": 2}', '{"h": null}'])
    write_lines(tmp_path / "c.jsonl", ['{"h": null}', '{"h": 3}'])
    nulls = [(f, r) for f, r, t in _json_types(tmp_path, "h") if t == "NULL"]
    e = _one(driftline.scan(tmp_path), "nulls-begin", "h")
    assert (e.file, e.row, e.line) == (*nulls[0], 2)
    assert (e.rows, e.files, e.last_file, e.still_going) == (len(nulls), 2, "c.jsonl", True) == (3, 2, "c.jsonl", True)


def test_the_first_file_is_the_baseline(tmp_path: Path):
    # The first rows of each field set its baseline: nulls from the first row on, a key missing
    # from some rows, a nested struct: facts of the data, not changes, so no event.
    lines = ['{"x": 1, "y": null, "s": {"a": 1}}', '{"x": 2, "s": {"a": 2}}', '{"x": 3, "y": null, "s": {"a": 3}}']
    write_lines(tmp_path / "a.jsonl", lines)
    assert driftline.scan(tmp_path).events == ()
    # The same rows again in a second file change nothing either.
    write_lines(tmp_path / "b.jsonl", lines)
    assert driftline.scan(tmp_path).events == ()
    # A change in the second file is one: its start is where it first shows.
    write_lines(tmp_path / "c.jsonl", ['{"x": "four", "y": null, "s": {"a": 4}}'])
    assert [(e.kind, e.path, e.file, e.row) for e in driftline.scan(tmp_path).events] == [
        ("type-conflict", "x", "c.jsonl", 0)
    ]


def test_episodes_go_to_json_and_back(demo_profile):
    for e in demo_profile.events:
        data = e.to_json()
        assert Event.from_json(data) == e
        assert data["still_going"] == (e.ended_file is None)


def test_the_walk_bound_cuts_the_list_and_keeps_the_totals_exact(tmp_path: Path):
    folder = _flip_folder(tmp_path, with_tail=True)
    write_lines(folder / "f.jsonl", ['{"id": 1, "temp_c": 1.5, "extra": true}'])
    full = driftline.scan(folder)
    assert [(e.kind, e.path) for e in full.events] == [("type-conflict", "temp_c"), ("field-new", "extra")]
    # max_events is the terminal's: the Profile and its report keep every episode
    one = driftline.scan(folder, max_events=1)
    assert one.events == full.events and to_dict(one)["events"] == to_dict(full)["events"]
    assert "max_events" not in to_dict(one)["options"]
    # the walk's own bound (EPISODES_HELD) follows one episode: the other is counted only
    events, kinds, levels = drift_summary(full.files, 1)
    assert events == full.events[:1] and kinds == {"type-conflict": 1, "field-new": 1}
    assert levels == {"breaking": 1, "widening": 1}
    assert events[0].rows == 22  # the listed episode is still counted in full


def test_the_demo_ts_in_three_formats_is_one_change(demo_profile):
    # demo/make_demo.py: ts is RFC 3339 in the feed until the south stations move to local
    # "YYYY-MM-DD HH:MM:SS" (the one listed change of ts in time); the nightly Parquet holds the
    # same instants as timestamp[us, UTC] and the west CSV writes local cells like the south feed.
    # One logical type across formats (docs/drift.md): only the feed's change is an event in
    # time; west, which never sends a zone, is the partition-level one the manifest lists.
    ts = [(e.kind, e.before, e.after, e.file, e.row) for e in demo_profile.events if e.path == "ts"]
    assert ts == [
        (
            "textclass-changed",
            "timestamp_rfc3339",
            "timestamp_local",
            "readings/region=south/day=2026-11-29/part-0000.jsonl.gz",
            120,
        ),
        ("partition-type", "timestamp[us, UTC]", "timestamp[us]", "readings/region=west/day=2026-11-28/export.csv", 0),
    ]
    (e,) = [e for e in demo_profile.events if e.path == "ts" and e.kind == "textclass-changed"]
    # The Parquet's zoned instants stop it (ended there), the west CSV's local cells reopen it.
    assert (e.recurrences, e.last_file, e.still_going) == (1, "readings/region=west/day=2026-11-29/export.csv", True)
