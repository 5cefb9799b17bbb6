"""What a scalar verdict costs, counted from the profile: values nulled, changed, or noted.

Each count is a sum of counts the scan already made (content classes, leap seconds,
integers beyond 2**53): a zero_padded string parsed as a number loses its leading zeros,
a float_out_of_range one becomes ±inf or 0, so each of them is a change. Where the scan
made no such count, the effect says so (exact=False) instead of guessing.
"""

from __future__ import annotations

from driftline.core.lattice import STRING, DType
from driftline.core.stats import class_sample, type_sample
from driftline.observe.records import is_int_key
from driftline.observe.textclass import MAX_DECIMAL_DIGITS
from driftline.recommendation.options import RecommendOptions, zone_is_fixed
from driftline.recommendation.plan import Effect
from driftline.recommendation.reading import FLOAT_EXACT_DIGITS, PADDED, TIMESTAMP_CLASSES, UNIT_DIGITS, Form, Reading

_FRACTION_AT = 21  # 'YYYY-MM-DD HH:MM:SS.' plus one digit: the shortest text with a fraction


def _sides(r: Reading, classes: tuple[str, ...]) -> tuple[bool, bool]:
    """Whether the typed strings / the CSV cells hold any of classes that the target parses."""
    return (
        any(r.facts.strings.get(c) for c in classes if c in r.accept),
        any(r.facts.cells.get(c) for c in classes if c in r.accept),
    )


def _nulls(r: Reading) -> list[Effect]:
    f = r.facts
    out: list[Effect] = []
    counts = [
        (f.strings.get("null_token", 0), False) if r.tokens["string"] == "null" else (0, False),
        (f.cells.get("null_token", 0), True) if r.tokens["text"] == "null" else (0, True),
    ]
    n = sum(c for c, _ in counts)
    if n:
        examples = tuple(
            sorted({e for c, text in counts if c for e in f.samples(class_sample("null_token"), text=text)})
        )[:3]
        out.append(Effect("null", "null_token", n, examples))
    if r.empty == "null" and f.strings.get("empty"):
        out.append(Effect("null", "empty", f.strings["empty"], f.samples(class_sample("empty"), text=False)))
    if r.unparsed:
        n = sum(x.count for x in r.unparsed)
        found = {e for x in r.unparsed for e in f.samples(class_sample(x.key), text=x.source == "text")}
        out.append(Effect("null", "unparsed", n, tuple(sorted(found))[:3]))
    return out


def _as_text(r: Reading) -> list[Effect]:
    typed = [x for x in r.forms if x.source == "typed"]
    if r.target != STRING or not typed:
        return []
    n = sum(x.count for x in typed)
    return [Effect("change", "as_text", n, r.facts.samples(*(type_sample(x.key) for x in typed), text=False))]


def _parsed(r: Reading, cls: str) -> list[Form]:
    """The string and cell forms of a class that the target really parses (not nulled as unparsed)."""
    if r.target == STRING or cls not in r.accept:
        return []
    return [
        x
        for x in r.forms
        if x.key == cls and x.source != "typed" and x not in r.unparsed and x.dtype is not None and x.dtype != STRING
    ]


def _class_changes(r: Reading) -> list[Effect]:
    """Values a number cast changes whatever the target: leading zeros, and floats beyond float64."""
    out: list[Effect] = []
    for cls, cause in ((PADDED, "leading_zeros"), ("float_out_of_range", "out_of_range")):
        forms = _parsed(r, cls)
        n = sum(x.count for x in forms)
        if n:
            examples = tuple(
                sorted({e for x in forms for e in r.facts.samples(class_sample(cls), text=x.source == "text")})
            )[:3]
            out.append(Effect("change", cause, n, examples))
    return out


def _numeric(r: Reading) -> list[Effect]:
    f, t = r.facts, r.target
    if not t.name.startswith("float"):
        return []
    out: list[Effect] = []
    # JSON integer literals past uint64 arrive as decimal(N,0): integers too, counted in unsafe_ints.
    ints = [
        x
        for x in r.forms
        if x.source == "typed"
        and x.dtype is not None
        and (x.dtype.name.startswith("int") or x.dtype.name.startswith("uint") or is_int_key(x.key))
    ]
    if ints and f.typed.unsafe_ints:
        out.append(
            Effect(
                "change",
                "unsafe_int",
                f.typed.unsafe_ints,
                (),
                True,
                "integers beyond ±9007199254740991 (RFC 7493 §2.2): float64 holds only some "
                "of them exactly (IEEE 754 binary64 has a 53-bit significand)",
            )
        )
    wide = any(
        x.source == "typed"
        and x.dtype is not None
        and x.dtype.name == "decimal"
        and x not in ints
        and (x.dtype.precision or 0) > FLOAT_EXACT_DIGITS
        for x in r.forms
    )
    typed_str, cells = _sides(r, ("integer", "decimal", PADDED))
    wide = (
        wide
        or typed_str
        and f.typed.int_digits + f.typed.frac_digits > FLOAT_EXACT_DIGITS
        or cells
        and f.text.int_digits + f.text.frac_digits > FLOAT_EXACT_DIGITS
    )
    # A float string is a digit string too long for decimal256 (77 digits and more) or a float
    # literal; the scan does not count its digits, but one that long may hold more than float64.
    typed_str, cells = _sides(r, ("float",))
    wide = (
        wide
        or typed_str
        and f.typed.max_length > MAX_DECIMAL_DIGITS
        or cells
        and f.text.max_length > MAX_DECIMAL_DIGITS
    )
    if wide:
        out.append(
            Effect(
                "change",
                "rounded",
                0,
                (),
                False,
                "numbers with more than 15 significant digits may round as float64; the scan does not count them",
            )
        )
    return out


def _temporal(r: Reading, opts: RecommendOptions) -> tuple[list[Effect], int]:
    f, t = r.facts, r.target
    if t.name != "timestamp":
        return [], 0
    out: list[Effect] = []
    typed_str, cells = _sides(r, TIMESTAMP_CLASSES)
    sides = [st for st, on in ((f.typed, typed_str), (f.text, cells)) if on]
    leap = sum(st.leap_seconds for st in sides)
    if leap:
        out.append(
            Effect(
                "change",
                "leap_second",
                leap,
                (),
                True,
                "RFC 3339 §5.7 allows second 60; pyarrow, Python and the date-time format "
                "checker reject it, so it becomes :59 of the same minute",
            )
        )
    lower = sum(st.lowercase_rfc3339 for st in sides)
    if lower:
        out.append(Effect("note", "lowercase", lower, f.samples(class_sample("timestamp_rfc3339"))))
    assert t.unit is not None
    if any(st.max_length >= _FRACTION_AT + UNIT_DIGITS[t.unit] for st in sides):
        out.append(
            Effect(
                "change",
                "truncated",
                0,
                (),
                False,
                f"strings may carry more fraction digits than unit {t.unit!r} holds; the scan does "
                "not count them (the longest string leaves room for it)",
            )
        )
    assumed = 0
    if t.tz:
        local = [
            x
            for x in r.forms
            if x.dtype is not None
            and x.dtype.name in ("date32", "date64", "timestamp")
            and not x.dtype.tz
            and (x.source == "typed" or x.key in r.accept)
        ]
        assumed = sum(x.count for x in local)
        if assumed:
            keys = [(type_sample if x.source == "typed" else class_sample)(x.key) for x in local]
            fixed = zone_is_fixed(opts.timestamp_zone)
            out.append(
                Effect(
                    "note",
                    "assumed_zone",
                    assumed,
                    f.samples(*keys),
                    fixed,
                    f"local times are read as {opts.timestamp_zone} (timestamp_zone)"
                    + (
                        ""
                        if fixed
                        else "; times in a daylight-saving gap or overlap move to "
                        "the earlier instant, which the scan does not count"
                    ),
                )
            )
    return out, assumed


def scalar_effects(r: Reading, opts: RecommendOptions) -> tuple[Effect, ...]:
    """Every effect of a scalar verdict, in a fixed order: nulls, then changes, then notes."""
    temporal, _ = _temporal(r, opts)
    effects = [*_nulls(r), *_as_text(r), *_class_changes(r), *_numeric(r), *temporal]
    order = {"null": 0, "change": 1, "note": 2}
    return tuple(sorted(effects, key=lambda e: order[e.kind]))


def target_nullable(t: DType, nullable: bool, effects: tuple[Effect, ...]) -> DType:
    """The target with its nullability: nulls seen, absent values, or nulls the rule makes."""
    makes_nulls = any(e.kind == "null" and (e.count or not e.exact) for e in effects)
    return t.with_nullable(nullable or makes_nulls or t.name == "null")
