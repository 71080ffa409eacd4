"""The netlist reader: records and positions, the syntax subset, located errors, the
same files read by Lcapy, and bounds (fuzzed text never escapes as anything but a
located InputErrors)."""

from __future__ import annotations

import pathlib

import pytest
from hypothesis import given, settings, strategies as st

from checker.io.netlist_reader import (MAX_CARDS, Instance, OtherCard, SourceCard,
                                       TwoTerminal, read_netlist)
from checker.io.netlist_values import parse_netlist_number
from checker.io.positions import InputErrors

BOARD = """* front end of an invented board
V1 VCC 0 DC 5
V2 vee 0 -5 ; the negative rail
R1 in fb 10k
R2 fb
+ OUT 100k tc1=0.001
c1 fb out 10p
XU1 0 fb vcc vee out OPAMP_G PARAMS: gain=2
Vs in 0 DC 0 AC 1 SIN(0 0.1 1k)
Q1 a b c npn
.subckt OPAMP_G inp inn vp vn o
E1 o 0 inp inn 1e5
.ends OPAMP_G
.include models.lib
.end
R99 after the end 1
"""


def cards(text: str, path: str = "board.cir"):
    return {card.name.text: card for card in read_netlist(text, path).cards}


def test_the_first_line_is_the_title_and_end_stops_reading():
    netlist = read_netlist(BOARD, "board.cir")
    assert netlist.title == "* front end of an invented board"
    assert "R99" not in {c.name.text for c in netlist.cards}


def test_a_two_terminal_element_has_its_nodes_value_and_positions():
    r1 = cards(BOARD)["R1"]
    assert isinstance(r1, TwoTerminal)
    assert [w.text for w in r1.nodes] == ["in", "fb"]
    assert (r1.value.text, r1.value.line, r1.value.column) == ("10k", 4, 10)
    assert (r1.line, r1.column) == (4, 1)


def test_a_continuation_line_joins_its_card_and_keeps_each_words_line():
    r2 = cards(BOARD)["R2"]
    assert [w.text for w in r2.nodes] == ["fb", "OUT"]
    assert (r2.nodes[1].line, r2.nodes[1].column) == (6, 3)
    assert r2.value.text == "100k" and r2.value.line == 6
    assert [(p.name.text, p.value.text) for p in r2.parameters] == [("tc1", "0.001")]


def test_names_keep_their_spelling_and_compare_case_folded():
    c1 = cards(BOARD)["c1"]
    assert c1.letter == "C"
    assert c1.nodes[1].key == cards(BOARD)["R2"].nodes[1].key == "out"


def test_a_subcircuit_instance_reads_nodes_then_its_subcircuit_then_parameters():
    xu1 = cards(BOARD)["XU1"]
    assert isinstance(xu1, Instance)
    assert [w.text for w in xu1.nodes] == ["0", "fb", "vcc", "vee", "out"]
    assert xu1.subcircuit.text == "OPAMP_G"
    assert [(p.name.text, p.value.text) for p in xu1.parameters] == [("gain", "2")]


def test_an_instance_without_params_keyword_still_separates_parameters():
    xu1 = cards("t\nXU1 a b c d e OPA gain=2 m=1\n")["XU1"]
    assert xu1.subcircuit.text == "OPA" and len(xu1.nodes) == 5
    assert [p.name.text for p in xu1.parameters] == ["gain", "m"]


def test_sources_read_dc_ac_and_function_parts():
    found = cards(BOARD)
    assert isinstance(found["V1"], SourceCard) and found["V1"].dc.text == "5"
    assert found["V2"].dc.text == "-5"  # the ';' comment is cut
    vs = found["Vs"]
    assert vs.dc.text == "0" and [w.text for w in vs.ac] == ["1"]
    assert vs.function.text == "SIN" and [w.text for w in vs.arguments] == ["0", "0.1", "1k"]


def test_other_letters_are_kept_for_the_caller_to_report():
    q1 = cards(BOARD)["Q1"]
    assert isinstance(q1, OtherCard) and [w.text for w in q1.words] == ["a", "b", "c", "npn"]


def test_subcircuit_bodies_and_dot_commands_are_kept_apart():
    netlist = read_netlist(BOARD, "board.cir")
    assert list(netlist.subcircuits) == ["opamp_g"]
    definition = netlist.subcircuits["opamp_g"]
    assert [w.text for w in definition.pins] == ["inp", "inn", "vp", "vn", "o"]
    assert [c.name.text for c in definition.cards] == ["E1"]
    assert "E1" not in {c.name.text for c in netlist.cards}
    assert [(c.keyword, c.name.line) for c in netlist.commands] == [("include", 14)]


def test_comments_by_star_semicolon_and_dollar_word_but_not_dollar_inside_a_name():
    found = cards("t\n* a comment\nR1 N$1 b 1k $ a comment\nR2 b c 2k;another\n")
    assert [w.text for w in found["R1"].nodes] == ["N$1", "b"]
    assert found["R1"].extras == () and found["R2"].value.text == "2k"


def test_control_blocks_are_skipped():
    found = cards("t\n.control\nrun\nR7 x y z\n.endc\nR1 a b 1k\n")
    assert list(found) == ["R1"]


def test_value_given_as_a_parameter():
    assert cards("t\nR1 a b r=4.7k\n")["R1"].value.text == "4.7k"


@pytest.mark.parametrize("text, line, column, words", [
    ("t\n+ R1 a b 1k\n", 2, 1, "no card before it"),
    ("t\nR1 a b\n", 2, 1, "has no value"),
    ("t\nR1 a\n", 2, 1, "needs two nodes and a value"),
    ("t\nV1 a\n", 2, 1, "needs two nodes"),
    ("t\nX1 a\n", 2, 1, "needs its nodes and the subcircuit"),
    ("t\n.subckt amp a b\nR1 a b 1k\n", 2, 9, "never closed"),
    ("t\n.ends\n", 2, 1, ".ends with no .subckt"),
    ("t\n.subckt\n", 2, 1, ".subckt needs a name"),
    ("t\n5R a b 1k\n", 2, 1, "starts neither an element"),
    ("t\nV1 a 0 SIN(0 1 1k\n", 2, 8, "never closed"),
    ("t\n.subckt a x\n.ends\n.subckt A y\n.ends\n", 4, 9, "defined twice"),
    ("(export (version D))\n", 1, 1, "not a simulator-style netlist"),
])
def test_malformed_netlists_give_located_messages(text, line, column, words):
    with pytest.raises(InputErrors) as errors:
        read_netlist(text, "bad.cir")
    first = errors.value.problems[0]
    assert (first.path, first.line, first.column) == ("bad.cir", line, column)
    assert words in first.message


def test_the_number_of_cards_is_bounded():
    text = "t\n" + "".join(f"R{i} a b 1\n" for i in range(MAX_CARDS + 1))
    with pytest.raises(InputErrors) as errors:
        read_netlist(text, "big.cir")
    assert f"more than {MAX_CARDS} cards" in errors.value.problems[0].message


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(["R1 a b 1k", "+ c", "X1 a b", ".subckt s a", ".ends",
                                 "V1 a 0 SIN(", "*", "", "Q1 a b c", "C1 a a 1", "(",
                                 "=", "R2 = = 1", ".end", "L1 a b 1meg", "X2 a b c d e o",
                                 "\t+", "$", ";"]), max_size=20),
       st.text(max_size=40))
def test_fuzzed_text_reads_or_fails_with_located_problems(lines, noise):
    text = "title\n" + "\n".join(lines) + "\n" + noise
    try:
        read_netlist(text, "fuzz.cir")
    except InputErrors as errors:
        assert errors.problems
        for problem in errors.problems:
            assert problem.path == "fuzz.cir" and problem.line >= 1 and problem.column >= 1


# -- the same files read by Lcapy -----------------------------------------------------
# Files in the subset both readers share: a comment first line (our title, Lcapy's
# comment), R, C, L and V elements, values whose meaning is the same in both (no M or
# MEG: Lcapy reads M as mega), names in one case.
SHARED = {
    "inverting.cir": """* inverting stage
V1 vcc 0 15
V2 vee 0 -15
R1 in fb 4.7k
R2 fb out 47k
C1 fb out 22n
RL out 0 10e3
""",
    "filter.cir": """* an RC ladder
Vs in 0 dc 1
R1 in a 1k
C1 a 0 100n
L1 a b 2.2u
R2 b 0 1.5e3
C2 b 0 4.7p
""",
}


@pytest.mark.parametrize("name", sorted(SHARED))
def test_elements_nodes_and_values_agree_with_lcapy_on_the_same_file(name, tmp_path):
    lcapy = pytest.importorskip("lcapy")
    path = tmp_path / name
    path.write_text(SHARED[name])
    ours = {c.name.text: c for c in read_netlist(path.read_text(), str(path)).cards}
    # expected: Lcapy's netlist reader (lcapy.Circuit) on the same file
    theirs = {n: e for n, e in lcapy.Circuit(str(path)).elements.items()
              if not n.startswith("XX")}
    assert set(ours) == set(theirs)
    for element_name, card in ours.items():
        element = theirs[element_name]
        assert [w.text for w in card.nodes] == [node.name for node in element.nodes]
        if isinstance(card, TwoTerminal):
            expected = float(getattr(element, card.letter).sympy)
            got = parse_netlist_number(card.value.text)
        else:
            expected = float(element.Voc.dc.sympy)
            got = parse_netlist_number(card.dc.text)
        assert got == pytest.approx(expected, rel=1e-12)


def test_where_the_conventions_differ_m_is_read_our_way_not_lcapys():
    lcapy = pytest.importorskip("lcapy")
    # Lcapy (lcapy.Circuit) reads 1M as a megohm; the netlist convention (SPICE3 user's
    # manual, section 2.1) reads it as a milliohm, and so does this reader.
    assert float(lcapy.Circuit("R1 a 0 1M\nR2 a 0 1").R1.R.sympy) == 1e6
    assert parse_netlist_number(cards("t\nR1 a 0 1M\n")["R1"].value.text) == 1e-3


def test_the_sample_netlist_reads(tmp_path):
    path = pathlib.Path(__file__).resolve().parents[1] / "samples/netlist/heronpost-level.cir"
    netlist = read_netlist(path.read_text(), str(path))
    assert {c.name.text for c in netlist.cards} >= {"XU1", "XU2", "XU3", "R9", "Q1"}
