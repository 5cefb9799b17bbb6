"""Observation of one batch: types, present-null vs absent, nesting, content classes, samples."""

from __future__ import annotations

from driftline.core.stats import NULL_SAMPLE, class_sample, type_sample
from driftline.observe.records import observe_records
from driftline.results.profile import summarise


def test_null_and_absent_are_kept_apart():
    obs = observe_records([{"a": 1}, {"a": None}, {}], file="f", batch=0, row_start=0)
    s = summarise(obs.fields, obs.rows)["a"]
    assert (s.stats.types, s.stats.nulls, s.absent, s.container) == ({"int64": 1}, 1, 1, 3)
    assert s.stats.first(NULL_SAMPLE).row == 1


def test_nested_paths_and_list_elements():
    recs = [{"s": {"x": 1, "l": [1, 2]}}, {"s": {"x": 2, "l": []}}, {"s": None}, {"e": []}]
    obs = observe_records(recs, file="f", batch=0, row_start=10, lines=[1, 2, 3, 5])
    f = summarise(obs.fields, obs.rows)
    assert f["s"].stats.types == {"struct": 2} and f["s"].stats.nulls == 1 and f["s"].absent == 1
    assert f["s.x"].container == 2 and f["s.x"].absent == 0
    assert f["s.l"].stats.items == 2 and f["s.l[]"].stats.types == {"int64": 2}
    # An element of lists that are always empty: the path exists, nothing tells its type.
    assert f["e"].stats.types == {"list": 1} and f["e[]"].stats.types == {} and f["e[]"].container == 0
    assert f["s.l[]"].stats.first(type_sample("int64")).row == 10  # rows are file rows
    assert f["e"].stats.first(type_sample("list")).line == 5


def test_integers_beyond_2_pow_53_are_counted():
    # source: RFC 7493 section 2.2 / IEEE 754 binary64: |n| > 9007199254740991 is not exact as a double
    obs = observe_records(
        [{"n": 9007199254740991}, {"n": 9007199254740993}, {"n": -9007199254740992}], file="f", batch=0, row_start=0
    )
    assert obs.fields["n"].unsafe_ints == 2
    assert float(9007199254740993) == 9007199254740992.0  # source: IEEE 754 binary64 (REFERENCES §2)


def test_strings_get_content_classes_with_samples():
    recs = [{"v": "12.5"}, {"v": "n/a"}, {"v": "13.25"}, {"v": "-"}]
    st = observe_records(recs, file="p.jsonl", batch=0, row_start=0, lines=[1, 2, 3, 4]).fields["v"]
    assert st.types == {"string": 4}
    assert st.classes == {"decimal": 2, "null_token": 2}
    assert (st.int_digits, st.frac_digits) == (2, 2)
    assert [(e.row, e.value) for e in st.samples[class_sample("null_token")]] == [(1, '"n/a"'), (3, '"-"')]


def test_samples_only_walk_keeps_the_examples_and_class_counts():
    # The JSON fast path walks a few rows for their examples only; the examples, class
    # counts, types and nulls equal the full walk's (the reference), the leap-second and
    # digit statistics are left to the caller.  "1990-12-31T23:59:60Z" is RFC 3339's own
    # leap-second example (source: RFC 3339 section 5.8).
    values = [
        "12",
        "007",
        "-3.25",
        "1e5",
        "2024-02-29",
        "1990-12-31T23:59:60Z",
        "1985-04-12t23:20:50.52z",
        "N/A",
        "",
        "true",
        "plain",
        "12",
        "x",
        "12",
        None,
        4,
    ]
    records = [{"s": v, "l": [v, v]} for v in values]
    full = observe_records(records, file="f", batch=0, row_start=0, lines=list(range(1, 17)))
    short = observe_records(records, file="f", batch=0, row_start=0, lines=list(range(1, 17)), samples_only=True)
    for path in ("s", "l", "l[]"):
        a, b = full.fields[path], short.fields[path]
        assert b.samples == a.samples and b.classes == a.classes and b.types == a.types and b.nulls == a.nulls
    assert short.fields["s"].classes["integer"] == 3 and short.fields["s"].classes["zero_padded"] == 1
    assert full.fields["s"].leap_seconds == 1 and short.fields["s"].leap_seconds == 0
    assert [e.row for e in short.fields["s"].samples[class_sample("integer")]] == [0, 11, 13]


def test_bare_strings_have_no_shape_tally():
    # Records that are not objects (RFC 8259 section 2: any value is a JSON text) hold no fields.
    from driftline.observe.records import observe_records

    obs = observe_records(["a", "b"], file="f.json", batch=0, row_start=0, shapes=True)
    assert obs.fields["$"].types == {"string": 2}
    assert obs.shapes == {}
