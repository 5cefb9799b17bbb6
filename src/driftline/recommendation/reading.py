"""Reading a scalar field: the type each observed form asks for, the one target, and the
fate of every content class, from the profile's counts alone.

A form is a typed kind ('int64', 'timestamp[us, UTC]', ...), a string content class
(JSON, Parquet strings) or a CSV cell class. Each asks for a type; the types of one
family join in the lattice. When families disagree, the family holding most values is
the core, and the rest may become null only if they are strings within
``max_null_share``; otherwise every value is kept as text.

The same definitions drive apply.py, which casts real data: the class a value belongs to
is the grammar the cast checks, so predicted counts and casting counts must agree.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from driftline.core.lattice import BOOL, DATE32, FLOAT64, INT64, STRING, DType, family, join_all, parse_key
from driftline.core.words import count, plural
from driftline.recommendation.facts import Facts
from driftline.recommendation.options import RecommendOptions

Source = Literal["typed", "string", "text"]
NUMBER_CLASSES = ("integer", "decimal", "float", "float_out_of_range")
FLOAT_CLASSES = ("float", "float_out_of_range")
PADDED = "zero_padded"  # digits with leading zeros: a string unless leading_zeros = "parse"
TIMESTAMP_CLASSES = ("timestamp_rfc3339", "timestamp_offset", "timestamp_local")
TEMPORAL_CLASSES = ("date", *TIMESTAMP_CLASSES)
NULLISH = ("empty", "null_token")
NESTED = frozenset({"struct", "list", "map", "union"})
FLOAT_EXACT_DIGITS = 15  # DBL_DIG: decimals of up to 15 significant digits survive float64
UNIT_DIGITS = {"s": 0, "ms": 3, "us": 6, "ns": 9}
_GROUP_ORDER = ("numeric", "time", "bool", "string", "binary", "duration")
FORMAT_NAMES = {
    "timestamp_rfc3339": "RFC 3339 date-time",
    "timestamp_offset": "date-time with an offset, not RFC 3339 (space, +hhmm or +hh)",
    "timestamp_local": "local date-time (no offset)",
    "date": "date (YYYY-MM-DD)",
}


@dataclass(frozen=True, slots=True)
class Form:
    """One way values arrive: source, the kind or class, how many, and the type it asks for."""

    source: Source
    key: str
    count: int
    dtype: DType | None  # None: a null in all but spelling (blank, token)


@dataclass(frozen=True, slots=True)
class Reading:
    """The scalar verdict: target, the forms it parses or keeps, and what it loses."""

    facts: Facts
    target: DType
    forms: tuple[Form, ...]
    accept: frozenset[str]  # classes parsed into a non-string target
    tokens: dict[str, str]  # source -> 'null' | 'keep' for null tokens
    empty: str  # typed empty strings: 'null' | 'keep'
    unparsed: tuple[Form, ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def parsed(self) -> int:
        """String and text values parsed into a non-string target."""
        if self.target == STRING:
            return 0
        return sum(f.count for f in self.forms if f.source != "typed" and f.key in self.accept)

    @property
    def typed_kinds(self) -> tuple[str, ...]:
        return tuple(f.key for f in self.forms if f.source == "typed" and f.count)


def _group(t: DType) -> str:
    fam = family(t)
    return "time" if fam in ("local-time", "instant") else fam


def _digits(f: Facts) -> tuple[int, int]:
    return max(f.typed.int_digits, f.text.int_digits), max(f.typed.frac_digits, f.text.frac_digits)


def _has_real(f: Facts, wanted: str, opts: RecommendOptions) -> bool:
    """Does the field hold real values of a group (typed, or CSV cells the scan typed, or
    zero_padded cells that leading_zeros = "parse" reads as numbers)?"""
    for key in f.kinds:
        if key != "string" and key not in NESTED and _group(parse_key(key)) == wanted:
            return True
    padded = (PADDED,) if opts.leading_zeros == "parse" else ()
    classes = {"numeric": (*NUMBER_CLASSES, *padded), "bool": ("boolean",)}[wanted]
    return any(f.cells.get(c) for c in classes)


def _parses_padded(f: Facts, opts: RecommendOptions) -> bool:
    """Whether zero_padded strings are read as numbers (leading_zeros = "parse"), and there are some."""
    return opts.leading_zeros == "parse" and bool(f.strings.get(PADDED) or f.cells.get(PADDED))


def _number_type(f: Facts, opts: RecommendOptions, floats: bool) -> tuple[DType, str]:
    """The type of integer/decimal (and parsed zero_padded) strings, and why."""
    i, s = _digits(f)
    p = max(i + s, 1)
    padded = _parses_padded(f, opts)
    # Integer strings have no point, so digits after one are a decimal's or a zero_padded one's.
    has_decimal = bool(f.strings.get("decimal") or f.cells.get("decimal")) or padded and s > 0
    if not has_decimal and not (padded and i > 18):
        return INT64, ""
    if not has_decimal and not floats and p <= 76:
        # zero_padded strings of 19 digits and more: their zeros count, so int64 may not hold them.
        return DType(
            "decimal", precision=p, scale=0
        ), f"decimal({p},0): zero_padded strings of {i} digits may not fit int64"
    dec = DType("decimal", precision=p, scale=s)
    if floats:
        why = "float64: the field also holds floats, whose decimal digits the scan does not count"
        return FLOAT64, why if opts.prefer_decimal else ""
    if p > 76:
        return FLOAT64, f"float64: {p} digits are more than decimal256 holds"
    if opts.prefer_decimal:
        return dec, f"{dec.key()}: prefer_decimal, sized from the digits seen ({i} before, {s} after the point)"
    if p <= FLOAT_EXACT_DIGITS:
        return FLOAT64, f"float64: every decimal string has at most {p} digits, which float64 holds exactly"
    return dec, f"{dec.key()}: strings with {p} digits would round as float64 (15 significant digits)"


def _forms(f: Facts, opts: RecommendOptions) -> tuple[list[Form], list[str]]:
    notes: list[str] = []
    typed = [Form("typed", k, n, parse_key(k)) for k, n in f.kinds.items() if k != "string" and n]
    floats = any(t.dtype is not None and t.dtype.name.startswith("float") for t in typed) or any(
        f.strings.get(c) or f.cells.get(c) for c in FLOAT_CLASSES
    )
    number, why = _number_type(f, opts, floats)
    if why:
        notes.append(why)
    zoned = DType("timestamp", unit=opts.timestamp_unit, tz=opts.timestamp_zone)
    local = DType("timestamp", unit=opts.timestamp_unit)
    by_class: dict[str, DType | None] = {
        "boolean": BOOL,
        "integer": number,
        "decimal": number,
        "float": FLOAT64,
        "float_out_of_range": FLOAT64,
        PADDED: number if opts.leading_zeros == "parse" else STRING,
        "date": DATE32,
        "timestamp_rfc3339": zoned,
        "timestamp_offset": zoned,
        "timestamp_local": local,
        "text": STRING,
        "empty": None,
        "null_token": None if opts.null_tokens != "never" else STRING,
    }
    quoted_numbers = opts.parse_strings == "always" or _has_real(f, "numeric", opts)
    quoted_bools = opts.parse_strings == "always" or _has_real(f, "bool", opts)
    out = list(typed)
    for source, classes in (("string", f.strings), ("text", f.cells)):
        for cls, n in classes.items():
            if not n or source == "text" and cls == "empty":
                continue
            t = by_class[cls]
            if source == "string" and (
                (cls in NUMBER_CLASSES or cls == PADDED) and not quoted_numbers or cls == "boolean" and not quoted_bools
            ):
                t = STRING
            out.append(Form(source, cls, n, t))  # type: ignore[arg-type]
    kept = (
        any(f.strings.get(c) for c in NUMBER_CLASSES)
        and not quoted_numbers
        or bool(f.strings.get("boolean"))
        and not quoted_bools
    )
    if kept:
        notes.append(
            "strings that read as numbers or booleans are kept: the field holds no real ones "
            '(parse_strings = "always" parses them)'
        )
    return out, notes


def _zeros_note(n: int) -> str:
    values = "1 value has" if n == 1 else f"{n:,} values have"
    return (
        f"{values} leading zeros (zero_padded, like ZIP or FIPS codes) that a number would drop, so "
        'the field stays text (leading_zeros = "parse" reads them as numbers)'
    )


def _join_time(types: list[DType], opts: RecommendOptions) -> DType:
    """Join dates and timestamps; local ones meet zoned ones in the zone option."""
    units = [t.unit for t in types if t.name == "timestamp" and t.unit]
    unit = max(units, key=list(UNIT_DIGITS).index) if units else opts.timestamp_unit
    if any(t.name == "timestamp" and t.tz for t in types):
        return DType("timestamp", unit=unit, tz=opts.timestamp_zone)
    joined = join_all(types)
    return DType("timestamp", unit=unit) if joined.name == "timestamp" else joined


def _target(forms: list[Form], f: Facts, opts: RecommendOptions) -> tuple[DType, list[Form], list[str]]:
    """The target type and the string forms that become null for not parsing."""
    groups: dict[str, list[Form]] = {}
    for form in forms:
        if form.dtype is not None:
            groups.setdefault(_group(form.dtype), []).append(form)
    if not groups:
        # Only blanks and tokens: typed ones are strings still; CSV ones were nulls all along.
        strings = any(x.source == "string" for x in forms)
        return (STRING if strings else DType("null")), [], []
    counts = {g: sum(x.count for x in fs) for g, fs in groups.items()}
    core = max(groups, key=lambda g: (counts[g], -_GROUP_ORDER.index(g) if g in _GROUP_ORDER else -99))
    rest = [x for g, fs in groups.items() if g != core for x in fs]
    notes: list[str] = []
    if rest and core != "string":
        lost = sum(x.count for x in rest)
        share = lost / f.values if f.values else 1.0
        if all(x.source != "typed" for x in rest) and share <= opts.max_null_share:
            notes.append(
                f"{count(lost, 'string')} that {plural(lost, 'is', 'are')} not {core} "
                f"{plural(lost, 'becomes', 'become')} null: {share:.1%} of the values, "
                f"within max_null_share = {opts.max_null_share:g}"
            )
        elif all(x.key == PADDED for x in rest):
            notes.append(_zeros_note(lost))
            return STRING, [], notes
        else:
            why = (
                "typed values of other kinds"
                if any(x.source == "typed" for x in rest)
                else f"{count(lost, 'string')} ({share:.1%}) that {plural(lost, 'does', 'do')} not parse, "
                f"above max_null_share = {opts.max_null_share:g}"
            )
            notes.append(f"kept as text: {' and '.join(sorted(groups))} values meet in this field, with {why}")
            return STRING, [], notes
    elif rest:
        notes.append(f"kept as text: most values ({counts['string']:,}) are text")
        return STRING, [], notes
    types = [x.dtype for x in groups[core] if x.dtype is not None]
    return (_join_time(types, opts) if core == "time" else join_all(types)), rest, notes


def _accept(target: DType, forms: list[Form]) -> frozenset[str]:
    if target == STRING or target.name == "null":
        return frozenset()
    g = _group(target)
    return frozenset(x.key for x in forms if x.source != "typed" and x.dtype is not None and _group(x.dtype) == g)


def read_scalar(f: Facts, opts: RecommendOptions) -> Reading:
    """The scalar verdict for one field.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("v\\n1.5\\nn/a\\n2\\n")
    >>> from driftline.recommendation.facts import gather
    >>> r = read_scalar(gather(driftline.scan(d))["v"], RecommendOptions())
    >>> r.target.key(), sorted(r.accept), r.tokens["text"]
    ('float64', ['decimal', 'integer'], 'null')
    """
    forms, notes = _forms(f, opts)
    target, unparsed, why = _target(forms, f, opts)
    notes += why
    padded = f.strings.get(PADDED, 0) + f.cells.get(PADDED, 0)
    if target == STRING and padded and opts.leading_zeros == "keep" and not any("zero_padded" in n for n in notes):
        notes.append(_zeros_note(padded))
    is_string = target == STRING
    tokens = {
        "string": "null" if opts.null_tokens == "always" or (opts.null_tokens == "parse" and not is_string) else "keep",
        "text": "keep" if opts.null_tokens == "never" else "null",
    }
    return Reading(
        facts=f,
        target=target,
        forms=tuple(forms),
        accept=_accept(target, forms),
        tokens=tokens,
        empty="keep" if is_string else "null",
        unparsed=tuple(unparsed),
        notes=tuple(notes),
    )


def timestamp_formats(r: Reading) -> dict[str, int]:
    """Detected timestamp formats, by name, with how many values use each."""
    out: dict[str, int] = {}
    for x in r.forms:
        if x.source != "typed" and x.key in FORMAT_NAMES and x.key in r.accept:
            out[FORMAT_NAMES[x.key]] = out.get(FORMAT_NAMES[x.key], 0) + x.count
    for x in r.forms:
        if x.source == "typed" and x.dtype is not None and _group(x.dtype) == "time":
            out[f"typed {x.key}"] = x.count
    return out
