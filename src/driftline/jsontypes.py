"""The type of JSON data, for public signatures that hand out or take a JSON document.

A recursive alias (mypy follows it), so a public signature says "JSON" instead of Any:

>>> from typing import get_type_hints
>>> def rules() -> JSONObject: ...
>>> get_type_hints(rules)["return"].__origin__
<class 'dict'>
"""

from __future__ import annotations

from typing import TypeAlias

#: Any JSON value as Python holds it (json.loads, orjson.loads).
JSONValue: TypeAlias = "None | bool | int | float | str | list[JSONValue] | dict[str, JSONValue]"
#: A JSON object: a report, a rules file, a schema document.
JSONObject: TypeAlias = "dict[str, JSONValue]"
