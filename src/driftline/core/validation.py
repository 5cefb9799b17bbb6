"""Our own files are checked against their published JSON Schemas before they are used.

The schemas ship with the package (driftline/jsonschemas/, the same files as docs/*.schema.json)
and are JSON Schema 2020-12. A report or a state file can hold millions of values, so the
schemas are compiled once into plain Python checks that stop at the first problem and say
where it is (an RFC 6901 JSON pointer) and what was expected there; the tests hold these
checks to the `jsonschema` package's verdict on valid files and on mutated ones. Only the
keywords the published schemas use are compiled; any other keyword is refused when the
schema is compiled, so a schema can never be checked more loosely than it reads.

>>> problem_in({"format": "driftline-rules", "version": "1"}, "rules")
('/tool', 'a required key', 'none')
"""

from __future__ import annotations

import json
import re
from collections.abc import Callable, Mapping
from functools import cache
from importlib.resources import files
from typing import Any

from driftline.core.words import count, plural
from driftline.errors import DamagedFileError

SCHEMAS = {
    "report": "report.schema.json",
    "report-set": "report-set.schema.json",
    "rules": "rules.schema.json",
    "state": "state.schema.json",
    "policy": "policy.schema.json",
}

# (path from the innermost key outwards, what was expected, what was found), or None.
Problem = tuple[list[str | int], str, str]
Check = Callable[[Any], "Problem | None"]

_ANNOTATIONS = {"$schema", "$id", "$defs", "$comment", "title", "description", "default", "examples"}
_TYPE_WORDS = {
    "integer": "an integer",
    "number": "a number",
    "string": "a string",
    "boolean": "true or false",
    "null": "null",
    "object": "an object",
    "array": "an array",
}


_PY_TYPES: dict[str, tuple[type, ...]] = {
    "integer": (int,),
    "number": (int, float),
    "string": (str,),
    "boolean": (bool,),
    "null": (type(None),),
    "object": (dict,),
    "array": (list,),
}


def _type_check(types: list[str]) -> Check:
    # Exact Python types: JSON and TOML parsers give plain int/float/str/bool/dict/list (bool is not int here).
    exact = frozenset(t for name in types for t in _PY_TYPES[name])
    integral_float = "integer" in types and "number" not in types
    want = " or ".join(_TYPE_WORDS[t] for t in types)

    def type_check(v: Any) -> Problem | None:
        t = type(v)
        if t in exact or (integral_float and t is float and v.is_integer()):
            return None
        return [], want, found(v)

    return type_check


def _count(least: float) -> Check:
    want = f"an integer ≥ {least}"

    def count_check(v: Any) -> Problem | None:
        t = type(v)
        if (t is int or (t is float and v.is_integer())) and v >= least:
            return None
        return [], want, found(v)

    return count_check


def _equal(a: Any, b: Any) -> bool:
    # JSON equality: 1 == 1.0 but true != 1 (JSON Schema 2020-12, Core section 4.2.2).
    if isinstance(a, bool) or isinstance(b, bool):
        return isinstance(a, bool) and isinstance(b, bool) and a == b
    if isinstance(a, int | float) and isinstance(b, int | float):
        return a == b
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_equal(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_equal(a[k], b[k]) for k in a)
    return type(a) is type(b) and a == b


def found(v: Any) -> str:
    """A short description of a JSON value for a message."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if v is None:
        return "null"
    if isinstance(v, int | float):
        return f"the number {v!r}"
    if isinstance(v, str):
        text = json.dumps(v[:60], ensure_ascii=False) + ("…" if len(v) > 60 else "")
        return f"the string {text}"
    if isinstance(v, dict):
        return f"an object of {count(len(v), 'key')}"
    return f"an array of {len(v)} items"


def _literal(v: Any) -> str:
    return json.dumps(v, ensure_ascii=False)


def pointer(path: list[str | int]) -> str:
    """RFC 6901: '/'-separated reference tokens, '~' written '~0' and '/' written '~1'."""
    return "".join("/" + str(p).replace("~", "~0").replace("/", "~1") for p in path)


class _Compiler:
    def __init__(self, docs: Mapping[str, Any]) -> None:
        self.docs = docs  # $id → schema document
        self.refs: dict[tuple[str, str], Check] = {}

    def _target(self, base: str, ref: str) -> tuple[str, Any]:
        uri, _, frag = ref.partition("#")
        doc_id = uri if uri else base
        node = self.docs[doc_id]
        for token in (t for t in frag.split("/") if t):
            node = node[token.replace("~1", "/").replace("~0", "~")]
        return doc_id, node

    def ref(self, base: str, ref: str) -> Check:
        uri, _, frag = ref.partition("#")
        key = (uri or base, frag)
        if key not in self.refs:
            cell: list[Check] = []
            self.refs[key] = lambda v: cell[0](v)  # only a cycle goes through the cell
            doc_id, node = self._target(base, ref)
            cell.append(self.compile(node, doc_id))
            self.refs[key] = cell[0]
        return self.refs[key]

    def names(self, s: Any, base: str) -> set[str]:
        """Property names a schema evaluates statically (for unevaluatedProperties)."""
        if not isinstance(s, dict):
            return set()
        out = set(s.get("properties", {}))
        if "$ref" in s:
            doc_id, node = self._target(base, s["$ref"])
            out |= self.names(node, doc_id)
        for sub in s.get("allOf", []):
            out |= self.names(sub, base)
        return out

    def compile(self, s: Any, base: str) -> Check:  # noqa: C901 - one branch per keyword
        if s is True or s == {}:
            return lambda v: None
        if s is False:
            return lambda v: ([], "nothing here", found(v))
        unknown = (
            set(s)
            - _ANNOTATIONS
            - {
                "type",
                "const",
                "enum",
                "required",
                "properties",
                "additionalProperties",
                "unevaluatedProperties",
                "propertyNames",
                "items",
                "maxItems",
                "minItems",
                "minimum",
                "maximum",
                "minLength",
                "maxLength",
                "pattern",
                "$ref",
                "allOf",
            }
        )
        if unknown:
            raise ValueError(
                f"the schema {plural(len(unknown), 'keyword')} {sorted(unknown)} {plural(len(unknown), 'is', 'are')} "
                "not compiled; add them to core/validation.py"
            )
        checks: list[Check] = []
        if s.get("type") == "integer" and set(s) - _ANNOTATIONS == {"type", "minimum"}:
            return _count(s["minimum"])  # the commonest schema of all: a count
        if "type" in s:
            checks.append(_type_check([s["type"]] if isinstance(s["type"], str) else list(s["type"])))
        if "const" in s:
            const = s["const"]
            checks.append(lambda v: None if _equal(v, const) else ([], f"the value {_literal(const)}", found(v)))
        if "enum" in s:
            options = list(s["enum"])
            want = "one of " + ", ".join(_literal(o) for o in options)
            checks.append(lambda v: None if any(_equal(v, o) for o in options) else ([], want, found(v)))
        if "$ref" in s:
            checks.append(self.ref(base, s["$ref"]))
        for sub in s.get("allOf", []):
            checks.append(self.compile(sub, base))
        numeric = [(k, s[k]) for k in ("minimum", "maximum") if k in s]
        if numeric:

            def number_check(v: Any) -> Problem | None:
                if isinstance(v, bool) or not isinstance(v, int | float):
                    return None
                for k, bound in numeric:
                    if (v < bound) if k == "minimum" else (v > bound):
                        return [], f"a number {'≥' if k == 'minimum' else '≤'} {bound}", found(v)
                return None

            checks.append(number_check)
        if "minLength" in s or "maxLength" in s or "pattern" in s:
            least, most = s.get("minLength", 0), s.get("maxLength")
            regex = re.compile(s["pattern"]) if "pattern" in s else None

            def string_check(v: Any) -> Problem | None:
                if not isinstance(v, str):
                    return None
                if len(v) < least:
                    return [], f"a string of at least {least} characters", found(v)
                if most is not None and len(v) > most:
                    return [], f"a string of at most {most} characters", found(v)
                if regex is not None and regex.search(v) is None:
                    return [], f"a string matching {regex.pattern}", found(v)
                return None

            checks.append(string_check)
        if "items" in s or "maxItems" in s or "minItems" in s:
            checks.append(self._array(s, base))
        if {"required", "properties", "additionalProperties", "unevaluatedProperties", "propertyNames"} & set(s):
            checks.append(self._object(s, base))
        if len(checks) == 1:
            return checks[0]

        def all_of(v: Any) -> Problem | None:
            for c in checks:
                p = c(v)
                if p is not None:
                    return p
            return None

        return all_of

    def _array(self, s: dict[str, Any], base: str) -> Check:
        item = self.compile(s["items"], base) if "items" in s else None
        most, least = s.get("maxItems"), s.get("minItems", 0)

        def array_check(v: Any) -> Problem | None:
            if not isinstance(v, list):
                return None
            if most is not None and len(v) > most:
                return [], f"an array of at most {most} items", found(v)
            if len(v) < least:
                return [], f"an array of at least {least} items", found(v)
            if item is not None:
                for i, x in enumerate(v):
                    p = item(x)
                    if p is not None:
                        p[0].append(i)
                        return p
            return None

        return array_check

    def _object(self, s: dict[str, Any], base: str) -> Check:
        required = list(s.get("required", []))
        props = {k: self.compile(sub, base) for k, sub in s.get("properties", {}).items()}
        extra_schema = s.get("additionalProperties", True)
        if s.get("unevaluatedProperties", True) is False:
            allowed: set[str] | None = self.names(s, base)
        elif s.get("unevaluatedProperties", True) is not True:
            raise ValueError("only unevaluatedProperties: false is compiled")
        else:
            allowed = set(props) if extra_schema is False else None
        extra = None if extra_schema in (True, False) else self.compile(extra_schema, base)
        names = self.compile(s["propertyNames"], base) if "propertyNames" in s else None
        listed = ", ".join(sorted(allowed)) if allowed is not None else ""

        def object_check(v: Any) -> Problem | None:
            if not isinstance(v, dict):
                return None
            for k in required:
                if k not in v:
                    return [k], "a required key", "none"
            for k, x in v.items():
                if names is not None:
                    p = names(k)
                    if p is not None:
                        return [k], f"a key that is {p[1]}", f"the key {_literal(k)}"
                check = props.get(k)
                if check is not None:
                    p = check(x)
                elif allowed is not None and k not in allowed:
                    return [k], f"no such key (the keys allowed here: {listed})", f"the key {_literal(k)}"
                elif extra is not None:
                    p = extra(x)
                else:
                    continue
                if p is not None:
                    p[0].append(k)
                    return p
            return None

        return object_check


@cache
def schema_document(kind: str) -> dict[str, Any]:
    """The published JSON Schema of one of our file kinds, as shipped with the package."""
    text = files("driftline").joinpath("jsonschemas", SCHEMAS[kind]).read_text(encoding="utf-8")
    doc: dict[str, Any] = json.loads(text)
    return doc


@cache
def _checker(kind: str) -> Check:
    docs = {schema_document(k)["$id"]: schema_document(k) for k in SCHEMAS}
    root = schema_document(kind)
    return _Compiler(docs).compile(root, root["$id"])


def problem_in(doc: Any, kind: str) -> tuple[str, str, str] | None:
    """(JSON pointer, expected, found) of the first problem of doc against the kind's schema; None if valid."""
    p = _checker(kind)(doc)
    if p is None:
        return None
    path, want, got = p
    return pointer(path[::-1]), want, got


def damaged(what: str, source: str, at: str, expected: str, got: str, hint: str = "") -> DamagedFileError:
    """The error for a damaged file: which file, where (a JSON pointer), what was expected there."""
    return DamagedFileError(f"{what} {source} is damaged at {shown(at)}: expected {expected}, found {got}{hint}")


def shown(at: str) -> str:
    """A JSON pointer for a message: the empty pointer (the whole document) said in words."""
    return at or '"" (the whole document)'


def check_json_schema(doc: Any, what: str, source: str) -> None:
    """Raise DamagedFileError when doc is not a valid JSON Schema of the dialect its $schema names.

    Checked by the `jsonschema` package against the dialect's meta-schema (2020-12 when
    $schema names none it knows).
    """
    import warnings

    from jsonschema.exceptions import SchemaError
    from jsonschema.validators import Draft202012Validator, validator_for

    dialect = doc.get("$schema") if isinstance(doc, dict) else None
    if dialect is not None and not isinstance(dialect, str):
        # Core 2020-12 section 8.1.1: "$schema" is a URI (a string); jsonschema cannot look up anything else.
        raise damaged(what, source, "/$schema", "a URI string naming the dialect", found(dialect))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # an unknown $schema: 2020-12 is used
        cls = validator_for(doc, default=Draft202012Validator)
    try:
        cls.check_schema(doc)
    except SchemaError as exc:
        rule = f"{exc.validator}: {_literal(exc.validator_value)}"
        expected = f"what the JSON Schema meta-schema allows ({rule[:100]})"
        raise damaged(what, source, pointer(list(exc.absolute_path)), expected, found(exc.instance)) from None


def check_document(doc: Any, kind: str, what: str, source: str, hint: str = "") -> None:
    """Raise DamagedFileError naming source, the JSON pointer and what was expected; None when doc is valid."""
    p = problem_in(doc, kind)
    if p is not None:
        raise damaged(what, source, *p, hint=hint)
