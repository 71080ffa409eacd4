"""The terminal report wraps as a reader expects (project's own layout): a wrapped line
keeps its block's indent, a value stays with its unit, a bracketed element list and a
requirement's mark stay whole, and no line passes the terminal's width."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from rich.cells import cell_len

from checker.report.wrap import break_offsets

ROOT = Path(__file__).resolve().parent.parent
ANSI = re.compile(r"\x1b\[[0-9;]*m")
UNIT_START = re.compile(r"^\s*(?:[fpnuµmkMGTP]?(?:Ω|V|A|Hz|F|H|W|s)\b|%|dB)")


def _pieces(plain: str, width: int, hang: int) -> list[str]:
    offsets = break_offsets(plain, width, hang)
    bounds = [0, *offsets, len(plain)]
    return [plain[a:b] for a, b in zip(bounds, bounds[1:])]


def test_a_value_keeps_its_unit_and_a_list_its_brackets():
    plain = "      the 91.7 kΩ at its input [U1, R2, C1] and 9 pF there and 10 %"
    for width in range(20, 70):
        for piece in _pieces(plain, width, 6):
            assert not UNIT_START.match(piece), (width, piece)
            assert piece.count("[") == piece.count("]"), (width, piece)


def test_no_line_passes_the_width_unless_one_word_does():
    plain = "      " + " ".join(["word"] * 40)
    for width in (30, 47, 80):
        pieces = _pieces(plain, width, 6)
        assert len(pieces) > 1
        assert all(6 * (i > 0) + len(p.rstrip()) <= width for i, p in enumerate(pieces))


@pytest.mark.parametrize("columns", [80, 120])
def test_the_samples_read_at_a_terminal_width(columns):
    """FORCE_COLOR=1 through a pipe makes rich treat the pipe as a terminal of COLUMNS."""
    env = dict(os.environ, COLUMNS=str(columns), FORCE_COLOR="1")
    env.pop("NO_COLOR", None)
    run = subprocess.run([sys.executable, "-m", "checker", "check", "samples/", "--fail-on",
                          "never", "--no-config"], capture_output=True, text=True, cwd=ROOT,
                         env=env)
    assert run.returncode == 0, run.stderr
    lines = ANSI.sub("", run.stdout).splitlines()
    assert len(lines) > 50
    previous = ""
    for line in lines:
        assert cell_len(line) <= columns or " " not in line.strip(), line
        assert not UNIT_START.match(line) or not previous.rstrip()[-1:].isdigit(), \
            (previous, line)
        if previous.startswith("      ") and line.strip() and not line.startswith("  "):
            raise AssertionError(f"a continuation lost its indent: {line!r}")
        previous = line
    assert not any(re.search(r"[✓✗]$", line.rstrip()) for line in lines)
