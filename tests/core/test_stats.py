"""FieldStats: one table of statistics, and merge / JSON derived from it; typed sample keys."""

from __future__ import annotations

import doctest
import math
import pickle
from dataclasses import dataclass, fields
from typing import Any, get_type_hints

import orjson
import pytest
from hypothesis import given
from hypothesis import strategies as st

from driftline.core import stats
from driftline.core.stats import (
    COUNTS,
    EARLIEST,
    HIGHEST,
    LARGEST,
    LOWEST,
    NULL_SAMPLE,
    TOTAL,
    Example,
    FieldStats,
    Measured,
    Rule,
    SampleKey,
    StatsTable,
    class_sample,
    merge_all,
    stat,
    type_sample,
)


def ex(row: int, value: str = "", file: str = "f") -> Example:
    return Example(file, row, None, value)


def test_every_field_of_fieldstats_has_a_rule_in_field_order():
    table = StatsTable(FieldStats)
    assert [name for name, _ in table.declared] == [f.name for f in fields(FieldStats)]
    assert dict(table.declared)["samples"].rule is EARLIEST and dict(table.declared)["minimum"].rule is LOWEST


def test_a_field_without_a_rule_is_refused_when_the_table_is_made():
    @dataclass(frozen=True)
    class Forgotten:
        nulls: int = stat(TOTAL)
        rows: int = 0  # declared without stat(): merge would not know what to do with it

    with pytest.raises(TypeError, match=r"Forgotten\.rows has no merge rule"):
        StatsTable(Forgotten)


def test_measured_holds_every_statistic_but_types_nulls_and_samples():
    # The observers' keyword arguments: a statistic added to FieldStats must be added here too.
    hints = get_type_hints(FieldStats)
    assert get_type_hints(Measured) == {k: v for k, v in hints.items() if k not in ("types", "nulls", "samples")}


# A worked example (by hand): every statistic of a and b, and what merge makes of them.
A = FieldStats(
    types={"string": 2, "int64": 1},
    nulls=1,
    classes={"text": 2},
    samples={type_sample("string"): (ex(4, '"x"'), ex(9, '"y"')), NULL_SAMPLE: (ex(2, "null"),)},
    minimum=3,
    maximum="2026-01-05",
    max_length=7,
    int_digits=2,
    frac_digits=0,
    leap_seconds=1,
    lowercase_rfc3339=0,
    unsafe_ints=2,
    items=5,
    text=0,
)
B = FieldStats(
    types={"bool": 4, "int64": 3},
    nulls=2,
    classes={"date": 1, "text": 1},
    samples={
        type_sample("string"): (ex(1, '"a"'), ex(4, '"x"'), ex(6, '"b"')),
        class_sample("date"): (ex(3, '"2026-01-01"'),),
    },
    minimum=-1.5,
    maximum=8,
    max_length=3,
    int_digits=5,
    frac_digits=2,
    leap_seconds=0,
    lowercase_rfc3339=4,
    unsafe_ints=1,
    items=0,
    text=6,
)
MERGED = FieldStats(
    types={"bool": 4, "int64": 4, "string": 2},  # counts add; keys in order
    nulls=3,
    classes={"date": 1, "text": 3},
    samples={  # keys in text order; the 3 earliest rows of a key, one example per place
        class_sample("date"): (ex(3, '"2026-01-01"'),),
        NULL_SAMPLE: (ex(2, "null"),),
        type_sample("string"): (ex(1, '"a"'), ex(4, '"x"'), ex(6, '"b"')),
    },
    minimum=-1.5,  # numbers as numbers
    maximum="2026-01-05",  # a number orders before any text: the text is the higher
    max_length=7,
    int_digits=5,
    frac_digits=2,
    leap_seconds=1,
    lowercase_rfc3339=4,
    unsafe_ints=3,
    items=5,
    text=6,
)


def test_merge_follows_each_statistics_rule_on_a_worked_example():
    assert A.merge(B) == MERGED
    assert B.merge(A) == MERGED
    assert merge_all([{"p": A}, {"p": B}]) == {"p": MERGED}
    assert merge_all([{"p": B}, {"p": FieldStats()}, {"p": A}]) == {"p": MERGED}
    assert list(MERGED.samples) == list(A.merge(B).samples)  # order too: it is the report's


def test_merge_of_two_equals_merge_of_the_pair_for_every_rule():
    cases: list[tuple[Rule, Any, Any, Any]] = [
        (COUNTS, {"b": 1, "a": 2}, {"a": 3, "c": 1}, {"a": 5, "b": 1, "c": 1}),
        (TOTAL, 2, 5, 7),
        (LARGEST, 2, 5, 5),
        (LOWEST, None, "2026-01-01", "2026-01-01"),
        (HIGHEST, 4.5, 4, 4.5),
        (
            EARLIEST,
            {type_sample("x"): (ex(5), ex(7), ex(8))},
            {type_sample("x"): (ex(6), ex(7)), NULL_SAMPLE: (ex(0),)},
            {NULL_SAMPLE: (ex(0),), type_sample("x"): (ex(5), ex(6), ex(7))},
        ),
    ]
    for rule, a, b, want in cases:
        assert rule.pair(a, b) == want, rule
        assert rule.merge((a, b)) == want, rule
        assert rule.merge((b, a)) == want, rule
    used = {spec.rule for _, spec in StatsTable(FieldStats).declared}
    assert used == {rule for rule, *_ in cases}  # every rule FieldStats uses is worked here


def test_an_example_of_the_same_place_keeps_its_first_value():
    # Examples are equal by (file, row); a merge keeps the first side's, as a set union does.
    a = FieldStats(samples={NULL_SAMPLE: (ex(1, "first"),)})
    b = FieldStats(samples={NULL_SAMPLE: (ex(1, "second"), ex(0, "zero"))})
    assert [e.value for e in a.merge(b).samples[NULL_SAMPLE]] == ["zero", "first"]
    assert [e.value for e in merge_all([{"p": a}, {"p": b}])["p"].samples[NULL_SAMPLE]] == ["zero", "first"]


# A statistic added in one place: a table of its own, with a rule no FieldStats field uses.
def _union(values: Any) -> tuple[str, ...]:
    return tuple(sorted({v for names in values for v in names}))


NAMES = Rule(_union, lambda a, b: _union((a, b)), tuple, to_json=list, from_json=tuple)


@dataclass(frozen=True, slots=True)
class Tally:
    rows: int = stat(TOTAL, always=True)
    widest: int = stat(LARGEST)
    seen: tuple[str, ...] = stat(NAMES)  # the new one
    samples: dict[SampleKey, tuple[Example, ...]] = stat(EARLIEST)


def test_merge_and_json_are_derived_for_a_statistic_declared_once():
    table = StatsTable(Tally)
    a, b = Tally(rows=2, widest=4, seen=("y",)), Tally(rows=3, seen=("x", "y"), samples={NULL_SAMPLE: (ex(2),)})
    assert table.merge((a, b)) == Tally(rows=5, widest=4, seen=("x", "y"), samples={NULL_SAMPLE: (ex(2),)})
    assert table.merge_two(a, b) == table.merge((b, a))
    assert table.to_json(a) == {"rows": 2, "widest": 4, "seen": ["y"]}  # empty statistics left out
    assert table.to_json(Tally()) == {"rows": 0}  # but one always written
    assert table.from_json({"rows": 1, "seen": ["z"]}) == Tally(rows=1, seen=("z",))
    assert table.from_json(orjson.loads(orjson.dumps(table.to_json(b)))) == b


def test_to_json_writes_each_statistic_in_field_order_and_leaves_out_empty_ones():
    # source: docs/report.schema.json, $defs.stats (types, nulls and samples required)
    assert FieldStats().to_json() == {"types": {}, "nulls": 0, "samples": {}}
    got = FieldStats(types={"int64": 1}, minimum=0, maximum=0.0, unsafe_ints=1).to_json()
    assert list(got) == ["types", "nulls", "samples", "minimum", "maximum", "unsafe_ints"]
    assert (got["minimum"], got["maximum"]) == (0, 0.0)  # a zero extreme is an extreme
    assert list(MERGED.to_json()) == [f.name for f in fields(FieldStats)]


def test_infinite_extremes_are_written_as_words():
    # source: RFC 8259 section 6 (no infinity or NaN in JSON numbers)
    s = FieldStats(types={"float64": 2}, minimum=-math.inf, maximum=math.inf)
    assert (s.to_json()["minimum"], s.to_json()["maximum"]) == ("-inf", "inf")
    assert FieldStats.from_json(orjson.loads(orjson.dumps(s.to_json()))) == s


def test_sample_keys_are_written_as_the_reports_text_and_read_back():
    # source: docs/report.schema.json, stats.samples propertyNames ^(type:.+|class:.+|null)$
    d = MERGED.to_json()
    assert list(d["samples"]) == ["class:date", "null", "type:string"]
    # source: RFC 8259 section 7: the example string a is the JSON value "a", not the text "\"a\"".
    assert d["samples"]["type:string"][0] == {"file": "f", "row": 1, "line": None, "value": "a"}
    back = FieldStats.from_json(orjson.loads(orjson.dumps(d)))
    assert back == MERGED
    assert all(type(k) is SampleKey for k in back.samples)
    assert back.first(type_sample("string")) == ex(1, '"a"')


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("type:int64", SampleKey("type", "int64")),
        ("type:timestamp[us, UTC]", SampleKey("type", "timestamp[us, UTC]")),
        ("type:decimal(30,0)", SampleKey("type", "decimal(30,0)")),
        ("class:null_token", SampleKey("class", "null_token")),
        ("null", SampleKey("null", "")),
    ],
)
def test_a_sample_key_and_its_text(text: str, key: SampleKey):
    assert str(key) == text
    assert SampleKey.parse(text) == key


@pytest.mark.parametrize("text", ["", "type:", "class:", "types:int64", "nulls", "value:x", "int64"])
def test_a_text_that_is_no_sample_key_is_refused(text: str):
    with pytest.raises(ValueError, match="not a sample key"):
        SampleKey.parse(text)


NAMES_TEXT = st.text(min_size=1, max_size=12)
KEYS = st.one_of(
    st.just(NULL_SAMPLE),
    NAMES_TEXT.map(lambda n: SampleKey("type", n)),
    NAMES_TEXT.map(lambda n: SampleKey("class", n)),
)


@given(keys=st.lists(KEYS, max_size=8))
def test_sample_keys_order_as_their_text(keys: list[SampleKey]):
    # The report's samples are written sorted by key: the order of the text they replaced.
    assert [str(k) for k in sorted(keys)] == sorted(str(k) for k in keys)
    assert [SampleKey.parse(str(k)) for k in keys] == keys


def test_the_same_key_is_one_object():
    assert type_sample("int64") is type_sample("int64") is SampleKey.parse("type:int64")
    assert class_sample("date") is SampleKey.parse("class:date")
    assert SampleKey.parse("null") is NULL_SAMPLE


def test_field_stats_pickle_to_themselves():
    assert pickle.loads(pickle.dumps(MERGED)) == MERGED
    assert pickle.loads(pickle.dumps({"a": A, "b": B})) == {"a": A, "b": B}


def test_docstring_examples_run():
    result = doctest.testmod(stats)
    assert result.failed == 0 and result.attempted > 0
