"""The level of a drift event: what the change does to a reader of yesterday's schema.

One place maps an event's kind (and, for two kinds, its before and after types) onto a
level; the terminal groups by it, the JSON report writes it, the gate's rules line up
with it (docs/drift.md, "Levels", gives the table and the reason for each row).

- ``breaking``: a reader built on the schema seen before the change fails or loses data
  (a value of another kind, a field it relies on gone, nulls in a column it held non-nullable).
- ``widening``: the schema must grow, and it can do so without loss: a wider type of the
  same kind (the lattice's ``is_widening``) or a new optional field; old data reads in the
  grown schema unchanged.
- ``info``: the schema's types still hold every value; worth knowing, nothing to change.

>>> level_of("type-conflict", "int64", "string"), level_of("type-widened", "int64", "float64")
('breaking', 'widening')
>>> level_of("element-changed", "int64", "float64"), level_of("element-changed", "int64", "union<int64 | string>")
('widening', 'breaking')
"""

from __future__ import annotations

from driftline.core.lattice import UNKNOWN, DType, is_widening, join_all, type_of_key
from driftline.core.observation import TEXT_CLASS_TYPE
from driftline.results.level_names import LEVELS as LEVELS  # the names alone: the CLI's help needs no lattice

# Kinds whose level is fixed; the others depend on their before/after types (below).
_FIXED: dict[str, str] = {
    "field-new": "widening",  # old data reads as null in the grown schema; old readers skip it
    "nested-new": "widening",
    "field-gone": "breaking",  # a reader that needs the field finds none
    "nested-gone": "breaking",
    "type-widened": "widening",  # the lattice joins old and new within one family
    "type-conflict": "breaking",  # a value of another family: no type of the old kind holds it
    "nulls-begin": "breaking",  # a non-nullable column cannot take the nulls
    "partition-lacks": "breaking",  # a reader that needs the field finds none in those values
    "partition-nulls": "breaking",  # as nulls-begin: the others' non-nullable column cannot take them
}


def level_of(kind: str, before: str | None, after: str | None) -> str:
    """The level of an event of this kind with these before/after texts (as Event holds them).

    A kind with no level is a KeyError: every kind of EVENT_KINDS must be listed here.
    """
    if kind in _FIXED:
        return _FIXED[kind]
    if kind == "element-changed":
        return _type_level(before, after)
    if kind == "textclass-changed":
        return _class_level(before, after)
    if kind == "partition-type":
        return _partition_type_level(before, after)
    raise KeyError(f"drift event kind {kind!r} has no level (driftline.results.levels)")


def _type_level(before: str | None, after: str | None) -> str:
    """As the walk tells type-widened from type-conflict at the top level: widening when after
    holds before and adds no family (a wider type, or a member of a union widened), else
    breaking (a new family, or a type the lattice cannot read back)."""
    old, new = _dtype(before), _dtype(after)
    if old is UNKNOWN or new is UNKNOWN or join_all((old, new)) != new or new == old:
        return "breaking"
    if new.name == "union" and (old.name != "union" or len(new.members) > len(old.members)):
        return "breaking"
    return "widening"


def _partition_type_level(before: str | None, after: str | None) -> str:
    """Some values hold another type than the others (before, after: shallow type keys): info
    when the others' type holds it (int64 values where the others hold float64), widening when
    it widens the others' type within its family, else breaking (another family).

    >>> _partition_type_level("float64", "int64"), _partition_type_level("list", "string")
    ('info', 'breaking')
    """
    old, new = _dtype(before), _dtype(after)
    if old is UNKNOWN or new is UNKNOWN:
        return "breaking"
    if join_all((old, new)) == old:
        return "info"
    return "widening" if is_widening(old, new) else "breaking"


def _class_level(before: str | None, after: str | None) -> str:
    """A new content class of strings, judged by the logical type each class reads as
    (TEXT_CLASS_TYPE), as a reader that parses the text would judge it:

    - the old classes already include free text (or nothing typed): info, text takes anything;
    - the new class is free text where the old ones were typed (digits turning into labels), or
      empty strings / null tokens where there were values (as nulls-begin): breaking;
    - the new class's type widens the old one (integer → decimal): widening;
    - the same logical type (another timestamp spelling): info; another family: breaking.
    """
    old_keys = [TEXT_CLASS_TYPE.get(c.strip()) for c in (before or "").split(",")]
    old_types = [type_of_key(k) for k in old_keys if k is not None]
    if not old_types or any(t.name == "string" for t in old_types):
        return "info"
    new_key = TEXT_CLASS_TYPE.get(after or "")
    if new_key is None:  # empty strings or null tokens where values were typed: as nulls-begin
        return "breaking"
    old, new = join_all(old_types), type_of_key(new_key)
    joined = join_all((old, new))
    if joined == old:
        return "info"
    return "widening" if is_widening(old, new) else "breaking"


def _dtype(text: str | None) -> DType:
    return type_of_key(text) if text else UNKNOWN
