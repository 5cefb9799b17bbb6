"""The type lattice: driftline's type values, kept as data, and the one widening ``join``.

``from_arrow`` folds Arrow's many spellings of a type (large/view strings, decimal widths,
dictionaries ...) into one :class:`DType`. ``join`` widens within a family; across families
types meet in a ``union`` with one member per family, so ``join`` stays commutative and
associative by construction.

>>> join(from_arrow(pa.int32()), from_arrow(pa.uint32())).key()
'int64'
>>> join(INT64, STRING).key()
'union<int64 | string>'
"""

from __future__ import annotations

import dataclasses
import functools
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import NamedTuple, TypeVar

import pyarrow as pa

NAMES = (
    "null",
    "unknown",
    "bool",
    "int8",
    "int16",
    "int32",
    "int64",
    "uint8",
    "uint16",
    "uint32",
    "uint64",
    "float16",
    "float32",
    "float64",
    "decimal",
    "string",
    "binary",
    "date32",
    "date64",
    "time32",
    "time64",
    "timestamp",
    "duration",
    "list",
    "struct",
    "map",
    "union",
)

_UNITS = ("s", "ms", "us", "ns")
_UNITS_OF = {"time32": ("s", "ms"), "time64": ("us", "ns"), "timestamp": _UNITS, "duration": _UNITS}
_NESTED = frozenset({"list", "struct", "map", "union"})
# Which optional DType attributes each name takes; the ones in _REQUIRED must then be set.
_OPTIONAL = ("unit", "tz", "precision", "scale", "item", "fields", "members")
_REQUIRED = frozenset({"unit", "precision", "scale", "item"})
_PARAMS: dict[str, frozenset[str]] = {
    **dict.fromkeys(NAMES, frozenset()),
    **dict.fromkeys(_UNITS_OF, frozenset({"unit"})),
    "timestamp": frozenset({"unit", "tz"}),
    "decimal": frozenset({"precision", "scale"}),
    "list": frozenset({"item"}),
    "struct": frozenset({"fields"}),
    "map": frozenset({"fields"}),
    "union": frozenset({"members"}),
}
# Characters that would break parse_key if left bare in a struct field name.
_SPECIAL = frozenset(":,<> |`'\"")
_MAX_DECIMAL = 76  # decimal256; wider decimals fall back to float64

_FAMILY = {
    "null": "null",
    "unknown": "unknown",
    "bool": "bool",
    "string": "string",
    "binary": "binary",
    "date32": "local-time",
    "date64": "local-time",
    "timestamp": "local-time",
    "time32": "time",
    "time64": "time",
    "duration": "duration",
    "list": "list",
    "struct": "struct",
    "map": "map",
    "union": "union",
    **dict.fromkeys(
        (
            "int8",
            "int16",
            "int32",
            "int64",
            "uint8",
            "uint16",
            "uint32",
            "uint64",
            "float16",
            "float32",
            "float64",
            "decimal",
        ),
        "numeric",
    ),
}


@dataclass(frozen=True, slots=True)
class DType:
    """One observed type. Construction normalises: struct fields and union members
    are sorted, union member nullability moves onto the union, null is always nullable."""

    name: str
    unit: str | None = None
    tz: str | None = None
    precision: int | None = None
    scale: int | None = None
    item: DType | None = None
    fields: tuple[tuple[str, DType], ...] = ()
    members: tuple[DType, ...] = ()
    nullable: bool = False

    def __post_init__(self) -> None:
        params = _PARAMS.get(self.name)
        if params is None:
            raise ValueError(f"unknown type name {self.name!r}; expected one of {NAMES}")
        for attr in _OPTIONAL:
            value = getattr(self, attr)
            present = value is not None and value != ()
            if present and attr not in params or not present and attr in params & _REQUIRED:
                raise ValueError(f"{self.name} cannot have {attr}={value!r}")
        if (
            self.unit is not None
            and self.unit not in _UNITS_OF[self.name]
            or self.tz is not None
            and (not self.tz or "]" in self.tz)
            or self.precision is not None
            and self.precision < 1
        ):
            raise ValueError(
                f"bad parameters for {self.name}: unit={self.unit!r}, tz={self.tz!r}, precision={self.precision!r}"
            )
        if self.name == "null":
            object.__setattr__(self, "nullable", True)
        elif self.name == "struct":
            fields = tuple(sorted(self.fields, key=lambda f: f[0]))
            if len({n for n, _ in fields}) != len(fields):
                raise ValueError(f"duplicate struct field names in {[n for n, _ in fields]}")
            object.__setattr__(self, "fields", fields)
        elif self.name == "map" and [n for n, _ in self.fields] != ["key", "value"]:
            raise ValueError("map fields must be (('key', K), ('value', V))")
        elif self.name == "union":
            fams = [family(m) for m in self.members]
            if len(set(fams)) != len(fams) or len(fams) < 2 or {"null", "unknown", "union"} & set(fams):
                raise ValueError(
                    "union members must be two or more types of distinct "
                    f"families, none null, unknown or union; got {fams}"
                )
            # Member nullability lives on the union, so equal unions compare equal.
            nullable = self.nullable or any(m.nullable for m in self.members)
            members = sorted((m.with_nullable(False) for m in self.members), key=DType.key)
            object.__setattr__(self, "members", tuple(members))
            object.__setattr__(self, "nullable", nullable)

    def key(self) -> str:
        """Canonical text of the type, ignoring nullability at every level."""
        name = self.name
        if name == "decimal":
            return f"decimal({self.precision},{self.scale})"
        if self.unit is not None:
            return f"{name}[{self.unit}, {self.tz}]" if self.tz else f"{name}[{self.unit}]"
        if name == "list":
            assert self.item is not None
            return f"list<{self.item.key()}>"
        if name == "struct":
            return "struct<" + ", ".join(f"{_quote(n)}: {c.key()}" for n, c in self.fields) + ">"
        if name == "map":
            return f"map<{self.fields[0][1].key()}, {self.fields[1][1].key()}>"
        if name == "union":
            return "union<" + " | ".join(m.key() for m in self.members) + ">"
        return name

    def shallow_key(self) -> str:
        """Like key(), but only the kind ('list', 'struct', 'map', 'union') for nested types."""
        return self.name if self.name in _NESTED else self.key()

    def with_nullable(self, flag: bool = True) -> DType:
        if self.nullable == flag or self.name == "null":
            return self
        return dataclasses.replace(self, nullable=flag)


def _quote(name: str) -> str:
    if name and not any(c in _SPECIAL or c.isspace() or not c.isprintable() for c in name):
        return name
    return "`" + name.replace("`", "``") + "`"


NULL = DType("null", nullable=True)
UNKNOWN = DType("unknown")
BOOL = DType("bool")
INT64 = DType("int64")
FLOAT64 = DType("float64")
STRING = DType("string")
BINARY = DType("binary")
DATE32 = DType("date32")


def family(t: DType) -> str:
    """The family of a type: join coerces within a family and makes unions across them."""
    if t.name == "timestamp" and t.tz is not None:
        return "instant"
    return _FAMILY[t.name]


# Join tables. Each family has one join; join() routes members to them.

# Families whose members form a chain: the join is whichever comes later.
_CHAINS: dict[str, tuple[str, ...]] = {
    "bool": ("bool",),
    "string": ("string",),
    "binary": ("binary",),
    # A date is midnight of that day, which every local timestamp holds exactly.
    "local-time": ("date32", "date64", *(f"timestamp[{u}]" for u in _UNITS)),
    "time": ("time32[s]", "time32[ms]", "time64[us]", "time64[ns]"),
    "duration": tuple(f"duration[{u}]" for u in _UNITS),
}
_RANK = {k: i for chain in _CHAINS.values() for i, k in enumerate(chain)}

_SIGNED = 1 << 10  # 'ubits' once a signed integer took part: no unsigned type fits any more


class _Num(NamedTuple):
    """A numeric type as features that join by max; _canon turns them back into a type.

    uintN counts as int(2N) on the signed axis: uint8 joins int8 as int16, so it must also
    widen floats and decimals like int16 does, or the join would depend on evaluation order.
    """

    sbits: int = 0  # signed-equivalent bits the integer part needs (128: > int64)
    ubits: int = 0  # unsigned bits, or _SIGNED
    digits: int | None = None  # decimal integer digits, precision - scale
    scale: int | None = None
    fbits: int = 0  # float width


_NUM_FEATURES = {
    "int8": _Num(8, _SIGNED),
    "int16": _Num(16, _SIGNED),
    "int32": _Num(32, _SIGNED),
    "int64": _Num(64, _SIGNED),
    "uint8": _Num(16, 8),
    "uint16": _Num(32, 16),
    "uint32": _Num(64, 32),
    "uint64": _Num(128, 64),
    "float16": _Num(fbits=16),
    "float32": _Num(fbits=32),
    "float64": _Num(fbits=64),
}
_INT_DIGITS = {8: 3, 16: 5, 32: 10, 64: 19, 128: 20}  # decimal digits of the signed range
# Narrowest float holding every value of the signed range exactly (int64 accepted as lossy).
_FLOAT_FOR_INT = {0: 16, 8: 16, 16: 32, 32: 64, 64: 64, 128: 64}
_FLOAT_OF_BITS = {16: DType("float16"), 32: DType("float32"), 64: FLOAT64}


def _features(t: DType) -> _Num:
    if t.name == "decimal":
        assert t.precision is not None and t.scale is not None
        return _Num(digits=t.precision - t.scale, scale=t.scale)
    return _NUM_FEATURES[t.name]


def _canon(n: _Num) -> DType:
    if n.fbits:  # any float present: decimals go to float64, ints to a float that holds them
        return FLOAT64 if n.digits is not None else _FLOAT_OF_BITS[max(n.fbits, _FLOAT_FOR_INT[n.sbits])]
    if n.digits is not None:
        assert n.scale is not None
        digits = max(n.digits, _INT_DIGITS.get(n.sbits, n.digits))
        scale = max(n.scale, 0) if n.sbits else n.scale  # negative scale would round ints
        if digits + scale > _MAX_DECIMAL:
            return FLOAT64
        return DType("decimal", precision=digits + scale, scale=scale)
    if n.ubits != _SIGNED:
        return DType(f"uint{n.ubits}")
    # int64 + uint64 needs 65 bits: decimal(20,0) holds both ranges, int64 would not.
    return DType(f"int{n.sbits}") if n.sbits <= 64 else DType("decimal", precision=20, scale=0)


def _join_numeric(a: DType, b: DType) -> DType:
    # Features join by max (None lowest); _canon keeps whatever a later join needs, which
    # keeps this associative (the tests walk every triple of a numeric sample).
    return _canon(
        _Num._make(
            y if x is None else x if y is None else max(x, y) for x, y in zip(_features(a), _features(b), strict=True)
        )
    )


def _join_chain(a: DType, b: DType) -> DType:
    return a if _RANK[a.key()] >= _RANK[b.key()] else b


def _join_instant(a: DType, b: DType) -> DType:
    # Two zones name the same instants; UTC is the neutral place to meet.
    assert a.unit is not None and b.unit is not None
    unit = max(a.unit, b.unit, key=_UNITS.index)
    return DType("timestamp", unit=unit, tz=a.tz if a.tz == b.tz else "UTC")


def _join_list(a: DType, b: DType) -> DType:
    assert a.item is not None and b.item is not None
    return DType("list", item=join(a.item, b.item))


def _join_struct(a: DType, b: DType) -> DType:
    # A field missing on one side is a null there, so it comes out nullable.
    fa, fb = dict(a.fields), dict(b.fields)
    return DType(
        "struct", fields=tuple((n, join(fa.get(n, NULL), fb.get(n, NULL))) for n in sorted(fa.keys() | fb.keys()))
    )


def _join_map(a: DType, b: DType) -> DType:
    (_, ka), (_, va) = a.fields
    (_, kb), (_, vb) = b.fields
    return DType("map", fields=(("key", join(ka, kb).with_nullable(False)), ("value", join(va, vb))))


_FAMILY_JOIN: dict[str, Callable[[DType, DType], DType]] = {
    **dict.fromkeys(_CHAINS, _join_chain),
    "numeric": _join_numeric,
    "instant": _join_instant,
    "list": _join_list,
    "struct": _join_struct,
    "map": _join_map,
}


def join(a: DType, b: DType) -> DType:
    """The narrowest type holding both; a union when they are of different families.

    >>> join(DType('timestamp', unit='s'), DType('timestamp', unit='us')).key()
    'timestamp[us]'
    """
    if a == b:  # the common case: the same type batch after batch
        return a
    nullable = a.nullable or b.nullable  # null is always nullable, so this covers it
    if a.name == "unknown":
        return b.with_nullable(nullable)
    if b.name == "unknown":
        return a.with_nullable(nullable)
    if a.name == "null":
        return b.with_nullable(True)
    if b.name == "null":
        return a.with_nullable(True)
    parts: dict[str, DType] = {}
    for m in (*(a.members or (a,)), *(b.members or (b,))):
        f = family(m)
        parts[f] = _FAMILY_JOIN[f](parts[f], m) if f in parts else m
    if len(parts) == 1:
        return next(iter(parts.values())).with_nullable(nullable)
    return DType("union", members=tuple(parts.values()), nullable=nullable)


def join_all(types: Iterable[DType]) -> DType:
    """Fold join over types, starting from UNKNOWN (so an empty input gives UNKNOWN)."""
    return functools.reduce(join, types, UNKNOWN)


def is_widening(old: DType, new: DType) -> bool:
    """True when adding new to old widens old without conflict (no union results).

    Nullability is part of the order: a column that starts to hold nulls widens too.
    """
    joined = join(old, new)
    return joined != old and joined.name != "union"


_DEC = ("decimal(5,2)", "decimal(10,4)", "decimal(38,10)", "decimal(38,0)")
_SHORT = (
    "pyarrow sizes an integer one digit short (int64 + decimal(5,2) -> decimal(20,2), "
    "which cannot hold 10**17); we count int8 3, int16 5, int32 10, int64 19, uint64 20"
)
_UINT_AS_INT = (
    "pyarrow counts one digit short, and uintN counts as int(2N) (uint8 5 digits, "
    "uint16 10, uint32 19): uint8 joins int8 as int16, so ints joined first or "
    "last must give the same decimal"
)
# (left keys, right keys, why): every left x right pair differs for that reason.
_DIFFERENT = (
    (
        ("int8", "int16", "int32", "int64"),
        ("uint64",),
        "pyarrow gives int64, which loses uint64 values over 2**63-1; decimal(20,0) holds both",
    ),
    (
        ("uint8",),
        ("float16",),
        "pyarrow gives float16; uint8 joins int8 as int16, so it "
        "widens floats as int16 does (float32) to stay associative",
    ),
    (("uint16",), ("float16", "float32"), "pyarrow gives float32; uint16 widens floats as int32 does: float64"),
    (_DEC, ("float16", "float32"), "pyarrow keeps the narrow float (3 or 7 significant digits); we give float64"),
    (("int16", "int32", "int64", "uint64"), ("decimal(5,2)",), _SHORT),
    (("int32", "int64", "uint64"), ("decimal(10,4)",), _SHORT),
    (("uint8", "uint16", "uint32"), ("decimal(5,2)",), _UINT_AS_INT),
    (("uint16", "uint32"), ("decimal(10,4)",), _UINT_AS_INT),
    (("string",), ("binary",), "pyarrow reinterprets text as bytes; we keep a union so a cast rule decides"),
    (
        ("date32", "date64"),
        tuple(f"timestamp[{u}]" for u in _UNITS),
        "pyarrow raises; every local timestamp holds a date (its midnight) exactly",
    ),
)
# (key_a, key_b) -> why join differs from pyarrow 26 unify_schemas(promote_options="permissive")
# on the pairs the oracle test walks; either order of a pair is meant.
DELIBERATE_DIFFERENCES: dict[tuple[str, str], str] = {
    (a, b): why for lefts, rights, why in _DIFFERENT for a in lefts for b in rights
}

# Arrow conversion.

_TO_ARROW_SIMPLE: dict[str, pa.DataType] = {
    "null": pa.null(),
    "unknown": pa.null(),
    "bool": pa.bool_(),
    "int8": pa.int8(),
    "int16": pa.int16(),
    "int32": pa.int32(),
    "int64": pa.int64(),
    "uint8": pa.uint8(),
    "uint16": pa.uint16(),
    "uint32": pa.uint32(),
    "uint64": pa.uint64(),
    "float16": pa.float16(),
    "float32": pa.float32(),
    "float64": pa.float64(),
    "string": pa.string(),
    "binary": pa.binary(),
    "date32": pa.date32(),
    "date64": pa.date64(),
}
_FROM_ARROW_SIMPLE: dict[pa.DataType, DType] = {
    **{v: DType(k) for k, v in _TO_ARROW_SIMPLE.items() if k not in ("null", "unknown")},
    pa.null(): NULL,
    pa.large_string(): STRING,
    pa.string_view(): STRING,
    pa.large_binary(): BINARY,
    pa.binary_view(): BINARY,
}
_UNIT_TYPES = {"time32": pa.time32, "time64": pa.time64, "duration": pa.duration}

_types = pa.types
# Ordered: the first matching predicate converts; encodings unwrap to their logical type.
_FROM_ARROW: tuple[tuple[Callable[[pa.DataType], bool], Callable[[pa.DataType], DType]], ...] = (
    # Canonical bool8 is a boolean kept in int8 (0 false, anything else true); other
    # extension types (json, uuid, tensors, opaque, user types) are their storage type.
    (lambda t: isinstance(t, pa.Bool8Type), lambda t: BOOL),
    (lambda t: isinstance(t, pa.BaseExtensionType), lambda t: from_arrow(t.storage_type)),
    (_types.is_dictionary, lambda t: from_arrow(t.value_type)),
    (_types.is_run_end_encoded, lambda t: from_arrow(t.value_type)),
    (_types.is_fixed_size_binary, lambda t: BINARY),
    (_types.is_decimal, lambda t: DType("decimal", precision=t.precision, scale=t.scale)),
    (_types.is_timestamp, lambda t: DType("timestamp", unit=t.unit, tz=t.tz or None)),
    (_types.is_time32, lambda t: DType("time32", unit=t.unit)),
    (_types.is_time64, lambda t: DType("time64", unit=t.unit)),
    (_types.is_duration, lambda t: DType("duration", unit=t.unit)),
    (
        _types.is_map,
        lambda t: DType("map", fields=(("key", from_arrow(t.key_type)), ("value", _from_field(t.item_field)))),
    ),
    (
        lambda t: (
            _types.is_list(t)
            or _types.is_large_list(t)
            or _types.is_fixed_size_list(t)
            or _types.is_list_view(t)
            or _types.is_large_list_view(t)
        ),
        lambda t: DType("list", item=_from_field(t.value_field)),
    ),
    (_types.is_struct, lambda t: DType("struct", fields=tuple((f.name, _from_field(f)) for f in t))),
    # An Arrow union is a type of its own; fold its children through the lattice.
    (_types.is_union, lambda t: join_all(_from_field(f) for f in t)),
)


def _from_field(f: pa.Field) -> DType:
    return from_arrow(f.type).with_nullable(f.nullable)


def from_arrow(t: pa.DataType) -> DType:
    """Normalise an Arrow type; encodings and physical widths collapse to one logical type.

    >>> from_arrow(pa.dictionary(pa.int32(), pa.large_string())).key()
    'string'
    """
    simple = _FROM_ARROW_SIMPLE.get(t)
    if simple is not None:
        return simple
    for matches, convert in _FROM_ARROW:
        if matches(t):
            return convert(t)
    why = " (intervals are not supported)" if _types.is_interval(t) else ""
    raise ValueError(f"Arrow type {t} has no driftline type{why}")


def unsupported_reason(t: pa.DataType) -> str | None:
    """Why an Arrow type, or a type inside it, has no driftline type; None when it has one.

    >>> unsupported_reason(pa.struct([("i", pa.month_day_nano_interval())]))
    'Arrow type month_day_nano_interval has no driftline type (intervals are not supported)'
    """
    try:
        from_arrow(t)
    except ValueError as exc:
        return str(exc)
    return None


def _field(name: str, t: DType) -> pa.Field:
    return pa.field(name, to_arrow(t), nullable=t.nullable)


def to_arrow(t: DType) -> pa.DataType:
    """The Arrow type for t; ValueError for unions and decimals wider than 76 digits."""
    simple = _TO_ARROW_SIMPLE.get(t.name)
    if simple is not None:
        return simple
    if t.name == "decimal":
        assert t.precision is not None
        if t.precision > _MAX_DECIMAL:
            raise ValueError(f"{t.key()} is wider than decimal256 ({_MAX_DECIMAL} digits)")
        return (pa.decimal128 if t.precision <= 38 else pa.decimal256)(t.precision, t.scale)
    if t.name == "timestamp":
        return pa.timestamp(t.unit, tz=t.tz)
    if t.name in _UNIT_TYPES:
        return _UNIT_TYPES[t.name](t.unit)
    if t.name == "list":
        assert t.item is not None
        return pa.list_(_field("item", t.item))
    if t.name == "struct":
        return pa.struct([_field(n, c) for n, c in t.fields])
    if t.name == "map":  # Arrow map keys are never null
        (_, k), (_, v) = t.fields
        return pa.map_(pa.field("key", to_arrow(k), nullable=False), _field("value", v))
    raise ValueError(f"{t.key()} has no single Arrow type")


# parse_key: recursive descent, then a check that the text is the canonical key.

_SCALAR = re.compile(
    r"decimal\((?P<p>-?\d+),(?P<s>-?\d+)\)"
    r"|(?P<u>[a-z0-9]+)\[(?P<unit>[a-z]+)(?:, (?P<tz>[^\]]+))?\]"
    r"|(?P<name>[a-z0-9]+)"
)
_FIELD_NAME = re.compile(r"`(?P<quoted>(?:[^`]|``)*)`|(?P<bare>[^:`]+)")
_ARITY = {"list": 1, "map": 2}
T = TypeVar("T")


def parse_key(text: str) -> DType:
    """Inverse of DType.key(): every key parses back to its type (nullability not kept).

    >>> parse_key('struct<`a b`: timestamp[us, UTC]>').fields[0][0]
    'a b'
    """
    pos = 0

    def eat(s: str) -> bool:
        nonlocal pos
        found = text.startswith(s, pos)
        pos += len(s) if found else 0
        return found

    def expect(s: str) -> None:
        if not eat(s):
            raise ValueError(f"expected {s!r} at position {pos}")

    def match(pattern: re.Pattern[str], what: str) -> re.Match[str]:
        nonlocal pos
        if (m := pattern.match(text, pos)) is None:
            raise ValueError(f"expected {what} at position {pos}")
        pos = m.end()
        return m

    def field() -> tuple[str, DType]:
        f = match(_FIELD_NAME, "a field name")
        expect(": ")
        return (f["bare"] if f["quoted"] is None else f["quoted"].replace("``", "`"), parse())

    def until_close(item: Callable[[], T], sep: str) -> list[T]:
        out: list[T] = []
        while not eat(">"):
            if out:
                expect(sep)
            out.append(item())
        return out

    def parse() -> DType:
        m = match(_SCALAR, "a type")
        if m["p"] is not None:
            return DType("decimal", precision=int(m["p"]), scale=int(m["s"]))
        if m["u"] is not None:
            return DType(m["u"], unit=m["unit"], tz=m["tz"])
        if (name := m["name"]) not in _NESTED:
            return DType(name)
        expect("<")
        if name == "struct":
            return DType(name, fields=tuple(until_close(field, ", ")))
        if name == "union":
            return DType(name, members=tuple(until_close(parse, " | ")))
        parts = until_close(parse, ", ")
        if len(parts) != _ARITY[name]:
            raise ValueError(f"{name} takes {_ARITY[name]} types, got {len(parts)}")
        return (
            DType(name, item=parts[0])
            if name == "list"
            else DType(name, fields=(("key", parts[0]), ("value", parts[1])))
        )

    try:
        t = parse()
        if pos != len(text):
            raise ValueError(f"unexpected text at position {pos}")
    except ValueError as e:
        raise ValueError(f"cannot parse type key {text!r}: {e}") from None
    if t.key() != text:  # e.g. unsorted struct fields: only the canonical spelling is a key
        raise ValueError(f"type key {text!r} is not canonical; expected {t.key()!r}")
    return t


# -- shallow types ------------------------------------------------------------------------

# Observations keep only the kind of a nested value; its children are paths of their own.
_SHALLOW = {
    "list": DType("list", item=UNKNOWN),
    "struct": DType("struct"),
    "map": DType("map", fields=(("key", UNKNOWN), ("value", UNKNOWN))),
}


def shallow(t: DType) -> DType:
    """A type as observations record it: nested kinds without their children.

    >>> shallow(parse_key("list<int64>")).key(), shallow(parse_key("int64")).key()
    ('list<unknown>', 'int64')
    """
    if t.name in _SHALLOW:
        return _SHALLOW[t.name]
    if t.name == "union":
        return join_all(shallow(m) for m in t.members)
    return t.with_nullable(False)


def type_text(t: DType) -> str:
    """A shallow type as people read it: nested kinds by name ('struct', 'list').

    >>> type_text(shallow(parse_key("union<int64 | struct<a: bool>>")))
    'union<int64 | struct>'
    """
    if t.name in _SHALLOW:
        return t.name
    if t.name == "union":
        return "union<" + " | ".join(type_text(m) for m in t.members) + ">"
    return t.key()


def type_of_key(key: str) -> DType:
    """The type of an observed shallow type key ('int64', 'list', 'struct', ...)."""
    if key in _SHALLOW:
        return _SHALLOW[key]
    try:
        return parse_key(key)
    except ValueError:
        return UNKNOWN
