"""Edits to a stage file's text at the positions its reader recorded.

A fix applied to a file must keep every comment, blank line and indent the designer
wrote, so nothing is re-serialised: each edit replaces the characters of one value, adds
one ``(keyword value)`` child before a form's closing parenthesis (a key before an
object's closing brace in JSON), or inserts one new element on a line of its own with
the indent of its siblings. The readers give the (line, column) of every node by its
tree path (checker/io/positions.py); a short scan from there finds where the value or
the form ends. Edits are collected, checked not to overlap and applied from the end.
"""

from __future__ import annotations

import json
import re
from checker.record import record

from checker.io.positions import Path, Position

# s-expression atoms end at whitespace, a parenthesis, a quote or a comment (the reader's
# token boundaries); a string runs to its closing quote.
_SEXP_ATOM = re.compile(r'"(?:[^"\\]|\\[\s\S])*"|[^\s()";]+')
_JSON_VALUE = re.compile(r'"(?:[^"\\]|\\.)*"|[^\s{}\[\]:,"]+')


class PatchError(Exception):
    """The text does not hold what the positions say (the file changed underfoot)."""


def _match_at(pattern: re.Pattern[str], text: str, offset: int) -> re.Match[str]:
    """The atom, string or key at ``offset``; PatchError when none starts there."""
    match = pattern.match(text, offset)
    if match is None:
        raise PatchError(f"no atom or key at offset {offset}")
    return match


@record(frozen=True)
class Edit:
    start: int
    end: int
    text: str


class Patcher:
    """Collects edits to ``text`` (of ``syntax`` "sexp" or "json") located by the
    reader's ``positions``; :meth:`result` returns the edited text."""

    def __init__(self, text: str, syntax: str, positions: dict[Path, Position]):
        self.text = text
        self.syntax = syntax
        self.positions = positions
        self.edits: list[Edit] = []
        self._starts = [0] + [m.end() for m in re.finditer(r"\n", text)]
        self._pending: dict[tuple[int, str], list[str]] = {}

    # -- locating ---------------------------------------------------------------
    def offset(self, path: Path) -> int:
        pos = self.positions.get(tuple(path))
        if pos is None:
            raise PatchError(f"no recorded position for {'/'.join(map(str, path))}")
        return self._starts[pos.line - 1] + pos.column - 1

    def has(self, path: Path) -> bool:
        return tuple(path) in self.positions

    def value_span(self, path: Path) -> tuple[int, int]:
        """Where the value at ``path`` is written: a positional atom, the atom of a
        ``(keyword value)`` child (s-expressions), or the value after a key (JSON)."""
        start = self.offset(path)
        if self.syntax == "sexp":
            if self.text[start] == "(":
                keyword = _match_at(_SEXP_ATOM, self.text, start + 1)
                start = self._skip_space(keyword.end())
            match = _SEXP_ATOM.match(self.text, start)
        else:
            if isinstance(path[-1], str):  # an object key: its value follows the colon
                key = _match_at(_JSON_VALUE, self.text, start)
                start = self._skip_space(key.end())
                if self.text[start] != ":":
                    raise PatchError(f"expected ':' after the key at offset {start}")
                start = self._skip_space(start + 1)
            match = _JSON_VALUE.match(self.text, start)
        if match is None:
            raise PatchError(f"no value at {'/'.join(map(str, path))}")
        return match.start(), match.end()

    def value_text(self, path: Path) -> str:
        start, end = self.value_span(path)
        return self.text[start:end]

    def _skip_space(self, offset: int) -> int:
        while offset < len(self.text):
            char = self.text[offset]
            if char.isspace():
                offset += 1
            elif char == ";" and self.syntax == "sexp":
                end = self.text.find("\n", offset)
                offset = len(self.text) if end == -1 else end
            else:
                break
        return offset

    def container_end(self, path: Path) -> int:
        """The offset of the ')' (or '}' / ']') closing the form or container at
        ``path``."""
        start = self.offset(path)
        if self.syntax == "json" and isinstance(path[-1], str):
            start, _ = self._json_container_start(path)
        opening = self.text[start]
        closing = {"(": ")", "{": "}", "[": "]"}.get(opening)
        if closing is None:
            raise PatchError(f"no form or container at {'/'.join(map(str, path))}")
        depth, offset = 0, start
        while offset < len(self.text):
            char = self.text[offset]
            if char == '"':
                match = _match_at(_SEXP_ATOM if self.syntax == "sexp" else _JSON_VALUE,
                                  self.text, offset)
                offset = match.end()
                continue
            if char == ";" and self.syntax == "sexp":
                end = self.text.find("\n", offset)
                offset = len(self.text) if end == -1 else end
                continue
            if char in "([{":
                depth += 1
            elif char in ")]}":
                depth -= 1
                if depth == 0:
                    return offset
            offset += 1
        raise PatchError("unbalanced text")

    def _json_container_start(self, path: Path) -> tuple[int, str]:
        start = self.offset(path)
        key = _match_at(_JSON_VALUE, self.text, start)
        start = self._skip_space(self._skip_space(key.end()) + 1)
        return start, self.text[start]

    def indent_at(self, path: Path) -> str:
        """The whitespace before the node at ``path`` on its line (spaces to its column
        when something else stands before it)."""
        start = self.offset(path)
        line_start = self.text.rfind("\n", 0, start) + 1
        before = self.text[line_start:start]
        return before if not before.strip() else " " * len(before)

    # -- editing ----------------------------------------------------------------
    def replace_value(self, path: Path, text: str) -> None:
        start, end = self.value_span(path)
        self.edits.append(Edit(start, end, text))

    def set_child(self, element: Path, key: str, keyword: str, text: str) -> None:
        """``element``'s ``key`` becomes ``text``: replaced where written, else added
        before the element's closing parenthesis (brace)."""
        path = tuple(element) + (key,)
        if self.has(path):
            self.replace_value(path, text)
            return
        end = self.container_end(element)
        if self.syntax == "sexp":
            self.edits.append(Edit(end, end, f" ({keyword} {text})"))
            return
        # JSON: after the last member, on a line of its own when the members are.
        members = [p for p in self.positions if len(p) == len(path) and p[:-1] == element]
        last = max(members, key=self.offset)
        value_end = self._member_end(last)
        indent = self.indent_at(last)
        if "\n" in self.text[self.offset(last):end] or "\n" in self.text[value_end:end]:
            insert = f",\n{indent}{json.dumps(key)}: {text}"
        else:
            insert = f", {json.dumps(key)}: {text}"
        self.edits.append(Edit(value_end, value_end, insert))

    def _member_end(self, path: Path) -> int:
        """Where the value of the JSON member at ``path`` ends."""
        start, opening = self._json_container_start(path)
        if opening in "{[":
            return self.container_end(path) + 1
        return self.value_span(path)[1]

    def add_item(self, after: Path, form_text: str, json_item: dict | None = None) -> None:
        """A new element on a line of its own after the element at ``after`` (a path to
        an item of a list), with that element's indent."""
        indent = self.indent_at(after)
        if self.syntax == "sexp":
            end = self.container_end(after) + 1
            line_end = self.text.find("\n", end)
            line_end = len(self.text) if line_end == -1 else line_end
            rest = self.text[end:line_end]
            at = line_end if not rest.strip() or rest.strip().startswith(";") else end
            newline = "\r\n" if self.text[line_end - 1:line_end] == "\r" else "\n"
            if newline == "\r\n" and at == line_end:
                at -= 1
            self.edits.append(Edit(at, at, f"{newline}{indent}{form_text}"))
            return
        end = self.container_end(after) + 1
        assert json_item is not None  # a JSON file's caller gives the item's JSON form
        self.edits.append(Edit(end, end, ",\n" + self._json_block(json_item, indent)))

    def add_list(self, after_key: Path, key: str, json_item: dict) -> None:
        """JSON only: a new ``key`` list holding ``json_item`` after the member
        ``after_key`` of the same object."""
        indent = self.indent_at(after_key)
        end = self._member_end(after_key)
        unit = self._indent_unit()
        block = self._json_block(json_item, indent + unit)
        self.edits.append(Edit(end, end, f",\n{indent}{json.dumps(key)}: [\n{block}\n"
                                         f"{indent}]"))

    def _indent_unit(self) -> str:
        match = re.search(r"\n([ \t]+)\S", self.text)
        return match.group(1) if match else "  "

    def _json_block(self, item: dict, indent: str) -> str:
        unit = self._indent_unit()
        lines = json.dumps(item, indent=len(unit) if unit.strip(" ") == "" else unit,
                           ensure_ascii=False).split("\n")
        return "\n".join(indent + line for line in lines)

    def result(self) -> str:
        """The text with every edit made; PatchError when two edits overlap."""
        ordered = sorted(self.edits, key=lambda e: (e.start, e.end))
        for first, second in zip(ordered, ordered[1:]):
            if second.start < first.end:
                raise PatchError("two edits overlap")
        text = self.text
        for edit in reversed(ordered):
            text = text[:edit.start] + edit.text + text[edit.end:]
        return text
