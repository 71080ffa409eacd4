"""A fast yes/no check of a tree against the stage schema, for the common case.

The one schema (schema.py) stays the source of truth and jsonschema its reference
implementation: this module executes the same schema document, with its local $refs
inlined, for the few keywords it uses, and says only whether the tree is valid. When it
says no, jsonschema runs to produce the positioned messages. Importing and running
jsonschema costs more than reading a small file, so a valid file never pays for it.
A keyword this module does not know is an error when the check is built, and a test
compares its verdicts with jsonschema's on generated trees.
"""

from __future__ import annotations

import re

_TYPES = {
    "object": lambda v: isinstance(v, dict),
    "array": lambda v: isinstance(v, list),
    "string": lambda v: isinstance(v, str),
    "number": lambda v: isinstance(v, (int, float)) and not isinstance(v, bool),
    "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "boolean": lambda v: isinstance(v, bool),
    "null": lambda v: v is None,
}
_ANNOTATIONS = {"description", "title", "$schema", "$id"}


def build(schema: dict):
    """A function tree -> bool for ``schema`` (local $refs already inlined)."""
    checks = []
    for keyword, value in schema.items():
        if keyword in _ANNOTATIONS:
            continue
        checks.append(_KEYWORDS[keyword](value, schema) if keyword in _KEYWORDS
                      else _unknown(keyword))
    return _all_of(checks)


def _all_of(checks: list):
    """One function true when every check is (unrolled for the usual one or two)."""
    if not checks:
        return lambda instance: True
    if len(checks) == 1:
        return checks[0]
    if len(checks) == 2:
        first, second = checks
        return lambda instance: first(instance) and second(instance)

    def every(instance) -> bool:
        return all(check(instance) for check in checks)

    return every


def _unknown(keyword: str):
    raise ValueError(f"quick_check does not know the keyword {keyword!r}")


def _type(value, schema):
    tests = [_TYPES[t] for t in ([value] if isinstance(value, str) else value)]
    if len(tests) == 1:
        return tests[0]
    return lambda v: any(test(v) for test in tests)


def _properties(value, schema):
    checks = {key: build(sub) for key, sub in value.items()}

    def properties(v) -> bool:
        if not isinstance(v, dict):
            return True
        for key, item in v.items():
            check = checks.get(key)
            if check is not None and not check(item):
                return False
        return True

    return properties


def _additional(value, schema):
    known = set(schema.get("properties", {}))
    if value is False:
        return lambda v: not isinstance(v, dict) or known.issuperset(v)
    check = build(value)
    return lambda v: not isinstance(v, dict) or all(
        check(item) for k, item in v.items() if k not in known)


def _required(value, schema):
    return lambda v: not isinstance(v, dict) or all(k in v for k in value)


def _items(value, schema):
    check = build(value)

    def items(v) -> bool:
        if not isinstance(v, list):
            return True
        return all(check(item) for item in v)

    return items


def _pattern(value, schema):
    search = re.compile(value).search
    return lambda v: not isinstance(v, str) or search(v) is not None


def _any_of(value, schema):
    checks = [build(sub) for sub in value]
    return lambda v: any(check(v) for check in checks)


def _not(value, schema):
    check = build(value)
    return lambda v: not check(v)


def _equal(a, b) -> bool:
    """JSON equality: 1 == 1.0, but True is not 1."""
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    return a == b


_KEYWORDS = {
    "type": _type,
    "properties": _properties,
    "additionalProperties": _additional,
    "required": _required,
    "items": _items,
    "pattern": _pattern,
    "anyOf": _any_of,
    "not": _not,
    "enum": lambda value, schema: lambda v: any(_equal(v, e) for e in value),
    "const": lambda value, schema: lambda v: _equal(v, value),
    "minItems": lambda value, schema: lambda v: not isinstance(v, list) or len(v) >= value,
    "maxItems": lambda value, schema: lambda v: not isinstance(v, list) or len(v) <= value,
    "minLength": lambda value, schema: lambda v: not isinstance(v, str) or len(v) >= value,
}
