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

_TOKEN = re.compile(r'"(?:[^"\\]|\\.)*"|[{}\[\]:,]|[^\s{}\[\]:,"]+')
MAX_DEPTH = 40


def read_json(text: str, path: str) -> tuple[dict, dict[Path, Position]]:
    """Parse a JSON stage file to (tree, positions); raise InputErrors on bad input."""
    if not text.strip():
        raise InputErrors([InputProblem(path, 1, 1, "the file is empty: expected a JSON"
                                        ' object such as {"stages": [...]}')])
    try:
        tree = json.loads(text, parse_constant=_reject_constant)
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
    return tree, positions


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
