"""Flag values settled without pydantic (cli/plainvalues.py) are the values typer's own coercion
gives: every parameter of every verb and of the root, on its default and on typed-in text.

The reference is typer's coercion itself (typer._coercion.build_runtime_param, the pydantic
TypeAdapter typer builds per parameter): the same value and type, or the same refusal.
"""

from __future__ import annotations

from typing import Any

import pytest
import typer
from typer._click import Context
from typer._coercion import build_runtime_param

from driftline.cli.app import VERBS, app
from driftline.cli.plainvalues import PlainFirst, plain_value

TEXTS = ("", "0", "1", "12", "007", "65536", "2.5", "1e3", " 3", "-1", "abc", "64MiB", "utf-8", "yes")


def _commands() -> list[tuple[str, Any, Context]]:
    group = typer.main.get_command(app)
    root = Context(group)
    out = [("driftline", group, root)]
    for name in VERBS:
        cmd = group.get_command(root, name)
        out.append((name, cmd, Context(cmd, parent=root)))
    return out


def _params() -> list[tuple[str, Any, Context]]:
    return [(f"{name} {p.name}", p, ctx) for name, cmd, ctx in _commands() for p in cmd.get_params(ctx)]


def _outcome(coerce: Any, value: Any, param: Any, ctx: Context) -> tuple[str, Any]:
    try:
        got = coerce(value, param=param, ctx=ctx)
    except Exception as exc:  # the refusal, as typer words it
        return "refused", (type(exc).__name__, str(exc))
    return type(got).__name__, got


def _samples(param: Any) -> list[Any]:
    multi = param.multiple or param.nargs == -1
    values: list[Any] = [None, param.default, *TEXTS]
    if multi:
        values += [(), ("a",), ("a", "b"), ["x", "y"], ("1", "2")]
    return values


PARAMS = _params()


def test_every_verb_and_the_root_are_covered():
    # the parameters seen: each verb's flags and the root's (--version, --debug, -h/--help)
    names = {label.split()[0] for label, _, _ in PARAMS}
    assert names == {"driftline", *VERBS}
    assert len(PARAMS) > 100  # the read flags alone are forty per reading verb


@pytest.mark.parametrize(("label", "param", "ctx"), PARAMS, ids=[label for label, _, _ in PARAMS])
def test_plain_first_gives_typers_answer(label, param, ctx):
    descriptor = param.type_descriptor
    for value in _samples(param):
        typers = build_runtime_param(descriptor)
        ours = PlainFirst(
            parameter_info=descriptor.parameter_info, annotation=descriptor.annotation, descriptor=descriptor
        )
        param._runtime_param = None
        expected = _outcome(typers.coerce, value, param, ctx)
        param._runtime_param = None
        got = _outcome(ours.coerce, value, param, ctx)
        assert got == expected, (label, value)


def test_plain_values_are_the_common_ones():
    # The shortcut is taken where it pays: defaults and strings need no pydantic; the rest is left.
    from typer._coercion import TypeDescriptor
    from typer.models import OptionInfo

    def plain(annotation: Any, value: Any, **info: Any) -> Any:
        return plain_value(TypeDescriptor(annotation, OptionInfo(**info), None), value)

    assert plain(str, "a.json") == "a.json"
    assert plain(list[str], ("a", "b")) == ["a", "b"]
    assert plain(int, 65536, min=1) == 65536
    assert plain(float, 1000, min=1) == 1000.0 and type(plain(float, 1000, min=1)) is float
    unsettled = plain(int, "2.5")
    assert unsettled is plain(float, "2.5") is plain(int, 0, min=1) is plain(bool, "yes")
