"""Read the s-expression syntax into the plain tree, with a position for every node.

One regular-expression pass checks the structure (balanced parentheses, closed strings,
a sane depth) and builds the nodes as it goes, each with the position of its first
character. Its tokens are sexpdata's exactly, and each token's value is sexpdata's own
reading of it (a bare atom as an int, a float or a symbol; a string's escapes undone),
so the tree is the one sexpdata.parse gives; only the walk over the characters is ours,
because sexpdata keeps no positions and a second pass to attach them cost as much again.
"""

from __future__ import annotations

import difflib
import re
from functools import lru_cache

import sexpdata

from checker.io.grammar import FORMS, Child, Form, positional_slots
from checker.io.positions import (MAX_REPORTED, InputErrors, InputProblem, LineIndex, Path,
                                  Position, reported)
from checker.units import underflows

MAX_DEPTH = 40

# Token boundaries must match sexpdata's exactly: it separates atoms only by ASCII
# whitespace and reads a backslash in an atom as an escape, so other spaces and a bare
# backslash are reported instead of being read.
_TOKEN = re.compile(
    r'(?P<space>[ \t\n\r\f\v]+)|(?P<comment>;[^\n]*)|(?P<open>\()|(?P<close>\))'
    r'|(?P<string>"[^"\\]*(?:\\[\s\S][^"\\]*)*")|(?P<badstring>")'
    r'|(?P<oddspace>[^\S \t\n\r\f\v])|(?P<bad>[\[\]\'`,\\])'
    r'|(?P<atom>[^\s()";\[\]\'`,\\]+)'
)
# sexpdata's reading of a bare atom (int, then float, else a symbol), with none of its
# words (nil, t) special, as parse() is asked to read them
_ATOM = sexpdata.Parser("", nil=None, true=None, false=None).atom
_ESCAPE = re.compile(r"\\[\s\S]")  # a backslash and the character it escapes


def _string(token: str) -> str:
    """A "string" token's value: its escapes undone as sexpdata undoes them."""
    body = token[1:-1]
    if "\\" not in body:
        return body
    return _ESCAPE.sub(lambda match: sexpdata.String.unquote(match.group()), body)


@lru_cache(maxsize=4096)  # net names, values and keywords repeat from file to file
def _atom(token: str):
    """sexpdata's reading of a bare atom, except that a number is written in ASCII
    digits without underscores, as in JSON and the format guide: Python's own readings
    of 1_000 or of other scripts' digits stay text, for the value check to refuse, and
    so does a number too small for a double (1e-400), which Python reads as 0.0."""
    value = _ATOM(token)
    if isinstance(value, sexpdata.Symbol):
        return str(value)
    if "_" in token or not token.isascii():
        return token
    if value == 0.0 and isinstance(value, float) and underflows(token):
        return token  # 1e-400: not 0 as written, for the value check to refuse
    return value


class SNode:
    """A parsed list or atom and where it starts."""

    __slots__ = ("value", "pos")

    def __init__(self, value, pos: Position):
        self.value = value  # list[SNode] for a list; str, int or float for an atom
        self.pos = pos

    @property
    def is_list(self) -> bool:
        return isinstance(self.value, list)


def scan(text: str, path: str, index: LineIndex | None = None
         ) -> tuple[list[SNode], list[InputProblem]]:
    """Check structure and build the top-level nodes in one pass: (nodes, problems).
    The nodes are complete only when there are no problems."""
    index = index or LineIndex(text)
    position = index.position
    top: list[SNode] = []
    filling = [top]  # the lists being filled, innermost last
    problems: list[InputProblem] = []
    open_stack: list[int] = []
    too_deep_reported = False

    def problem(offset: int, message: str) -> None:
        pos = position(offset)
        problems.append(InputProblem(path, pos.line, pos.column, message))

    for match in _TOKEN.finditer(text):
        kind, start = match.lastgroup, match.start()
        if kind == "space" or kind == "comment":
            continue
        if kind == "atom":
            filling[-1].append(SNode(_atom(match.group()), position(start)))
        elif kind == "open":
            node = SNode([], position(start))
            filling[-1].append(node)
            filling.append(node.value)
            open_stack.append(start)
            if len(open_stack) > MAX_DEPTH and not too_deep_reported:
                problem(start, f"nesting deeper than {MAX_DEPTH} levels; the format needs"
                               " at most 4")
                too_deep_reported = True
        elif kind == "close":
            if open_stack:
                open_stack.pop()
                filling.pop()
            else:
                problem(start, "unexpected ')': it closes nothing (an extra parenthesis?)")
        elif kind == "string":
            filling[-1].append(SNode(_string(match.group()), position(start)))
        elif kind == "badstring":
            problem(start, 'unterminated string: this \'"\' is never closed')
            break
        elif kind == "oddspace":
            problem(start, f"unexpected space character U+{ord(match.group()):04X}:"
                           " separate items with plain spaces")
        elif kind == "bad":
            problem(start, f"unexpected character {match.group()!r}: the format uses"
                           " only parentheses, atoms, \"strings\" and ; comments")
    for start in open_stack[:MAX_REPORTED]:
        problem(start, "this '(' is never closed (a missing ')')")
    return top, reported(problems)


def parse(text: str, path: str) -> list[SNode]:
    """Parse ``text`` into top-level SNodes; raise InputErrors on any syntax problem."""
    nodes, problems = scan(text, path)
    if problems:
        raise InputErrors(problems)
    if not nodes:
        raise InputErrors([InputProblem(path, 1, 1, "the file holds no forms: expected"
                                        " (stage NAME ...) or (part NAME ...)")])
    return nodes


def read_sexp(text: str, path: str, forms: dict[str, Form] | None = None
              ) -> tuple[dict, dict[Path, Position]]:
    """Parse and convert an s-expression file to (tree, positions).

    ``forms`` is the grammar table to convert by (the stage format's by default); another
    file kind of ours, such as the netlist map, passes its own table in the same style.
    """
    nodes = parse(text, path)
    converter = _Converter(path, FORMS if forms is None else forms)
    tree = converter.document(nodes)
    if converter.problems:
        raise InputErrors(reported(converter.problems))
    return tree, converter.positions


class _Converter:
    """Walks SNodes by the grammar table, building the tree and its positions."""

    def __init__(self, path: str, forms: dict[str, Form]):
        self.path = path
        self.forms = forms
        self.positions: dict[Path, Position] = {(): Position(1, 1)}
        self.problems: list[InputProblem] = []

    def fail(self, pos: Position, message: str) -> None:
        self.problems.append(InputProblem(self.path, pos.line, pos.column, message))

    def document(self, nodes: list[SNode]) -> dict:
        tree: dict = {}
        self.children(self.forms["document"], "file", nodes, tree, ())
        return tree

    def children(self, form: Form, context: str, nodes: list[SNode], tree: dict,
                 path: Path) -> None:
        for node in nodes:
            if not node.is_list or not node.value or node.value[0].is_list:
                self.fail(node.pos, f"expected a (keyword ...) form in {context},"
                                    f" found {_show(node)}")
                continue
            keyword = node.value[0].value
            if not isinstance(keyword, str):
                self.fail(node.pos, f"expected a keyword in {context}, found {keyword!r}")
                continue
            child = form.children.get(keyword)
            if child is None:
                child = Child(keyword, "unknown")
                # past the problems listed, only the count is shown: no search for a hint
                hint = _nearest(keyword, form.children) \
                    if len(self.problems) < MAX_REPORTED else ""
                self.fail(node.pos, f"unknown keyword {keyword!r} in {context}{hint}")
                continue
            if child.repeated:
                items = tree.setdefault(child.key, [])
                item_path = path + (child.key, len(items))
                items.append(None)
            else:
                if child.key in tree:
                    self.fail(node.pos, f"({keyword} ...) appears twice in {context}")
                    continue
                item_path = path + (child.key,)
            self.positions[item_path] = node.pos
            value = self.value(child, keyword, node, item_path)
            if child.repeated:
                tree[child.key][item_path[-1]] = value
            else:
                tree[child.key] = value

    def value(self, child: Child, keyword: str, node: SNode, path: Path):
        args = node.value[1:]
        if child.shape in ("scalar", "pair"):
            want = 1 if child.shape == "scalar" else 2
            atoms = [a for a in args if not a.is_list]
            if len(atoms) != want or len(args) != want:
                example = "VALUE" if want == 1 else "LOW HIGH"
                self.fail(node.pos, f"({keyword} ...) takes {want} value"
                                    f"{'s' if want > 1 else ''}: ({keyword} {example})")
                return None
            if want == 1:
                return atoms[0].value
            for i, atom in enumerate(atoms):
                self.positions[path + (i,)] = atom.pos
            return [a.value for a in atoms]
        return self.form(self.forms[child.shape], keyword, node, args, path)

    def form(self, form: Form, keyword: str, node: SNode, args: list[SNode],
             path: Path) -> dict:
        tree: dict = {}
        name = keyword
        rest = list(args)
        for key, count, optional in positional_slots(form):
            atoms: list[SNode] = []
            while rest and not rest[0].is_list and len(atoms) < count:
                atoms.append(rest.pop(0))
            if len(atoms) < count:
                if optional and not atoms:
                    continue
                fields = " ".join(" ".join([s[0].upper().rstrip("S")] * s[1])
                                  for s in positional_slots(form))
                self.fail(node.pos, f"({keyword} ...) is missing its {key}:"
                                    f" expected ({keyword} {fields} ...)")
                return tree
            self.positions[path + (key,)] = atoms[0].pos
            if count == 1:
                tree[key] = atoms[0].value
            else:
                tree[key] = [a.value for a in atoms]
                for i, atom in enumerate(atoms):
                    self.positions[path + (key, i)] = atom.pos
            if key in ("name", "ref") and isinstance(atoms[0].value, str):
                name = f"{keyword} {atoms[0].value}"
        stray = [a for a in rest if not a.is_list]
        for atom in stray[:1]:
            self.fail(atom.pos, f"unexpected value {_show(atom)} in {name}: every further"
                                " item is a (keyword ...) form")
        self.children(form, name, [a for a in rest if a.is_list], tree, path)
        return tree


def _nearest(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    if close:
        return f"; did you mean {close[0]!r}?"
    return f"; expected one of: {', '.join(sorted(choices))}"


def _show(node: SNode) -> str:
    if node.is_list:
        return "a list"
    return repr(node.value)
