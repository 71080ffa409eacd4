"""Line wrapping for the terminal report: a wrapped line keeps its indent (a hanging
indent under the finding's head), a value is never split from its unit, and a bracketed
element list is never broken inside. Styles survive the wrap (rich ``Text.divide``).
Output that is not a terminal is not wrapped: one finding part per line, for grep."""

from __future__ import annotations

import re

from rich.cells import cell_len
from rich.console import Console
from rich.text import Text

# A space after a number and before a unit (with its SI prefix), a percent or a degree.
_UNIT_SPACE = re.compile(
    r"(?<=[\d.]) (?=(?:[fpnuµmkMGTP]?(?:Ω|V|A|Hz|F|H|W|s|S)(?![A-Za-z])|%|dB|°|ppm|×))")


# A space after a mark, a comparison or a short label, which belong to what follows
# (✓ gain, ≥ 45°, ζ 0.21, BW 31 kHz).
_MARK_SPACE = re.compile(r"(?<=[✓✗⚠≥≤±…ζ]) | (?=…)|(?:(?<=\bRin)|(?<=\bBW)|(?<=\bPM)|(?<=\bgain)|(?<=\bout)) (?=[-\d])")


def _glued(plain: str) -> set[int]:
    """Offsets of the spaces a line must not break at."""
    glued = {m.start() for m in _UNIT_SPACE.finditer(plain)}
    glued |= {m.start() for m in _MARK_SPACE.finditer(plain)}
    depth = 0
    for i, char in enumerate(plain):
        if char == "[":
            depth += 1
        elif char == "]":
            depth = max(depth - 1, 0)
        elif char == " " and depth:
            glued.add(i)
    return glued


def break_offsets(plain: str, width: int, hang: int) -> list[int]:
    """Where to start each continuation line of ``plain`` so no line passes ``width``
    cells (a continuation is indented by ``hang``); a word too long for a line stands
    alone on it."""
    glued = _glued(plain)
    lead = len(plain) - len(plain.lstrip(" "))
    breaks = [i for i, char in enumerate(plain) if char == " " and i >= lead and i not in glued
              and i + 1 < len(plain) and plain[i + 1] != " "]
    offsets: list[int] = []
    start, used = 0, 0  # current line's first character, and its indent
    last_fit = None
    for space in breaks + [len(plain)]:
        if used + cell_len(plain[start:space]) <= width:
            last_fit = space
            continue
        if last_fit is not None and last_fit > start:
            offsets.append(last_fit + 1)
            start, used = last_fit + 1, hang
            last_fit = space if used + cell_len(plain[start:space]) <= width else None
        if last_fit is None and space < len(plain):  # a word longer than a line
            offsets.append(space + 1)
            start, used = space + 1, hang
    return offsets


def print_wrapped(console: Console, text: Text, hang: int | None = None) -> None:
    """Print ``text`` wrapped to the console's width with a hanging indent of ``hang``
    spaces (default: the text's own indent); unwrapped where the console does not wrap
    (not a terminal)."""
    if hang is None:
        hang = len(text.plain) - len(text.plain.lstrip(" "))
    if console.soft_wrap or console.width <= hang + 20:
        console.print(text)
        return
    lines = text.divide(break_offsets(text.plain, console.width, hang))
    for index, line in enumerate(lines):
        line.rstrip()
        if index:
            line = Text(" " * hang) + line
        console.print(line, no_wrap=True, overflow="ignore", crop=False)
