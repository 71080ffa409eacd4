"""The one JSON Schema (Draft 2020-12) of the plain stage tree, and its validator.

The schema is built from the grammar table so the two syntaxes cannot drift apart, and
validation errors are turned into InputProblems at the position of the offending node.
"""

from __future__ import annotations

import difflib
from functools import lru_cache

from checker.io.grammar import FORMS, Form, positional_slots
from checker.io.positions import InputProblem, Path, Position, locate

SCHEMA_ID = "https://ampcheck.invalid/schema/stage-1.json"

_VALUE = {"$ref": "#/$defs/value"}
_NAME = {"$ref": "#/$defs/name"}
_REF = {"$ref": "#/$defs/designator"}
_PAIR = {"type": "array", "items": _VALUE, "minItems": 2, "maxItems": 2}

# Schema of each field that is not a nested form; anything unlisted is a value.
_FIELDS: dict[str, dict] = {
    "name": _NAME,
    "ref": _REF,
    "net": _NAME,
    "nets": {"type": "array", "items": _NAME, "minItems": 2, "maxItems": 2},
    "ground": _NAME,
    "part": _NAME,
    "in+": _NAME, "in-": _NAME, "out": _NAME, "v+": _NAME, "v-": _NAME,
    "stage": _NAME,
    "note": {"type": "string"},
    "label": {"type": "string"},
    "class": {"type": "string"},
    "kind": {"enum": ["voltage", "current"]},
    "mains": {"enum": ["isolated", "not-isolated"]},
    "version": {"const": 1},
    "rule": {"type": "string", "pattern": r"^[a-z][a-z0-9]*(-[a-z0-9]+)*$"},
    "reason": {"type": "string"},
}

_DESCRIPTIONS = {
    "document": "A stage file: one or more stages and optional inline part definitions.",
    "part": "An op-amp part: parameters in SI units or with unit symbols.",
    "params": "Op-amp parameters given inline; they override the named part's.",
    "stage": "One op-amp stage: supplies, op-amps, passives, sources, loads, requirements.",
    "supply": "A rail: a net held at a DC voltage against the ground net, and whether it"
              " is derived from the mains.",
    "opamp": "An op-amp: its part and the nets on its five pins.",
    "resistor": "A resistor between two nets.",
    "capacitor": "A capacitor between two nets.",
    "inductor": "An inductor between two nets.",
    "source": "A signal source driving a net through its impedance.",
    "load": "What the stage drives: a resistance, a capacitance, or the next stage.",
    "feeds": "The stage (and its source net) that this load is the input of.",
    "require": "What the stage must achieve.",
    "waive": "Accept a rule's finding on this stage or element, with the reason why.",
}

_REQUIRED = {
    "part": ["name"],
    "stage": ["name", "ground"],
    "supply": ["net", "voltage"],
    "opamp": ["ref", "in+", "in-", "out", "v+", "v-"],
    "resistor": ["ref", "nets", "value"],
    "capacitor": ["ref", "nets", "value"],
    "inductor": ["ref", "nets", "value"],
    "source": ["net"],
    "load": ["net"],
    "feeds": ["stage"],
    "waive": ["rule"],
}


def _form_schema(name: str, form: Form) -> dict:
    properties: dict[str, dict] = {}
    for key, _count, _optional in positional_slots(form):
        properties[key] = _FIELDS.get(key, _VALUE)
    for _keyword, child in form.children.items():
        if child.shape == "scalar":
            item = _FIELDS.get(child.key, _VALUE)
        elif child.shape == "pair":
            item = _PAIR
        else:
            item = {"$ref": f"#/$defs/{child.shape}"}
        if child.repeated:
            item = {"type": "array", "items": item}
        properties[child.key] = item
    schema = {
        "type": "object",
        "description": _DESCRIPTIONS[name],
        "properties": properties,
        "additionalProperties": False,
    }
    if name in _REQUIRED:
        schema["required"] = _REQUIRED[name]
    if name == "opamp":
        schema["anyOf"] = [{"required": ["part"]}, {"required": ["params"]}]
    if name == "source":
        schema["not"] = {"required": ["range", "amplitude"]}
    if name == "document":
        # at least one stage or part: a file of empty lists would pass having held nothing
        schema["anyOf"] = [{"required": [key], "properties": {key: {"minItems": 1}}}
                           for key in ("stages", "parts")]
    return schema


@lru_cache(maxsize=1)
def stage_schema() -> dict:
    """The JSON Schema (Draft 2020-12) of a stage file's plain tree."""
    defs = {name: _form_schema(name, form) for name, form in FORMS.items() if name != "document"}
    defs["value"] = {
        "description": "A number in SI units, or text with an SI prefix and unit"
                       " (10k, 4k7, 100nF, 0.5V/us, 1%).",
        "type": ["number", "string"],
        "minLength": 1,
    }
    defs["name"] = {"type": "string", "pattern": r"^[A-Za-z0-9_.+\-/]+$",
                    "description": "A net, stage or part name."}
    defs["designator"] = {"type": "string", "pattern": r"^[A-Za-z][A-Za-z0-9_]*$",
                          "description": "A reference designator such as R1 or U2."}
    document = _form_schema("document", FORMS["document"])
    # Editors like to point a JSON file at its schema; the key carries no meaning here.
    document["properties"]["$schema"] = {"type": "string"}
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": SCHEMA_ID,
        "title": "ampcheck stage description, version 1",
        **document,
        "$defs": defs,
    }


def _inlined(schema: dict) -> dict:
    """The same schema with every local $ref replaced by its definition: identical
    meaning (the schema has no recursion), but validation skips the reference lookups
    that dominate its cost."""
    definitions = schema.get("$defs", {})

    def expand(node):
        if isinstance(node, dict):
            if "$ref" in node and node["$ref"].startswith("#/$defs/"):
                target = expand(definitions[node["$ref"][len("#/$defs/"):]])
                return {**target, **{k: expand(v) for k, v in node.items() if k != "$ref"}}
            return {k: expand(v) for k, v in node.items() if k != "$defs"}
        if isinstance(node, list):
            return [expand(item) for item in node]
        return node

    return expand(schema)


@lru_cache(maxsize=1)
def quick_check():
    """The fast yes/no check of the same (inlined) schema; see quick_check.py."""
    from checker.io.quick_check import build

    return build(_inlined(stage_schema()))


@lru_cache(maxsize=1)
def _validator():
    from jsonschema import Draft202012Validator

    return Draft202012Validator(_inlined(stage_schema()))


def validate(tree: dict, positions: dict[Path, Position], path: str) -> list[InputProblem]:
    """Problems with ``tree`` against the schema, each at its node's position."""
    if quick_check()(tree):
        return []
    problems = []
    for error in sorted(_validator().iter_errors(tree), key=lambda e: list(map(str, e.path))):
        node_path = tuple(error.absolute_path)
        message = _message(error, tree, node_path)
        if error.validator == "additionalProperties":
            for extra in _extras(error):
                pos = locate(positions, node_path + (extra,))
                problems.append(InputProblem(path, pos.line, pos.column,
                                             _unknown_key(extra, error, tree, node_path)))
            continue
        pos = locate(positions, node_path)
        problems.append(InputProblem(path, pos.line, pos.column, message))
    return sorted(problems, key=lambda p: (p.line, p.column))


def describe(tree, path: Path) -> str:
    """A human name for the node at ``path``: 'resistor R2 in stage front-end'."""
    parts = []
    node = tree
    kinds = {"stages": "stage", "parts": "part", "opamps": "op-amp", "resistors": "resistor",
             "capacitors": "capacitor", "inductors": "inductor", "sources": "source",
             "loads": "load", "supplies": "supply"}
    for i, step in enumerate(path):
        try:
            node = node[step]
        except (KeyError, IndexError, TypeError):
            break
        if isinstance(step, int) and i > 0 and isinstance(node, dict):
            kind = kinds.get(path[i - 1], path[i - 1])
            label = node.get("ref") or node.get("name")
            if isinstance(label, str):
                label = repr(label)
            elif node.get("net") is not None:
                label = f"on net {node['net']!r}"
            parts.append(f"{kind} {label or '#' + str(step + 1)}")
        elif step == "require":
            parts.append("require")
    return " in ".join(reversed(parts)) or "the file"


def _extras(error) -> list[str]:
    allowed = error.schema.get("properties", {})
    return [key for key in error.instance if key not in allowed]


def _unknown_key(extra: str, error, tree, node_path: Path) -> str:
    allowed = list(error.schema.get("properties", {}))
    close = difflib.get_close_matches(extra, allowed, n=1, cutoff=0.6)
    hint = f"; did you mean {close[0]!r}?" if close else f"; expected one of: {', '.join(allowed)}"
    return f"unknown keyword {extra!r} in {describe(tree, node_path)}{hint}"


def _message(error, tree, node_path: Path) -> str:
    where = describe(tree, node_path)
    field = next((str(p) for p in reversed(node_path) if isinstance(p, str)), None)
    if error.validator == "required":
        missing = [key for key in error.validator_value if key not in error.instance]
        return f"{where} is missing {', '.join(repr(m) for m in missing)}"
    if error.validator == "anyOf" and isinstance(error.instance, dict):
        options = [" or ".join(repr(k) for k in s.get("required", [])) for s in error.validator_value]
        counted = any("minItems" in sub for s in error.validator_value
                      for sub in s.get("properties", {}).values())
        return f"{where} needs {' or '.join(options)}" + (
            ", with at least one entry" if counted else "")
    if error.validator == "not":
        return f"{where}: give either 'range' or 'amplitude', not both"
    if error.validator == "pattern":
        if error.schema.get("pattern", "").startswith("^[A-Za-z][A-Za-z0-9_]*"):
            return (f"{field} {error.instance!r} in {where} is not a designator: a letter,"
                    " then letters, digits or _ (R1, U2, C_IN)")
        return f"{field} {error.instance!r} in {where} is not a valid name (letters, digits, _ . + - /)"
    if error.validator in ("minItems", "maxItems"):
        return f"{field} in {where} takes exactly 2 items"
    if error.validator in ("enum", "const"):
        allowed = error.validator_value if error.validator == "enum" else [error.validator_value]
        return (f"{field} in {where} must be one of {', '.join(map(repr, allowed))},"
                f" not {_show(error.instance)}")
    if error.validator == "type":
        hint = ""
        if isinstance(error.instance, (int, float)) and not isinstance(error.instance, bool) \
                and "string" in str(error.validator_value):
            hint = f' (a name that looks like a number needs quotes: "{error.instance}")'
        return (f"{field} in {where} must be {_type_words(error.validator_value)},"
                f" not {_show(error.instance)}{hint}")
    if error.validator == "minLength":
        return f"{field} in {where} is empty"
    return f"{where}: {error.message}"


def _show(value) -> str:
    """A value as the JSON reader would write it, cut short when long."""
    import json

    text = json.dumps(value, ensure_ascii=False)
    return text if len(text) <= 60 else text[:57] + "..."


def _type_words(types) -> str:
    words = {"number": "a number", "string": "text", "array": "a list", "object": "an object"}
    if isinstance(types, str):
        types = [types]
    return " or ".join(words.get(t, t) for t in types)
