"""diff: the kinds of change between two sides, and partition after partition."""

from __future__ import annotations

import pyarrow as pa
import pytest

import driftline
from conftest import write_lines
from driftline.core.lattice import join, parse_key, to_arrow
from driftline.core.stats import FieldStats
from driftline.gate.diff import DIFF_KINDS, diff_fields, diff_partitions, diff_profiles
from driftline.results.profile import summarise


def _one(types: dict[str, int], rows: int = 0) -> dict:
    return summarise({"x": FieldStats(types=types)}, rows or sum(types.values()))


# source: REFERENCES.md §5 — pyarrow 26.0.1 unify_schemas(promote_options="permissive").
UNIFIES = [
    ("int8", "int64", pa.int64()),
    ("int64", "float64", pa.float64()),
    ("int32", "uint32", pa.int64()),
    ("float32", "int64", pa.float64()),
]
RAISES = [("int64", "string"), ("bool", "int8")]


@pytest.mark.parametrize(("a", "b", "unified"), UNIFIES)
def test_a_change_pyarrow_unifies_is_a_widening_or_narrowing(a, b, unified):
    got = (
        pa.unify_schemas(
            [pa.schema([("x", to_arrow(parse_key(a)))]), pa.schema([("x", to_arrow(parse_key(b)))])],
            promote_options="permissive",
        )
        .field("x")
        .type
    )
    assert got == unified == to_arrow(join(parse_key(a), parse_key(b)))
    [fwd] = diff_fields(_one({a: 1}), _one({b: 1})).changes
    [back] = diff_fields(_one({b: 1}), _one({a: 1})).changes
    assert {fwd.kind, back.kind} <= {"widened", "narrowed"}
    assert (fwd.before, fwd.after) == (a, b)


@pytest.mark.parametrize(("a", "b"), RAISES)
def test_a_change_pyarrow_cannot_unify_is_a_type_change(a, b):
    with pytest.raises(pa.ArrowTypeError):
        pa.unify_schemas(
            [pa.schema([("x", to_arrow(parse_key(a)))]), pa.schema([("x", to_arrow(parse_key(b)))])],
            promote_options="permissive",
        )
    [c] = diff_fields(_one({a: 2}), _one({a: 1, b: 1})).changes
    assert (c.kind, c.before, c.after) == ("type-changed", a, f"union<{' | '.join(sorted([a, b]))}>")
    [c] = diff_fields(_one({a: 1, b: 1}), _one({a: 2})).changes
    assert c.kind == "narrowed"


def test_every_kind_between_two_folders(tmp_path):
    write_lines(
        tmp_path / "a" / "x.jsonl",
        [
            '{"id": 1, "v": 1, "gone": 1, "s": "2026-01-01T00:00:00Z", "n": 1, "g": {"k": 1}}',
            '{"id": 2, "v": 2, "gone": 2, "s": "2026-01-02T00:00:00Z", "n": null, "g": {"k": 2}}',
        ],
    )
    write_lines(
        tmp_path / "b" / "x.jsonl",
        [
            '{"id": 1, "v": 1.5, "s": "2026-01-01T00:00:00Z", "n": null, "new": {"a": 1, "b": [1]}, "g": {"k": 1}}',
            '{"id": "3", "v": 2, "s": "yesterday", "n": null, "g": {"k": 2}}',
            '{"id": 4, "v": 3, "s": "2026-01-03T00:00:00Z", "n": null, "g": null}',
        ],
    )
    d = diff_profiles(driftline.scan(tmp_path / "a"), driftline.scan(tmp_path / "b"), before="a", after="b")
    got = [(c.kind, c.path, c.before, c.after) for c in d.changes]
    assert got == [
        ("added", "new", None, "struct"),  # its children new.a, new.b, new.b[] are not listed again
        ("removed", "gone", "int64", None),
        ("type-changed", "id", "int64", "union<int64 | string>"),
        ("widened", "v", "int64", "float64"),
        # g.k stays non-nullable: a null g holds no struct, so g.k's places are the 2 structs.
        ("newly-nullable", "g", "not nullable", "nullable (0.0% → 33.3%)"),
        ("null-share", "n", "50.0%", "100.0%"),
        ("content-class", "s", "timestamp_rfc3339", "text, timestamp_rfc3339"),
    ]
    by_kind = {c.kind + c.path: c for c in d.changes}
    ex = by_kind["type-changedid"].example
    assert (ex.file, ex.row, ex.line, ex.value) == ("x.jsonl", 1, 2, '"3"')
    assert by_kind["content-classs"].example.value == '"yesterday"'
    assert d.counts() == {
        "added": 1,
        "removed": 1,
        "type-changed": 1,
        "widened": 1,
        "newly-nullable": 1,
        "null-share": 1,
        "content-class": 1,
    }
    assert list(d.counts()) == [k for k in DIFF_KINDS if k in d.counts()]


def test_small_null_share_moves_are_left_out(tmp_path):
    a = summarise({"x": FieldStats(types={"int64": 98}, nulls=2)}, 100)  # 2 %
    b = summarise({"x": FieldStats(types={"int64": 97}, nulls=3)}, 100)  # 3 %: one point
    assert [c.kind for c in diff_fields(a, b).changes] == ["null-share"]
    assert diff_fields(a, b, min_null_points=1.5).changes == ()


def test_partitions_each_against_the_one_before(tmp_path):
    land = tmp_path / "landing"
    write_lines(land / "day=2026-11-28" / "a.jsonl", ['{"x": 1}'])
    write_lines(land / "day=2026-11-29" / "a.jsonl", ['{"x": 2}'])
    write_lines(land / "day=2026-11-30" / "a.jsonl", ['{"x": 2.5, "y": true}'])
    diffs = diff_partitions(driftline.scan(land), "day")
    assert [(d.before, d.after, [(c.kind, c.path) for c in d.changes]) for d in diffs] == [
        ("day=2026-11-28", "day=2026-11-29", []),
        ("day=2026-11-29", "day=2026-11-30", [("added", "y"), ("widened", "x")]),
    ]
    ex = diffs[1].changes[1].example
    assert (ex.file, ex.row, ex.value) == ("day=2026-11-30/a.jsonl", 0, "2.5")


def test_json_shape(tmp_path):
    d = diff_fields(_one({"int64": 1}), _one({"float64": 1}), before="r1", after="r2")
    side = {"nullable": False, "null_share": 0.0, "classes": []}
    assert d.to_json() == {
        "before": "r1",
        "after": "r2",
        "counts": {"widened": 1},
        "changes": [
            {
                "kind": "widened",
                "path": "x",
                "before": {"type": "int64", **side},
                "after": {"type": "float64", **side},
                "message": "int64 → float64",
                "file": None,
                "row": None,
                "line": None,
                "example": None,
            }
        ],
    }


def test_json_carries_numbers_and_types_and_the_words_only_in_message(tmp_path):
    land = tmp_path / "landing"
    write_lines(land / "day=1" / "a.jsonl", ['{"x": 1, "s": "2026-11-28"}', '{"x": 2, "s": "2026-11-29"}'])
    write_lines(land / "day=2" / "a.jsonl", ['{"x": 3, "s": "abc"}', '{"x": null, "s": "x"}', '{"s": "y"}'])
    [d] = diff_partitions(driftline.scan(land), "day")
    got = {c["kind"]: c for c in d.to_json()["changes"]}
    nullable = got["newly-nullable"]
    # 1 null and 1 absent of 3 rows: 2/3 of the rows hold no value (exact binary64 quotient).
    assert nullable["before"] == {"type": "int64", "nullable": False, "null_share": 0.0, "classes": []}
    assert nullable["after"] == {"type": "int64", "nullable": True, "null_share": 2 / 3, "classes": []}
    assert nullable["message"] == "not nullable → nullable (0.0% → 66.7%)"
    # source: RFC 8259 section 3: the example of a null is the JSON value null, not the text "null".
    assert (nullable["file"], nullable["row"], nullable["example"]) == ("day=2/a.jsonl", 1, {"value": None})
    classes = got["content-class"]
    assert (classes["before"]["classes"], classes["after"]["classes"]) == (["date"], ["text"])
    assert classes["message"] == "date → text"
    # source: RFC 8259 section 7: a string example is a JSON string, written once.
    assert classes["example"] == {"value": "abc"}
