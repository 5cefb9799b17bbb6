"""Each cast rule on small inputs: the target it proposes, the loss it predicts, and what
really casting the data gives (apply, pyarrow.compute)."""

from __future__ import annotations

import datetime as dt
import decimal
import inspect
import json
import sys
from pathlib import Path

import orjson
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import driftline
from driftline.recommendation import REGISTRY, FieldPlan, Recommendation
from driftline.recommendation.apply import Tally, apply
from driftline.recommendation.raw import raw_batches
from driftline.recommendation.rules import parquet_decimal_storage

UTC = dt.UTC


def _write(root: Path, files: dict[str, object]) -> Path:
    for name, content in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, pa.Table):
            pq.write_table(content, path)
        elif isinstance(content, list):
            path.write_text("".join(json.dumps(r) + "\n" for r in content))
        else:
            path.write_text(str(content))
    return root


def _rec(root: Path, **options: object) -> Recommendation:
    return driftline.scan(root).recommend(**options)


def _applied(root: Path, rec: Recommendation) -> tuple[pa.Table, Tally]:
    tally = Tally()
    batches = [apply(b.batch, rec, tally=tally) for b in raw_batches(root)]
    return pa.Table.from_batches(batches, schema=rec.arrow_schema()), tally


def _effects(plan: FieldPlan) -> dict[str, int]:
    return {e.cause: e.count for e in plan.effects}


# -- the registry ---------------------------------------------------------------------------


def test_registry_is_ordered_small_named_functions():
    names = list(REGISTRY)
    assert names[0] == "identity" and names[-1] == "keep_as_json_text"
    assert {
        "identity",
        "widen_numeric",
        "parse_integer",
        "parse_decimal",
        "parse_float",
        "parse_boolean",
        "parse_date",
        "parse_timestamp",
        "map_null_tokens",
        "wrap_scalar_in_list",
        "merge_struct",
        "keep_as_json_text",
    } <= set(names)
    for name, rule in REGISTRY.items():
        assert rule.__name__ == name  # each named after the cast it proposes
        assert (inspect.getdoc(rule) or "").strip()
        assert list(inspect.signature(rule).parameters) == ["f", "ctx"]


# -- identity, widen_numeric ----------------------------------------------------------------


def test_identity_keeps_a_field_of_one_type(tmp_path: Path):
    rec = _rec(_write(tmp_path, {"a.jsonl": [{"n": 1}, {"n": 2}, {"m": None}]}))
    n, m = rec.plan("n"), rec.plan("m")
    assert (n.rule, n.target.key(), n.nullable, n.effects) == ("identity", "int64", True, ())
    assert (m.rule, m.target.key()) == ("identity", "null")  # only nulls seen


def test_widen_numeric_counts_integers_past_2_53(tmp_path: Path):
    # source: RFC 7493 section 2.2 (I-JSON): integers beyond 9007199254740991 are not exact
    # source: IEEE 754 binary64, 53-bit significand: 9007199254740993 -> 9007199254740992.0
    rows = [{"v": 2**53 + 1}, {"v": 2**53 + 2}, {"v": 9007199254740991}, {"v": 0.5}]
    root = _write(tmp_path, {"a.jsonl": rows})
    rec = _rec(root)
    plan = rec.plan("v")
    assert (plan.rule, plan.target.key()) == ("widen_numeric", "float64")
    assert _effects(plan) == {"unsafe_int": 2}  # 2**53+1 and 2**53+2; 2**53-1 is safe
    assert [a.target for a in plan.alternatives] == ["int64", "decimal(38,18)"]
    table, tally = _applied(root, rec)
    assert table.column("v").to_pylist() == [9007199254740992.0, 9007199254740994.0, 9007199254740991.0, 0.5]
    assert float(2**53 + 1) == 9007199254740992.0 and sys.float_info.mant_dig == 53
    # Counted at risk: 2; really changed: only 2**53+1 (2**53+2 is a binary64 value).
    assert (tally.get("v", "unsafe_int"), tally.get("v", "unsafe_int:changed")) == (2, 1)


def test_widen_numeric_across_files_of_different_widths(tmp_path: Path):
    root = _write(tmp_path, {"a.parquet": pa.table({"n": pa.array([1, 2], pa.int32())}), "b.jsonl": [{"n": 2**40}]})
    plan = _rec(root).plan("n")
    assert (plan.rule, plan.target.key(), plan.effects) == ("widen_numeric", "int64", ())


# -- parse_* --------------------------------------------------------------------------------


def test_parse_integer_nulls_tokens_with_where_they_are(tmp_path: Path):
    root = _write(tmp_path, {"till.csv": "qty\n7\n8\nN/A\n12\n\n"})
    rec = _rec(root)
    plan = rec.plan("qty")
    assert (plan.rule, plan.target.key()) == ("parse_integer", "int64")
    [token] = plan.effects
    assert (token.kind, token.cause, token.count) == ("null", "null_token", 1)
    assert [(e.file, e.row, e.line, e.value) for e in token.examples] == [("till.csv", 2, 4, '"N/A"')]
    table, tally = _applied(root, rec)
    assert table.column("qty").to_pylist() == [7, 8, None, 12]
    assert tally.counts["qty"] == {"null_token": 1, "nulled": 1}


def test_leading_zeros_keep_the_field_text_or_count_as_changed(tmp_path: Path):
    # source: pyarrow 26.0.1 pc.cast string -> int64 reads "007" as 7 (REFERENCES.md section 5): the
    # zeros are gone. common practice: codes such as ZIP codes keep them ("007" is not 7).
    root = _write(tmp_path, {"till.csv": "qty\n7\n007\nN/A\n12\n\n"})
    rec = _rec(root)
    plan = rec.plan("qty")
    assert (plan.rule, plan.target.key(), _effects(plan)) == ("map_null_tokens", "string", {"null_token": 1})
    assert "1 value has leading zeros" in plan.why
    assert [(a.rule, a.target) for a in plan.alternatives] == [("parse_integer", "int64"), ("parse_integer", "int64")]
    assert plan.alternatives[1].note == 'drops the leading zeros of 1 value; leading_zeros = "parse" chooses it'
    table, tally = _applied(root, rec)
    assert table.column("qty").to_pylist() == ["7", "007", None, "12"]
    parsed = _rec(root, leading_zeros="parse").plan("qty")
    assert (parsed.rule, parsed.target.key()) == ("parse_integer", "int64")
    assert _effects(parsed) == {"null_token": 1, "leading_zeros": 1}
    zeros = parsed.effect("leading_zeros")
    assert (zeros.kind, zeros.exact) == ("change", True)
    assert [(e.file, e.row, e.line, e.value) for e in zeros.examples] == [("till.csv", 1, 3, '"007"')]
    table, tally = _applied(root, _rec(root, leading_zeros="parse"))
    assert table.column("qty").to_pylist() == [7, 7, None, 12]
    assert tally.counts["qty"] == {"null_token": 1, "leading_zeros": 1, "nulled": 1}


def test_parse_decimal_when_float64_would_round(tmp_path: Path):
    # source: C float.h DBL_DIG = 15 (sys.float_info.dig): decimals of up to 15 significant
    # digits survive float64; 16 and more may not.
    assert sys.float_info.dig == 15
    root = _write(tmp_path, {"a.csv": "x,y\n1234567890.123456,1.25\n-0.5,2.5\n"})
    rec = _rec(root)
    x, y = rec.plan("x"), rec.plan("y")
    assert (x.rule, x.target.key()) == ("parse_decimal", "decimal(16,6)")
    assert (y.rule, y.target.key()) == ("parse_float", "float64")
    assert [(a.rule, a.target) for a in y.alternatives] == [("parse_decimal", "decimal(3,2)")]
    assert _rec(root, prefer_decimal=True).plan("y").target.key() == "decimal(3,2)"
    table, _ = _applied(root, rec)
    assert table.column("x").to_pylist() == [decimal.Decimal("1234567890.123456"), decimal.Decimal("-0.500000")]


@pytest.mark.parametrize(
    ("precision", "physical"), [(9, "INT32"), (10, "INT64"), (18, "INT64"), (19, "FIXED_LEN_BYTE_ARRAY")]
)
def test_parquet_decimal_storage_follows_the_format_limits(tmp_path: Path, precision: int, physical: str):
    # source: apache/parquet-format LogicalTypes.md, DECIMAL: int32 for precision <= 9,
    # int64 for precision <= 18; checked against pyarrow 26.0.1 store_decimal_as_integer
    path = tmp_path / "d.parquet"
    t = pa.table({"d": pa.array([decimal.Decimal("1.25")], pa.decimal128(precision, 2))})
    pq.write_table(t, path, store_decimal_as_integer=True)
    assert pq.ParquetFile(path).metadata.schema.column(0).physical_type == physical
    assert parquet_decimal_storage(precision) == physical


def test_parse_float_reads_exponents_and_mixes_with_numbers(tmp_path: Path):
    root = _write(tmp_path, {"a.jsonl": [{"r": 0.5}, {"r": "1e3"}, {"r": "2"}, {"r": ".25"}]})
    rec = _rec(root)
    plan = rec.plan("r")
    assert (plan.rule, plan.target.key(), plan.params["accept"]) == ("parse_float", "float64", ["float", "integer"])
    table, _ = _applied(root, rec)
    assert table.column("r").to_pylist() == [0.5, 1000.0, 2.0, 0.25]


def test_parse_boolean_in_any_letter_case(tmp_path: Path):
    # source: pyarrow 26.0.1 pc.cast string -> bool takes true/false in any case (REFERENCES.md section 5)
    root = _write(tmp_path, {"a.jsonl": [{"b": True}, {"b": "FALSE"}, {"b": "True"}]})
    rec = _rec(root)
    assert rec.plan("b").rule == "parse_boolean"
    assert _applied(root, rec)[0].column("b").to_pylist() == [True, False, True]


def test_parse_date_from_strings_alone(tmp_path: Path):
    # source: RFC 3339 section 5.6 full-date; JSON has no date type, so date strings are parsed
    root = _write(tmp_path, {"a.jsonl": [{"d": "1985-04-12"}, {"d": "2024-02-29"}]})
    rec = _rec(root)
    assert (rec.plan("d").rule, rec.plan("d").target.key()) == ("parse_date", "date32")
    assert _applied(root, rec)[0].column("d").to_pylist() == [dt.date(1985, 4, 12), dt.date(2024, 2, 29)]


def test_parse_timestamp_on_the_rfc3339_examples(tmp_path: Path):
    # source: RFC 3339 section 5.8 examples; the UTC instants are the RFC's own (and REFERENCES.md section 1)
    examples = [
        "1985-04-12T23:20:50.52Z",
        "1996-12-19T16:39:57-08:00",
        "1990-12-31T23:59:60Z",
        "1990-12-31T15:59:60-08:00",
        "1937-01-01T12:00:27.87+00:20",
        "1985-04-12t23:20:50.52z",
    ]
    root = _write(tmp_path, {"a.jsonl": [{"t": s} for s in examples]})
    rec = _rec(root)
    plan = rec.plan("t")
    assert (plan.rule, plan.target.key()) == ("parse_timestamp", "timestamp[us, UTC]")
    # '1937-01-01T12:00:27.87+00:20' is 28 characters, as long as a 'Z' time with 7 fraction
    # digits: the scan cannot rule out a fraction finer than us, so that effect is not exact.
    assert _effects(plan) == {"leap_second": 2, "lowercase": 1, "truncated": 0}
    assert not plan.effect("truncated").exact and plan.effect("leap_second").exact
    assert plan.params["formats"] == {"RFC 3339 date-time": 6}
    table, tally = _applied(root, rec)
    got = [v.isoformat() for v in table.column("t").to_pylist()]
    assert got == [
        "1985-04-12T23:20:50.520000+00:00",
        "1996-12-20T00:39:57+00:00",
        "1990-12-31T23:59:59+00:00",  # the leap second becomes :59 (pyarrow rejects :60)
        "1990-12-31T23:59:59+00:00",
        "1937-01-01T11:40:27.870000+00:00",
        "1985-04-12T23:20:50.520000+00:00",
    ]  # lower-case t/z: the same instant
    assert (tally.get("t", "leap_second"), tally.get("t", "lowercase"), tally.get("t", "unparsed")) == (2, 1, 0)


def test_parse_timestamp_reads_local_times_in_the_zone_option(tmp_path: Path):
    rows = [{"t": "2026-11-29T10:00:00Z"}, {"t": "2026-11-29 11:00:00"}, {"t": "2026-11-29T12:00:00"}]
    root = _write(tmp_path, {"a.jsonl": rows})
    rec = _rec(root, timestamp_zone="+02:00")
    plan = rec.plan("t")
    assert plan.target.key() == "timestamp[us, +02:00]"
    [zone] = plan.effects
    assert (zone.kind, zone.cause, zone.count, zone.exact) == ("note", "assumed_zone", 2, True)
    got = [v.astimezone(UTC).isoformat() for v in _applied(root, rec)[0].column("t").to_pylist()]
    assert got == ["2026-11-29T10:00:00+00:00", "2026-11-29T09:00:00+00:00", "2026-11-29T10:00:00+00:00"]
    # A zone with daylight saving: times in a gap or overlap cannot be counted by the scan.
    assert not _rec(root, timestamp_zone="Europe/Berlin").plan("t").effect("assumed_zone").exact
    # Local times alone stay local.
    only_local = _write(tmp_path / "local", {"a.jsonl": rows[1:]})
    assert _rec(only_local).plan("t").target.key() == "timestamp[us]"


def test_parse_timestamp_says_when_fractions_may_be_cut(tmp_path: Path):
    # RFC 3339 time-secfrac is "." 1*DIGIT; unit us holds 6 digits. The scan does not count
    # longer fractions, so the rule says it cannot, unless no string is long enough.
    root = _write(tmp_path, {"a.jsonl": [{"t": "2026-11-29T10:00:00.1234567Z"}, {"t": "2026-11-29T10:00:00Z"}]})
    rec = _rec(root)
    cut = rec.plan("t").effect("truncated")
    assert cut is not None and (cut.count, cut.exact) == (0, False)
    table, tally = _applied(root, rec)
    assert tally.get("t", "truncated") == 1
    assert table.column("t")[0].as_py().microsecond == 123456
    # 28 characters cannot hold 10 fraction digits, so unit ns provably cuts nothing.
    ns = _rec(root, timestamp_unit="ns")
    assert ns.plan("t").effect("truncated") is None
    assert _applied(root, ns)[1].get("t", "truncated") == 0


# -- strings, tokens, lists, structs, JSON text ---------------------------------------------


def test_map_null_tokens_in_a_csv_text_column(tmp_path: Path):
    root = _write(tmp_path, {"a.csv": "who\nann\nN/A\nbo\n"})
    rec = _rec(root)
    plan = rec.plan("who")
    assert (plan.rule, plan.target.key(), _effects(plan)) == ("map_null_tokens", "string", {"null_token": 1})
    assert _applied(root, rec)[0].column("who").to_pylist() == ["ann", None, "bo"]


def test_json_strings_keep_their_tokens_unless_asked(tmp_path: Path):
    root = _write(tmp_path, {"a.jsonl": [{"s": "n/a"}, {"s": "x"}]})
    assert _rec(root).plan("s").rule == "identity"
    plan = _rec(root, null_tokens="always").plan("s")
    assert (plan.rule, _effects(plan)) == ("map_null_tokens", {"null_token": 1})


def test_wrap_scalar_in_list(tmp_path: Path):
    root = _write(tmp_path, {"a.jsonl": [{"tags": ["a", "b"]}, {"tags": "c"}, {"tags": []}, {"tags": None}]})
    rec = _rec(root)
    plan = rec.plan("tags")
    assert (plan.rule, plan.target.key(), _effects(plan)) == ("wrap_scalar_in_list", "list<string>", {"wrapped": 1})
    assert plan.effects[0].examples[0].row == 1
    assert _applied(root, rec)[0].column("tags").to_pylist() == [["a", "b"], ["c"], [], None]


def test_merge_struct_with_the_union_of_fields(tmp_path: Path):
    # source: pyarrow 26.0.1 unify_schemas(promote_options="permissive"):
    # struct<a> + struct<b> -> struct<a: int64, b: string> (REFERENCES.md section 5)
    root = _write(tmp_path, {"a.jsonl": [{"s": {"a": 1}}, {"s": {"b": "x"}}]})
    rec = _rec(root)
    plan = rec.plan("s")
    assert (plan.rule, plan.target.key()) == ("merge_struct", "struct<a: int64, b: string>")
    assert [(c.name, c.nullable, c.required) for c in plan.children] == [("a", True, False), ("b", True, False)]
    expected = pa.unify_schemas(
        [pa.schema([("s", pa.struct([("a", pa.int64())]))]), pa.schema([("s", pa.struct([("b", pa.string())]))])],
        promote_options="permissive",
    )
    assert rec.arrow_schema().field("s").type == expected.field("s").type
    assert _applied(root, rec)[0].column("s").to_pylist() == [{"a": 1, "b": None}, {"a": None, "b": "x"}]


def test_keep_as_json_text_is_the_last_resort(tmp_path: Path):
    rows = [{"p": {"k": 1}}, {"p": [1, "two"]}, {"p": "s"}, {"p": 2.5}]
    root = _write(tmp_path, {"a.jsonl": rows})
    rec = _rec(root)
    plan = rec.plan("p")
    assert (plan.rule, plan.target.key(), plan.children) == ("keep_as_json_text", "string", ())
    assert "last resort" in plan.does and "last resort" in plan.effects[0].note
    assert _effects(plan) == {"as_json_text": 4}
    got = _applied(root, rec)[0].column("p").to_pylist()
    assert got == [orjson.dumps(r["p"]).decode() for r in rows]  # strings quoted: JSON text


def test_format_as_string_when_kinds_do_not_meet(tmp_path: Path):
    # source: pyarrow 26.0.1 unify_schemas raises for bool + int8 and int64 + string
    # (REFERENCES.md section 5); a string field holds both as text.
    root = _write(tmp_path, {"a.jsonl": [{"f": True}, {"f": 1}, {"f": "many"}]})
    rec = _rec(root)
    plan = rec.plan("f")
    assert (plan.rule, plan.target.key(), _effects(plan)) == ("format_as_string", "string", {"as_text": 2})
    assert _applied(root, rec)[0].column("f").to_pylist() == ["true", "1", "many"]
    with pytest.raises(pa.ArrowTypeError):
        pa.unify_schemas([pa.schema([("f", pa.bool_())]), pa.schema([("f", pa.int8())])], promote_options="permissive")


def test_widen_temporal_dates_into_timestamps(tmp_path: Path):
    root = _write(
        tmp_path,
        {
            "a.parquet": pa.table({"t": pa.array([dt.date(2026, 1, 2)], pa.date32())}),
            "b.parquet": pa.table({"t": pa.array([dt.datetime(2026, 1, 2, 3)], pa.timestamp("ms"))}),
        },
    )
    rec = _rec(root)
    assert (rec.plan("t").rule, rec.plan("t").target.key()) == ("widen_temporal", "timestamp[ms]")
    assert _applied(root, rec)[0].column("t").to_pylist() == [dt.datetime(2026, 1, 2), dt.datetime(2026, 1, 2, 3)]
