"""File positions: offsets to (line, column), and the problem record every reader emits."""

from __future__ import annotations

import bisect
from checker.record import record

Path = tuple  # a path into the plain tree: ("stages", 0, "resistors", 1, "value")


@record(frozen=True)
class Position:
    """A 1-based line and column in a file."""

    line: int
    column: int


@record(frozen=True)
class InputProblem:
    """Something wrong with an input file, located as precisely as the reader could."""

    path: str
    line: int
    column: int
    message: str
    element: str | None = None

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}: {self.message}"


MAX_REPORTED = 10  # problems listed per file: the first ones, then how many more


def reported(problems: list[InputProblem]) -> list[InputProblem]:
    """The first MAX_REPORTED problems, and where there are more, one more that says
    how many were left out (at the first of them), so none is dropped silently."""
    if len(problems) <= MAX_REPORTED:
        return list(problems)
    first_left, more = problems[MAX_REPORTED], len(problems) - MAX_REPORTED
    return [*problems[:MAX_REPORTED], InputProblem(
        first_left.path, first_left.line, first_left.column,
        f"and {more} more problem{'s' if more != 1 else ''} from here on, not listed: mend"
        f" the first {MAX_REPORTED} and check again")]


class InputErrors(Exception):
    """Raised by a reader or the builder with every problem it found in one file."""

    def __init__(self, problems: list[InputProblem]):
        super().__init__("; ".join(str(p) for p in problems))
        self.problems = problems


class LineIndex:
    """Maps character offsets of a text to 1-based (line, column) with one bisect."""

    def __init__(self, text: str):
        self._starts = [0]
        start = text.find("\n")
        while start != -1:
            self._starts.append(start + 1)
            start = text.find("\n", start + 1)

    def position(self, offset: int) -> Position:
        line = bisect.bisect_right(self._starts, offset)
        return Position(line, offset - self._starts[line - 1] + 1)


def locate(positions: dict[Path, Position], path: Path) -> Position:
    """The position of ``path``, or of its nearest ancestor that has one (else 1:1)."""
    path = tuple(path)
    while path:
        if path in positions:
            return positions[path]
        path = path[:-1]
    return positions.get((), Position(1, 1))
