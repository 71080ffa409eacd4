"""The netlist map's own checks, its per-board declarations, and the whole netlist path
under fuzzed input (nothing but located findings may come out)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings, strategies as st
from netlist_helpers import IDEAL_MAP_HEADER, extract_text

from checker.files import load_file
from checker.io.positions import InputErrors
from checker.netlist.mapping import parse_map
from checker.parts.library import load_library


@pytest.mark.parametrize("text, line, column, words", [
    ("(opamp-model A (part gp-bipolar) (pins in+ in+ out v+ v-))", 1, 34,
     "must name in+ exactly once"),
    ("(opamp-model A (part gp-bipolar) (pins in+ in- out v+ vx))", 1, 34, "unknown pin 'vx'"),
    ("(opamp-model A (pins in+ in- out v+ v-))", 1, 1, "needs (part NAME) or (params ...)"),
    ("(opamp-model A (part gp-bipolar))", 1, 1, "needs (pins ...)"),
    ("(opamp-model A (part x) (pins in+ in- out v+ v-))\n"
     "(opamp-model a (part x) (pins in+ in- out v+ v-))", 2, 1, "declared twice"),
    ("(rail vcc 5Q)", 1, 11, "unknown unit or prefix 'Q'"),
    ("(at-net x (source (range 0V 1V) (amplitude 1V)))", 1, 11, "not both"),
    ("(at-net x (load (resistance 10uF)))", 1, 17, "is a capacitance"),
    ("(at-net x)", 1, 1, "needs a (source ...) or a (load ...)"),
    ("(stage-of U1 (require (bandwidth 0Hz)))", 1, 23, "must be greater than zero"),
    ("(opamp-modl A)", 1, 1, "unknown keyword 'opamp-modl' in file; did you mean 'opamp-model'?"),
    ("; nothing but a comment\n", 1, 1, "holds no forms"),
])
def test_map_mistakes_are_located_in_the_map(text, line, column, words):
    with pytest.raises(InputErrors) as errors:
        parse_map(text, "x.netmap")
    problem = errors.value.problems[0]
    assert (problem.path, problem.line, problem.column) == ("x.netmap", line, column)
    assert words in problem.message


def test_a_board_form_declares_for_its_file_only():
    netlist = """* t
V1 vcc 0 5
R1 in fb 10k
R2 fb out 10k
XU1 0 fb vcc 0 out OA
"""
    map_text = IDEAL_MAP_HEADER + "(board other.cir (stage-of U1 (name elsewhere)))\n" \
        "(board board.cir (stage-of U1 (name here)))\n"
    stages, _ = extract_text(netlist, map_text, path="boards/board.cir")
    assert list(stages) == ["here"]
    stages, _ = extract_text(netlist, map_text, path="boards/third.cir")
    assert list(stages) == ["u1"]


CARDS = ["V1 vcc 0 5", "V2 vee 0 -5", "R1 in fb 10k", "R2 fb out 100k", "C1 fb out 10p",
         "XU1 0 fb vcc vee out OA", "XU2 out fb2 vcc vee o2 OA", "R3 fb2 o2 1k",
         "R4 o2 x 1", "Q1 a b c", "XU3 a b OTHER", "L1 x 0 1u", "R5 out out 1",
         "Vs in 0 AC 1", "I1 0 fb 1u", "R6 vcc vee 1k", "C2 x y 1n", ".include z",
         "R7 q", "XU4 a b c d OA", "V3 vcc 0 6", "R8 fb 0 4k7", "+ 1k", "* c"]


@settings(max_examples=150, deadline=None)
@given(cards=st.lists(st.sampled_from(CARDS), max_size=14))
def test_any_board_of_these_cards_reads_or_fails_with_located_findings(cards, tmp_path_factory):
    folder = tmp_path_factory.mktemp("fuzz")
    path = folder / "fuzz.cir"
    path.write_text("* fuzz\n" + "\n".join(cards) + "\n")
    loaded = load_file(str(path), load_library(), parse_map(IDEAL_MAP_HEADER, "m.netmap"))
    if not loaded.ok:
        for finding in loaded.problems:
            assert finding.rule == "input-invalid" and finding.line >= 1
    else:
        assert loaded.stages
