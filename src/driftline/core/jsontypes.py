"""The type of JSON data, for public signatures that hand out or take a JSON document.

A recursive alias, so a public signature says "JSON" instead of Any. mypy reads the string
form; at run time the alias is built with a forward reference bound to this module, so
typing.get_type_hints resolves it from any module that imports JSONObject alone:

>>> from typing import get_type_hints
>>> def rules() -> JSONObject: ...
>>> get_type_hints(rules)["return"].__origin__
<class 'dict'>
"""

from __future__ import annotations

from typing import TYPE_CHECKING, ForwardRef, TypeAlias, Union

if TYPE_CHECKING:
    #: Any JSON value as Python holds it (json.loads, orjson.loads).
    JSONValue: TypeAlias = "None | bool | int | float | str | list[JSONValue] | dict[str, JSONValue]"
    #: A JSON object: a report, a rules file, a schema document.
    JSONObject: TypeAlias = "dict[str, JSONValue]"
else:
    _value = ForwardRef("JSONValue", module=__name__)
    JSONValue = Union[None, bool, int, float, str, list[_value], dict[str, _value]]  # noqa: UP007
    JSONObject = dict[str, JSONValue]
