"""RecommendOptions: the recommender's policy, keyword-only, with safe defaults.

Every option, value by value (docs/recommend.md has the same list):

mode
    ``"permissive"`` (default): every field gets a target type and a cast rule, and the
    rule says what it would null or change. ``"strict"``: a conflict is an error;
    :func:`driftline.recommendation.recommend` raises SchemaConflictError naming every field
    whose rule would null unparseable text, change a value, guess a time zone, wrap a
    scalar, format values as text or keep them as JSON text.
prefer_decimal
    ``False`` (default): decimal-looking strings become float64 when float64 holds them
    exactly (15 significant digits or fewer, C's DBL_DIG), else decimal.
    ``True``: they become ``decimal(p,s)`` sized from the digits the scan counted,
    unless the field also holds real floats (whose digits the scan does not know).
timestamp_unit
    ``"us"`` (default), ``"s"``, ``"ms"`` or ``"ns"``: the unit of timestamps parsed from
    strings. Typed timestamps (Parquet) keep a finer unit, so none of them is truncated.
timestamp_zone
    ``"UTC"`` (default), any IANA zone name (``"Europe/Berlin"``) or a fixed offset
    (``"+02:00"``): the zone of zoned timestamp targets; and the zone assumed for
    local (offset-less) times when a field mixes them with zoned ones.
parse_strings
    ``"mixed"`` (default): strings alone in a field are parsed only to dates and
    timestamps (JSON has no such types); numbers and booleans are parsed from strings
    only where the field also holds real numbers or booleans, or CSV cells of them,
    because producers quote ids and zip codes on purpose. ``"always"``: string fields
    whose every value reads as a number or boolean are parsed too.
leading_zeros
    ``"keep"`` (default): strings of digits with leading zeros (the ``zero_padded``
    content class: ``09001``, ``0900``, ``-007``, ``00.5``) are codes, not numbers: they
    ask for string, so a field holding them stays a string field.  ``"parse"``: they
    are read as numbers like integer and decimal strings, and the rule counts every one
    of them as changed (cause ``leading_zeros``: a number keeps none of the zeros).
null_tokens
    ``"parse"`` (default): null tokens ("n/a", "null", "-", ...) become null where a
    field is parsed to a non-string type, and in CSV cells (the scan already counts
    them as nulls there); JSON strings in string fields are kept. ``"always"``: also in
    JSON string fields. ``"never"``: they are text like any other.
max_null_share
    ``0.0`` (default): a field whose strings include text that parses as nothing stays a
    string field (no value is nulled for not parsing). A value in (0, 1]: the typed
    target is chosen when at most that share of the field's values would become null.
min_field_share
    ``0.0`` (default, keep every field): fields present in fewer than this share of the
    places they could be (rows, for top-level fields) are dropped from the schema.

>>> RecommendOptions(prefer_decimal=True).prefer_decimal
True
>>> RecommendOptions.from_mapping({"mode": "strict"}).mode
'strict'
"""

from __future__ import annotations

import re
import tomllib
import zoneinfo
from collections.abc import Mapping
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any, Literal

from driftline.errors import PolicyError

Mode = Literal["permissive", "strict"]
Unit = Literal["s", "ms", "us", "ns"]

_CHOICES: dict[str, tuple[str, ...]] = {
    "mode": ("permissive", "strict"),
    "timestamp_unit": ("s", "ms", "us", "ns"),
    "parse_strings": ("mixed", "always"),
    "leading_zeros": ("keep", "parse"),
    "null_tokens": ("parse", "always", "never"),
}
_SHARES = ("max_null_share", "min_field_share")
_OFFSET = re.compile(r"[+-](?:[01][0-9]|2[0-3]):[0-5][0-9]")


def zone_is_fixed(zone: str) -> bool:
    """True for UTC and fixed offsets: local times then map to instants one to one.

    >>> zone_is_fixed("UTC"), zone_is_fixed("+02:00"), zone_is_fixed("Europe/Berlin")
    (True, True, False)
    """
    return zone in ("UTC", "Etc/UTC", "Z") or bool(_OFFSET.fullmatch(zone))


def _check_zone(zone: object, where: str) -> None:
    if not isinstance(zone, str) or not zone:
        raise PolicyError(f"{where}timestamp_zone must be a zone name, got {zone!r}")
    if zone_is_fixed(zone):
        return
    try:
        zoneinfo.ZoneInfo(zone)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        raise PolicyError(
            f"{where}timestamp_zone {zone!r} is neither an IANA zone name (Europe/Berlin) nor an offset (+02:00)"
        ) from None


@dataclass(frozen=True, slots=True, kw_only=True)
class RecommendOptions:
    """The recommender's policy; see the module docstring for every value."""

    mode: Mode = "permissive"
    prefer_decimal: bool = False
    timestamp_unit: Unit = "us"
    timestamp_zone: str = "UTC"
    parse_strings: Literal["mixed", "always"] = "mixed"
    leading_zeros: Literal["keep", "parse"] = "keep"
    null_tokens: Literal["parse", "always", "never"] = "parse"
    max_null_share: float = 0.0
    min_field_share: float = 0.0

    def __post_init__(self) -> None:
        self._validate("")

    def _validate(self, where: str) -> None:
        for name, allowed in _CHOICES.items():
            value = getattr(self, name)
            if value not in allowed:
                raise PolicyError(f"{where}{name} must be one of {', '.join(allowed)}; got {value!r}")
        if not isinstance(self.prefer_decimal, bool):
            raise PolicyError(f"{where}prefer_decimal must be true or false; got {self.prefer_decimal!r}")
        for name in _SHARES:
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, int | float) or not 0.0 <= value <= 1.0:
                raise PolicyError(f"{where}{name} must be a number from 0 to 1; got {value!r}")
        _check_zone(self.timestamp_zone, where)

    @property
    def strict(self) -> bool:
        return self.mode == "strict"

    def to_json(self) -> dict[str, Any]:
        return asdict(self)

    def replace(self, **changes: object) -> RecommendOptions:
        """A copy with some options changed (None values are ignored: 'not given')."""
        given = {k: v for k, v in changes.items() if v is not None}
        return RecommendOptions.from_mapping({**self.to_json(), **given})

    @staticmethod
    def from_mapping(data: Mapping[str, Any], *, source: str | None = None) -> RecommendOptions:
        """Options from a mapping (a TOML table); unknown keys and bad values raise PolicyError."""
        where = f"{source}: " if source else ""
        known = {f.name for f in fields(RecommendOptions)}
        unknown = sorted(set(data) - known)
        if unknown:
            raise PolicyError(
                f"{where}unknown option {', '.join(map(repr, unknown))}; known options: {', '.join(sorted(known))}"
            )
        try:
            return RecommendOptions(**dict(data))
        except PolicyError as exc:
            raise PolicyError(f"{where}{exc}") from None

    @staticmethod
    def from_toml(path: str | Path, *, base: RecommendOptions | None = None) -> RecommendOptions:
        """Options from the ``[recommend]`` table of a TOML file (other tables are ignored).

        >>> import tempfile, pathlib
        >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.toml"
        >>> _ = p.write_text('[recommend]\\ntimestamp_unit = "ms"\\n')
        >>> RecommendOptions.from_toml(p).timestamp_unit
        'ms'
        """
        source = str(path)
        try:
            with open(path, "rb") as fh:
                doc = tomllib.load(fh)
        except OSError as exc:
            raise PolicyError(f"cannot read {source!r}: {exc.strerror}") from None
        except tomllib.TOMLDecodeError as exc:
            raise PolicyError(f"{source!r} is not valid TOML: {exc}") from None
        table = doc.get("recommend", {})
        if not isinstance(table, dict):
            raise PolicyError(f"{source!r}: [recommend] must be a table")
        merged = {**(base or RecommendOptions()).to_json(), **table}
        return RecommendOptions.from_mapping(merged, source=repr(source) + " [recommend]")
