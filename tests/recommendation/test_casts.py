"""A cast never hides a loss: for any strings the classifier reads as numbers, booleans, dates or
timestamps, the effects the recommendation predicts from the profile alone (nulled, changed,
unchanged) are what really casting them does.

The real outcome of each value is judged here without driftline's classes: pyarrow.compute.cast
gives the value (REFERENCES.md section 5 lists its string casts), Python's decimal module gives
the number the text denotes, and datetime.fromisoformat (ISO 8601) the instant.  A positional
numeral (digits, optional point and digits) is unchanged when the number holds its value and
its digits: format(Decimal(text), "f") gives the text back (so "007" -> 7 is a change, "-0" -> 0
and "1.50" -> 1.5 are not).  A float literal is read as the nearest double (IEEE 754 binary64)
unless float64 cannot hold its magnitude (inf, or 0 for a non-zero number: a change).
"""

from __future__ import annotations

import datetime as dt
import math
import re
import string
from decimal import Decimal
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import driftline
from driftline.core.files import FileResult
from driftline.core.lattice import to_arrow
from driftline.observe.fast.columnar import observe_table
from driftline.observe.records import observe_records
from driftline.observe.textclass import class_of
from driftline.recommendation import FieldPlan, recommend
from driftline.recommendation.apply import Tally, apply
from driftline.recommendation.raw import as_variant, records_to_batch
from driftline.results.profile import Profile

SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
NUMERIC = ("zero_padded", "integer", "decimal", "float", "float_out_of_range")
TEMPORAL = ("date", "timestamp_rfc3339", "timestamp_offset", "timestamp_local")
_POSITIONAL = re.compile(r"-?[0-9]+(?:\.[0-9]+)?")


# -- one field, in memory: scan statistics, the plan, and apply() on the same values ----------


def _field(values: list[str], source: str, **options: object) -> tuple[FieldPlan, list[object], Tally]:
    """Plan and cast one field holding values, as CSV cells (source 'text') or JSON strings."""
    if source == "text":
        obs = observe_table(
            pa.table({"v": pa.array(values, pa.string())}), file="f.csv", batch=0, row_start=0, text_source=True
        )
        raw = pa.RecordBatch.from_arrays([as_variant(pa.array(values, pa.string()), text=True)], names=["v"])
        fmt = "csv"
    else:
        obs = observe_records([{"v": v} for v in values], file="f.jsonl", batch=0, row_start=0)
        raw = records_to_batch([{"v": v} for v in values])
        fmt = "jsonl"
    ref = FileResult(
        rel="f." + fmt,
        format=fmt,
        compression=None,
        partitions=(),
        size=0,
        mtime_ns=0,
        rows=len(values),
        observations=(obs,),
    )
    rec = recommend(Profile(root="mem", files=(ref,)), **options)
    tally = Tally()
    out = apply(raw, rec, tally=tally).column("v").to_pylist()
    return rec.plan("v"), out, tally


def _predicted(plan: FieldPlan) -> tuple[int, int, bool]:
    """Values nulled, values changed (exact counts), and whether an uncounted change may happen."""
    changes = [e for e in plan.effects if e.kind == "change"]
    return plan.nulled, sum(e.count for e in changes if e.exact), any(not e.exact for e in changes)


def _assert_tally(plan: FieldPlan, tally: Tally) -> None:
    uncounted = {e.cause for e in plan.effects if not e.exact}  # said, not counted: apply measures them
    measured = {
        k: v for k, v in tally.counts.get("v", {}).items() if k != "nulled" and ":" not in k and k not in uncounted
    }
    assert measured == {e.cause: e.count for e in plan.effects if e.exact and e.count}
    assert tally.get("v", "nulled") == plan.nulled


# -- numbers and booleans ----------------------------------------------------------------------


def _number_fate(text: str, got: object, target: pa.DataType) -> str:
    """'nulled', 'changed', 'unchanged' or 'rounded' (float64 kept the nearest double of a numeral)."""
    if got is None:
        return "nulled"
    if pa.types.is_boolean(target):
        return "unchanged" if got == (text.lower() == "true") else "changed"
    value = Decimal(text)
    positional = bool(_POSITIONAL.fullmatch(text))
    if positional and format(value, "f") != text:
        return "changed"  # digits no number keeps: leading zeros
    if not pa.types.is_floating(target):
        return "unchanged" if Decimal(got) == value else "changed"  # type: ignore[arg-type]
    assert isinstance(got, float)
    if value.is_nan():
        return "unchanged" if math.isnan(got) else "changed"
    if value.is_infinite():
        return "unchanged" if got == float(value) else "changed"
    if math.isinf(got) or (got == 0.0 and value != 0):
        return "changed"  # source: IEEE 754 binary64 range, 4.9e-324 .. 1.7976931348623157e308
    # The nearest double: Python's float() rounds correctly, as pyarrow's parser does.
    assert got == float(text)
    if not positional or Decimal(repr(got)) == value:
        return "unchanged"  # a float literal means its nearest double; a numeral, its exact value
    return "rounded"


_digits = st.text(string.digits, min_size=1, max_size=22)
_numbers = st.one_of(
    st.builds(
        lambda sign, zeros, body: sign + "0" * zeros + body, st.sampled_from(["", "-"]), st.integers(0, 3), _digits
    ),
    st.builds(lambda a, b: f"{a}.{b}", st.sampled_from(["0", "00", "-0", "1", "-12", "0012", "123456789"]), _digits),
    st.integers(-(2**63) - 3, -(2**63) + 3).map(str),
    st.integers(2**63 - 3, 2**63 + 3).map(str),
    st.integers(-(10**25), 10**25).map(str),
    st.builds(
        lambda m, e: f"{m}e{e}",
        st.sampled_from(["1", "3", "-2.5", ".5", "00", "0", "1.", "9.99"]),
        st.integers(-420, 420),
    ),
    st.sampled_from(
        [
            "3E4415",
            "1.7976931348623159e308",
            "1.7976931348623157e308",
            "2e-324",
            "3e-324",
            "inf",
            "-Infinity",
            "NaN",
            "0e999",
            "1" * 80,
            "1" * 400,
            "0" * 30 + "1",
            "-0",
            "0",
        ]
    ),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
)
_booleans = st.sampled_from(["true", "false", "TRUE", "False", "tRuE"])


@SETTINGS
@given(
    st.lists(st.one_of(_numbers, _numbers, _numbers, _booleans), min_size=1, max_size=4),
    st.sampled_from(["text", "string"]),
    st.sampled_from(["keep", "parse"]),
    st.sampled_from([0.0, 1.0]),
)
def test_number_and_boolean_casts_lose_what_the_plan_says(
    values: list[str], source: str, zeros: str, share: float
) -> None:
    values = [v for v in values if class_of(v) in (*NUMERIC, "boolean")]
    if not values:
        return
    plan, out, tally = _field(values, source, leading_zeros=zeros, parse_strings="always", max_null_share=share)
    _assert_tally(plan, tally)
    nulled, changed, may_change = _predicted(plan)
    target = to_arrow(plan.target)
    if pa.types.is_string(target):  # kept as text: nothing is lost
        assert out == values and (nulled, changed) == (0, 0)
        return
    fates = [_number_fate(v, got, target) for v, got in zip(values, out, strict=True)]
    assert fates.count("nulled") == nulled
    assert fates.count("changed") == changed
    assert may_change or "rounded" not in fates
    for v, got in zip(values, out, strict=True):
        if got is not None:  # the rule's value is pyarrow's cast of the text, nothing else
            want = pc.cast(pa.array([v], pa.string()), target).to_pylist()[0]
            assert got == want or (isinstance(got, float) and math.isnan(got) and math.isnan(want))


# -- dates and timestamps --------------------------------------------------------------------


def _pad(lo: int, hi: int) -> st.SearchStrategy[str]:
    return st.integers(lo, hi).map("{:02d}".format)


# Years 2 .. 9998: an offset moves an instant across a year, and Python's datetime holds 1 .. 9999.
_day = st.builds(lambda y, m, d: f"{y:04d}-{m}-{d}", st.integers(2, 9998), _pad(1, 12), _pad(1, 31))
_clock = st.builds(
    lambda h, m, s, f: f"{h}:{m}:{s}{f}",
    _pad(0, 23),
    _pad(0, 59),
    st.one_of(_pad(0, 59), st.just("60")),
    st.one_of(st.just(""), st.text(string.digits, min_size=1, max_size=9).map(".".__add__)),
)
_zone = st.sampled_from(["Z", "z", "+00:00", "-08:00", "+05:30", "+0800", "+08", ""])
_temporal = st.one_of(
    _day,
    st.builds(lambda d, sep, c, z: d + sep + c + z, _day, st.sampled_from(["T", " ", "t"]), _clock, _zone),
)


def _instant(text: str, unit_digits: int) -> tuple[dt.datetime | dt.date, bool, bool]:
    """What the text denotes (ISO 8601, datetime.fromisoformat), a leap second read as :59, and
    whether fraction digits finer than the unit were cut."""
    text = text.upper()
    leap = len(text) > 18 and text[17:19] == "60"
    if leap:  # source: RFC 3339 section 5.7 allows :60; the rule reads it as :59 of that minute
        text = text[:17] + "59" + text[19:]
    m = re.match(r"(.*?\.)([0-9]+)(.*)", text)
    cut = False
    if m:
        cut = any(c != "0" for c in m.group(2)[unit_digits:])
        text = m.group(1) + (m.group(2)[:unit_digits] or "0") + m.group(3)
    if len(text) == 10:
        return dt.date.fromisoformat(text), leap, cut
    return dt.datetime.fromisoformat(text), leap, cut


@SETTINGS
@given(st.lists(_temporal, min_size=1, max_size=3), st.sampled_from(["text", "string"]))
def test_date_and_timestamp_casts_lose_what_the_plan_says(values: list[str], source: str) -> None:
    values = [v for v in values if class_of(v) in TEMPORAL]
    if not values:
        return
    plan, out, tally = _field(values, source)
    _assert_tally(plan, tally)
    nulled, changed, may_change = _predicted(plan)
    target = to_arrow(plan.target)
    if pa.types.is_string(target):
        assert out == values and (nulled, changed) == (0, 0)
        return
    assert nulled == 0  # every value of a temporal class parses
    unit_digits = {"s": 0, "ms": 3, "us": 6, "ns": 9}[getattr(target, "unit", "us")]
    leaps = cuts = 0
    for v, got in zip(values, out, strict=True):
        want, leap, cut = _instant(v, unit_digits)
        leaps, cuts = leaps + leap, cuts + cut
        if pa.types.is_date(target):
            assert got == want
            continue
        if isinstance(want, dt.date) and not isinstance(want, dt.datetime):
            want = dt.datetime(want.year, want.month, want.day)  # a date is its midnight
        if target.tz:  # local times are read in the zone (UTC by default): the assumed_zone note
            want = want if want.tzinfo else want.replace(tzinfo=dt.UTC)
            assert got == want.astimezone(dt.UTC)
        else:
            assert got == want
    assert changed == leaps  # leap_second: counted
    assert may_change or cuts == 0  # truncated: not counted, but said


# -- regressions, each with its exact counts ------------------------------------------------------


def test_leading_zero_codes_stay_text_or_count_every_one() -> None:
    # common practice: FIPS county codes and US ZIP codes are fixed-width with leading zeros
    codes = ["000009113186", "09001", "06", "0900", "10001", "-007"]
    plan, out, _ = _field(codes, "text")
    assert (plan.rule, plan.target.key(), plan.effects) == ("identity", "string", ())
    assert out == codes
    assert "5 values have leading zeros" in plan.why
    plan, out, tally = _field(codes, "text", leading_zeros="parse")
    assert (plan.rule, plan.target.key()) == ("parse_integer", "int64")
    [zeros] = plan.effects
    assert (zeros.kind, zeros.cause, zeros.count, zeros.exact) == ("change", "leading_zeros", 5, True)
    assert [(e.row, e.value) for e in zeros.examples] == [(0, '"000009113186"'), (1, '"09001"'), (2, '"06"')]
    # source: REFERENCES.md section 5, pc.cast("007" -> int64) = 7
    assert out == [9113186, 9001, 6, 900, 10001, -7]
    assert tally.counts["v"] == {"leading_zeros": 5}


def test_float_out_of_range_is_a_change() -> None:
    # "3E4415" (a colour code) becomes inf in pc.cast(float64): source REFERENCES.md section 5,
    # "1e400 -> inf"; "1e-400" becomes 0.
    values = ["3E4415", "1.5", "1e-400", "2.25"]
    plan, out, tally = _field(values, "text")
    assert (plan.rule, plan.target.key()) == ("parse_float", "float64")
    [oor] = plan.effects
    assert (oor.kind, oor.cause, oor.count, oor.exact) == ("change", "out_of_range", 2, True)
    assert [(e.row, e.value) for e in oor.examples] == [(0, '"3E4415"'), (2, '"1e-400"')]
    assert out == [math.inf, 1.5, 0.0, 2.25]
    assert tally.counts["v"] == {"out_of_range": 2}


@pytest.mark.parametrize("source", ["text", "string"])
def test_19_digit_ids_are_int64(source: str) -> None:
    # source: int64 holds -2**63 .. 2**63 - 1 (9223372036854775807, 19 digits)
    ids = ["9223372036854775807", "1234567890123456789", "-9223372036854775808", "42"]
    plan, out, tally = _field(ids, source, parse_strings="always")
    assert (plan.rule, plan.target.key(), plan.effects) == ("parse_integer", "int64", ())
    assert out == [2**63 - 1, 1234567890123456789, -(2**63), 42]
    assert tally.counts == {}
    obs = observe_table(pa.table({"v": ids}), file="f.csv", batch=0, row_start=0, text_source=True)
    assert obs.fields["v"].types == {"int64": 4}  # a CSV scan shows int64 100%, not float64


def test_integers_beyond_int64_never_claim_no_loss() -> None:
    # 2**63 is past int64: a decimal string; decimal(19,0) holds it exactly, float64 may round it
    wide = ["9223372036854775808", "1"]
    plan, out, _ = _field(wide, "text")
    assert (plan.rule, plan.target.key(), plan.effects) == ("parse_decimal", "decimal(19,0)", ())
    assert out == [Decimal("9223372036854775808"), Decimal(1)]
    plan, _, _ = _field([*wide, "1e3"], "text")
    assert plan.target.key() == "float64"
    assert [(e.cause, e.exact) for e in plan.effects] == [("rounded", False)]


def test_a_scan_types_19_digit_ids_as_int64_on_every_path(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # source: int64 holds up to 2**63 - 1 = 9223372036854775807; JSON (RFC 8259 section 6) gives
    # integers no width, so an integer literal within int64 is an int64 whatever its digits.
    ids = [2**63 - 1 - 104729 * k for k in range(50)] + [10**18 + 7, -(2**63), 42]
    (tmp_path / "a.csv").write_text("id\n" + "".join(f"{i}\n" for i in ids))
    (tmp_path / "b.jsonl").write_text("".join(f'{{"id": {i}}}\n' for i in ids))
    # beside a float in the same column, Arrow's JSON reader gives doubles: the exact walk settles them
    (tmp_path / "c.jsonl").write_text("".join(f'{{"id": {i}}}\n' for i in ids) + '{"id": 0.5}\n')
    for exact in ("", "1"):
        monkeypatch.setenv("DRIFTLINE_EXACT", exact)
        profile = driftline.scan(tmp_path)
        for f in profile.files:
            [obs] = f.observations
            st_ = obs.fields["id"]
            want = {"int64": len(ids)} if f.rel != "c.jsonl" else {"float64": 1, "int64": len(ids)}
            assert st_.types == want, (f.rel, exact)
            if f.rel != "a.csv":  # (text cells keep no extremes)
                assert (st_.minimum, st_.maximum) == (-(2**63), 2**63 - 1), (f.rel, exact)
        csv_classes = next(f for f in profile.files if f.rel == "a.csv").observations[0].fields["id"].classes
        assert csv_classes == {"integer": len(ids)}
