"""Flag values settled without pydantic, where the answer is plain.

typer coerces every parameter's value (given or default) through a pydantic TypeAdapter,
built per parameter on first use: importing pydantic and building the adapters of a verb's
forty flags is about a third of a small scan. Most values need no work: a flag left at its
default of None, a string for a str flag, strings for a list[str] argument, an int default
inside its range. Those are answered here with exactly the value typer's adapter returns;
every other value (a number typed on the command line as 2.5, a choice, a date, anything
out of range or in doubt) goes to typer's own coercion, built then. tests/cli/test_plainvalues.py
holds both to the same answers.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, get_args, get_origin

# typer's internals: RuntimeParam is what a parameter's `_runtime_param` holds.
from typer._coercion import RuntimeParam, TypeDescriptor, build_runtime_param

_UNSETTLED = object()
_DIGITS = re.compile(r"[0-9]{1,18}")  # int(text) and pydantic agree on plain ASCII digits


def plain_value(descriptor: TypeDescriptor, value: Any) -> Any:
    """The value typer's coercion gives `value` (not None), or _UNSETTLED when it is not plain.

    Follows typer's order (build_leaf_adapter): a parser first, then the annotation.

    >>> from typer.models import OptionInfo
    >>> plain_value(TypeDescriptor(int, OptionInfo(min=1), None), "12")
    12
    >>> plain_value(TypeDescriptor(int, OptionInfo(min=1), None), "0") is _UNSETTLED
    True
    >>> plain_value(TypeDescriptor(list[str], OptionInfo(), None), ("a", "b"))
    ['a', 'b']
    """
    info, annotation = descriptor.parameter_info, descriptor.annotation
    if descriptor.file_annotation is not None or getattr(info, "click_type", None) is not None:
        return _UNSETTLED
    if get_origin(annotation) is list:
        (item,) = get_args(annotation)
        plain = item is str and info.parser is None and isinstance(value, list | tuple)
        if plain and all(type(v) is str for v in value):
            return list(value)
        return _UNSETTLED
    if info.parser is not None:
        try:  # the adapter is Any after the parser: the parser's answer, unless it refuses
            return info.parser(value)
        except Exception:  # typer's path calls it again and words the refusal
            return _UNSETTLED
    if annotation is str:
        return value if type(value) is str else _UNSETTLED
    if annotation is int:
        if type(value) is str and _DIGITS.fullmatch(value):
            value = int(value)
        return value if type(value) is int and _within(value, info) else _UNSETTLED
    if annotation is float:
        if type(value) in (int, float) and _within(value, info):
            return float(value)
        return _UNSETTLED
    return _UNSETTLED


def _within(number: float, info: Any) -> bool:
    low, high = info.min, info.max
    return (low is None or number >= low) and (high is None or number <= high)


@dataclass(frozen=True)
class PlainFirst(RuntimeParam):
    """A parameter's coercion: plain values here, the rest through typer's own, built once needed."""

    descriptor: TypeDescriptor | None = None

    def coerce(self, value: Any, param: Any, ctx: Any) -> Any:
        multi = param.multiple or param.nargs == -1
        if value is None:  # as typer's RuntimeParam.coerce
            return () if multi else None
        assert self.descriptor is not None
        if not (multi and isinstance(value, str)):
            got = plain_value(self.descriptor, value)
            if got is not _UNSETTLED:
                return got
        real = build_runtime_param(self.descriptor)
        param._runtime_param = real
        return real.coerce(value, param=param, ctx=ctx)

    def _coerce_value(self, value: Any, param: Any, ctx: Any) -> Any:
        return self.coerce(value, param, ctx)


def settle_plainly(params: list[Any]) -> list[Any]:
    """Give each typer parameter not yet coerced the plain-first coercion; the list unchanged."""
    for p in params:
        descriptor = getattr(p, "type_descriptor", None)
        if descriptor is not None and getattr(p, "_runtime_param", False) is None:
            p._runtime_param = PlainFirst(
                parameter_info=descriptor.parameter_info, annotation=descriptor.annotation, descriptor=descriptor
            )
    return params
