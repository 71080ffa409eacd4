"""`ampcheck parts` stays readable on 100- and 80-column screens: no name is cut and
input range, absolute maximum supply, current noise and second pole are shown."""

from __future__ import annotations

import io

import pytest
from rich.console import Console

from checker.parts.library import load_library
from checker.report.summary import print_parts


@pytest.mark.parametrize("width", [100, 80, 200])
def test_every_name_whole_and_the_new_columns_present(width):
    out = Console(width=width, file=io.StringIO(), color_system=None)
    library = load_library([])
    print_parts(library, out)
    text = out.file.getvalue()
    assert all(len(line) <= width for line in text.splitlines())
    for name in library:
        assert name in text
    for heading in ("in range", "abs max", "in /√Hz", "pole 2"):
        assert heading in text
    # cmos-rrio values from checker/parts/generic.parts
    assert "-100 mV…100 mV" in text and "5 fA" in text and "6 V" in text
