"""Write the plain tree in the s-expression syntax (the inverse of sexp_reader)."""

from __future__ import annotations

import re

from checker.io.grammar import FORMS, Form, child_by_key, positional_slots

# Atoms that read back as the same string: no spaces, quotes, parentheses, comment
# marks or backslashes (sexpdata's escape), and not something sexpdata would read as a
# number (it tries int() then float(), which also take "nan", "inf" and "1_000").
_BARE = re.compile(r'^[^\s()";\[\]\'`,\\]+$')
_INDENT = "  "
# The escapes sexpdata undoes inside a "string"; any other character is written as is.
_STRING_ESCAPES = {"\\": "\\\\", '"': '\\"', "\n": "\\n", "\r": "\\r", "\t": "\\t",
                   "\b": "\\b", "\f": "\\f"}


def _reads_as_number(text: str) -> bool:
    for number in (int, float):
        try:
            number(text)
            return True
        except ValueError:
            pass
    return False


def atom(value) -> str:
    """One value as an atom: numbers as numbers, other text bare where safe, else quoted."""
    if isinstance(value, bool) or value is None:
        raise TypeError(f"no atom for {value!r}")
    if isinstance(value, (int, float)):
        return repr(value)
    text = str(value)
    if _BARE.fullmatch(text) and not _reads_as_number(text) and text not in ("t", "nil"):
        return text
    return '"' + "".join(_STRING_ESCAPES.get(c, c) for c in text) + '"'


def write_sexp(tree: dict) -> str:
    """The s-expression text of a plain tree (one top-level form per line group)."""
    lines: list[str] = []
    document = FORMS["document"]
    for key, (keyword, child) in child_by_key(document).items():
        if key not in tree:
            continue
        items = tree[key] if child.repeated else [tree[key]]
        for item in items:
            if child.shape == "scalar":
                lines.append(f"({keyword} {atom(item)})")
            else:
                lines.append(_form(keyword, FORMS[child.shape], item, 0))
            lines.append("")
    return "\n".join(lines).rstrip() + "\n"


def _form(keyword: str, form: Form, node: dict, depth: int) -> str:
    head = [keyword]
    for key, count, _optional in positional_slots(form):
        if key not in node:
            continue
        values = node[key] if count > 1 else [node[key]]
        head.extend(atom(v) for v in values)
    parts: list[str] = []
    nested: list[str] = []
    for key, (child_keyword, child) in child_by_key(form).items():
        if key not in node:
            continue
        items = node[key] if child.repeated else [node[key]]
        for item in items:
            if child.shape == "scalar":
                parts.append(f"({child_keyword} {atom(item)})")
            elif child.shape == "pair":
                parts.append(f"({child_keyword} {atom(item[0])} {atom(item[1])})")
            else:
                nested.append(_form(child_keyword, FORMS[child.shape], item, depth + 1))
    text = "(" + " ".join(head + parts)
    if nested:
        pad = _INDENT * (depth + 1)
        text += "".join(f"\n{pad}{n}" for n in nested)
    return text + ")"


def write_form(keyword: str, node: dict, depth: int = 0) -> str:
    """One form of the stage grammar (``resistor``, ``source``, ...) as s-expression
    text, for writers that lay a file out themselves (the netlist's stage writer)."""
    return _form(keyword, FORMS[keyword], node, depth)
