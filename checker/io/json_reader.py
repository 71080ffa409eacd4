"""Read the JSON syntax into the plain tree, with a position for every node.

The json module keeps no positions, so after it has parsed the text one regular-
expression pass over its tokens records where each container, key and array item starts,
keyed by its path in the tree. Duplicate keys, which json.loads would silently merge,
are caught in the same pass.
"""

from __future__ import annotations

import json
import re

from checker.io.positions import InputErrors, InputProblem, LineIndex, Path, Position
from checker.units import underflows

_TOKEN = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"|[{}\[\]:,]|[^\s{}\[\]:,"]+')
MAX_DEPTH = 40


class _LongInteger(int):
    """A JSON integer of more digits than Python converts (thousands): an int far beyond
    any float, shown as the file wrote it, so the value check reports it ("beyond the
    range of a number") at its own position instead of the parser at 1:1."""

    text: str

    def __new__(cls, text: str):
        value = super().__new__(cls, -10 ** 400 if text.startswith("-") else 10 ** 400)
        value.text = text
        return value

    def __str__(self) -> str:
        return self.text

    __repr__ = __str__


def _integer(text: str) -> int:
    return int(text) if len(text) <= 4000 else _LongInteger(text)


def _real(text: str) -> float | str:
    """A JSON real; one too small for a double (1e-400, which reads as 0.0) stays its
    text, for the value check to refuse rather than pass as 0."""
    value = float(text)
    return text if value == 0.0 and underflows(text) else value


def read_json(text: str, path: str) -> tuple[dict, dict[Path, Position]]:
    """Parse a JSON stage file to (tree, positions); raise InputErrors on bad input."""
    if not text.strip():
        raise InputErrors([InputProblem(path, 1, 1, "the file is empty: expected a JSON"
                                        ' object such as {"stages": [...]}')])
    try:
        tree = json.loads(text, parse_constant=_reject_constant, parse_int=_integer,
                          parse_float=_real)
    except json.JSONDecodeError as error:
        raise InputErrors([InputProblem(path, error.lineno, error.colno,
                                        f"invalid JSON: {error.msg}")]) from None
    except ValueError as error:
        pos = _constant_position(text)
        raise InputErrors([InputProblem(path, pos.line, pos.column, str(error))]) from None
    except RecursionError:
        too_deep = _too_deep(text, path)
        raise InputErrors([too_deep or InputProblem(path, 1, 1, "nesting too deep to read")]
                          ) from None
    positions, problems = index_positions(text, path)
    if problems:
        raise InputErrors(problems)
    if not isinstance(tree, dict):
        raise InputErrors([InputProblem(path, 1, 1, "expected a JSON object at the top"
                                        ' level, such as {"stages": [...]}')])
    halves = [_half_pair_problem(path, at, positions) for at in _half_pairs(tree, ())]
    if halves:
        raise InputErrors(halves)
    return tree, positions


_SURROGATE = re.compile("[\ud800-\udfff]")


def _half_pairs(node, at: Path):
    """Paths of the text (keys and strings) holding half of a UTF-16 surrogate pair: a
    \\ud800-\\udfff escape without its other half, which no UTF-8 file can hold, so
    the stage could be neither written back nor converted."""
    if isinstance(node, str):
        if _SURROGATE.search(node):
            yield at
    elif isinstance(node, dict):
        for key, value in node.items():
            if _SURROGATE.search(key):
                yield at
            yield from _half_pairs(value, at + (key,))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _half_pairs(value, at + (index,))


def _half_pair_problem(path: str, at: Path, positions: dict) -> InputProblem:
    while at and at not in positions:
        at = at[:-1]
    pos = positions.get(at, Position(1, 1))
    return InputProblem(path, pos.line, pos.column, "a \\u escape gives half of a"
                        " surrogate pair (\\ud800 to \\udfff without its other half):"
                        " not a character; write the character itself")


def _too_deep(text: str, path: str) -> InputProblem | None:
    """A problem at the first '[' or '{' nested deeper than MAX_DEPTH, if any."""
    depth = 0
    for match in _TOKEN.finditer(text):
        token = match.group()
        if token in "{[":
            depth += 1
            if depth > MAX_DEPTH:
                return _deep_at(LineIndex(text).position(match.start()), path)
        elif token in "}]":
            depth -= 1
    return None


def _deep_at(pos: Position, path: str) -> InputProblem:
    return InputProblem(path, pos.line, pos.column, f"nesting deeper than {MAX_DEPTH} levels;"
                        " the format needs at most 6")


def _constant_position(text: str) -> Position:
    """Where the first NaN, Infinity or -Infinity outside a string stands."""
    for match in _TOKEN.finditer(text):
        if match.group().lstrip("-") in ("NaN", "Infinity"):
            return LineIndex(text).position(match.start())
    return Position(1, 1)


def _reject_constant(name: str):
    raise ValueError(f"{name} is not a value: write a finite number")


def index_positions(text: str, path: str) -> tuple[dict[Path, Position], list[InputProblem]]:
    """Positions of every container, key and array item of valid JSON ``text``."""
    index = LineIndex(text)
    positions: dict[Path, Position] = {}
    problems: list[InputProblem] = []
    # Each frame: [path of container, is_object, next array index, current key, keys seen]
    stack: list[list] = []
    pending_key: str | None = None
    tokens = _TOKEN.finditer(text)
    for match in tokens:
        token, start = match.group(), match.start()
        if token in ",:":
            continue
        if token in "}]":
            stack.pop()
            continue
        frame = stack[-1] if stack else None
        if frame is not None and frame[1] and pending_key is None:
            # A string in key position of an object.
            key = token[1:-1] if "\\" not in token else json.loads(token)
            if key in frame[4]:
                pos = index.position(start)
                problems.append(InputProblem(path, pos.line, pos.column,
                                             f"key {key!r} appears twice in one object"))
            frame[4].add(key)
            pending_key = key
            positions[frame[0] + (key,)] = index.position(start)
            continue
        if frame is None:
            value_path: Path = ()
        elif frame[1]:
            value_path = frame[0] + (pending_key,)
            pending_key = None
        else:
            value_path = frame[0] + (frame[2],)
            frame[2] += 1
            positions[value_path] = index.position(start)
        if token in "{[":
            if not frame or not frame[1]:
                positions[value_path] = index.position(start)
            stack.append([value_path, token == "{", 0, None, set()])
            if len(stack) > MAX_DEPTH:  # one pass checks the depth too
                return positions, [_deep_at(index.position(start), path)]
    return positions, problems
