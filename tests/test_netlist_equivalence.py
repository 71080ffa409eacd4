"""Extracted stages against hand-written stage files and against Lcapy.

(1) A board's extracted stages give the same figures as the equivalent stage file
written by hand (to 1e-9 relative), and as the stage file ``ampcheck extract`` writes.
(2) The DC gain of every extracted stage agrees with Lcapy's nodal analysis of the same
netlist, each op-amp there a voltage-controlled voltage source of the same gain.
"""

from __future__ import annotations

import numpy as np
import pytest
from netlist_helpers import IDEAL_MAP_HEADER, extract_text

from checker.analysis import AnalysisOptions, analyse
from checker.build import build_stages
from checker.engine import RunOptions, check_stages, load_rules
from checker.io.load import parse_text
from checker.netlist.stage_writer import stage_file_text
from checker.parts.library import load_library

RELATIVE = 1e-9

BOARD = """* Heronpost-style test board: inverting gain, then a Sallen-Key low-pass
V1 vcc 0 DC 12
V2 0 vee 12
R1 in fb 10k
R2 fb out1 47k
C1 fb out1 10p
XU1 0 fb vcc vee out1 OPA
R3 out1 n1 22k
R4 n1 n2 22k
C2 n1 out2 100n
C3 n2 0 47n
XU2 n2 out2 vcc vee out2 OPA
"""
BOARD_MAP = """(version 1)
(opamp-model OPA (part gp-bipolar) (pins in+ in- v+ v- out))
(at-net in (source (range -0.5V 0.5V) (band 1Hz 1kHz) (impedance 1k)))
(at-net out2 (load (resistance 10k) (capacitance 1n)))
(stage-of U1 (name gain) (require (gain -4.7)))
(stage-of U2 (name smooth))
"""
# The same two stages written by hand in the stage format. The second stage's source is
# the first stage's output over its range: -4.7 x (-0.5 V .. 0.5 V) with gp-bipolar's
# finite gain, which the extraction takes from the first stage's analysis; here it is
# filled in from the same analysis below ({low}, {high}).
BY_HAND = """(version 1)
(stage gain (ground gnd)
  (supply vcc 12V) (supply vee -12V)
  (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out1) (v+ vcc) (v- vee))
  (resistor R1 in fb 10k) (resistor R2 fb out1 47k) (capacitor C1 fb out1 10p)
  (source in (range -0.5V 0.5V) (band 1Hz 1kHz) (impedance 1k))
  (load out1 (feeds smooth out1))
  (require (gain -4.7)))
(stage smooth (ground gnd)
  (supply vcc 12V) (supply vee -12V)
  (opamp U2 (part gp-bipolar) (in+ n2) (in- out2) (out out2) (v+ vcc) (v- vee))
  (resistor R3 out1 n1 22k) (resistor R4 n1 n2 22k)
  (capacitor C2 n1 out2 100n) (capacitor C3 n2 gnd 47n)
  (source out1 (range {low!r} {high!r}))
  (load out2 (resistance 10k) (capacitance 1n)))
"""


def by_hand_stages(extracted):
    source = extracted["smooth"].sources[0]
    text = BY_HAND.format(low=source.low, high=source.high)
    return {s.name: s for s in build_stages(parse_text(text, "by-hand.stage"), load_library())}


def assert_same(a, b):
    """Equal to RELATIVE of the figure's size (its largest magnitude over the grid)."""
    a, b = np.asarray(a, dtype=complex), np.asarray(b, dtype=complex)
    scale = max(float(np.max(np.abs(b))), 1e-300)
    assert np.all(np.abs(a - b) <= RELATIVE * scale), (a, b)


def figures_of(stages):
    return {name: analyse(stage, AnalysisOptions(stray_capacitance_f=1e-12))
            for name, stage in stages.items()}


def compare_figures(ours, theirs):
    assert set(ours) == set(theirs)
    for name in ours:
        a, b = ours[name], theirs[name]
        assert_same(a.frequencies_hz, b.frequencies_hz)
        for sa, sb in zip(a.sources, b.sources, strict=True):
            assert_same(sa.gain, sb.gain)
            assert_same(sa.gain_from_source, sb.gain_from_source)
            assert_same(sa.input_impedance, sb.input_impedance)
            assert_same([sa.bandwidth_high_hz or 0], [sb.bandwidth_high_hz or 0])
        for ref in a.loops:
            assert_same(a.loops[ref].loop_gain, b.loops[ref].loop_gain)
            assert_same([a.loops[ref].phase_margin_deg], [b.loops[ref].phase_margin_deg])
            assert_same([a.loops[ref].crossover_hz], [b.loops[ref].crossover_hz])
        assert_same(a.output_impedance, b.output_impedance)
        assert_same([a.output_range.low, a.output_range.high],
                    [b.output_range.low, b.output_range.high])


def test_extracted_stages_give_the_figures_of_the_hand_written_stage_file():
    extracted, _ = extract_text(BOARD, BOARD_MAP)
    compare_figures(figures_of(extracted), figures_of(by_hand_stages(extracted)))


def test_extracted_stages_give_the_findings_of_the_hand_written_stage_file():
    extracted, _ = extract_text(BOARD, BOARD_MAP)
    rules = list(load_rules().values())

    def found(stages):
        _figures, findings = check_stages(list(stages.values()), rules, RunOptions())
        return {name: sorted((f.rule, f.message, f.elements) for f in items
                             if f.rule not in ("not-analysed", "boundary-assumed"))
                for name, items in findings.items()}

    assert found(extracted) == found(by_hand_stages(extracted))


def test_the_stage_file_extract_writes_gives_the_same_figures():
    extracted, extraction = extract_text(BOARD, BOARD_MAP)
    text = stage_file_text(extraction, "board.cir", "board.netmap")
    written = {s.name: s for s in build_stages(parse_text(text, "board.stage"), load_library())}
    compare_figures(figures_of(extracted), figures_of(written))
    assert "; board.cir:4 R1 (10k)" in text
    assert "(resistor R2 fb out1 47k)" in text


# -- DC gains against Lcapy -------------------------------------------------------------
A0 = 1e6  # the open-loop gain of IDEAL_MAP_HEADER's op-amp, and of Lcapy's sources

LCAPY_BOARDS = {
    "chain": ("""* inverting gain then non-inverting gain
V1 vcc 0 DC 12
V2 vee 0 DC -12
R1 in fb 10k
R2 fb out1 47k
XU1 0 fb vcc vee out1 OA
R3 out1 p 10k
R4 p 0 30k
R5 m 0 2k
R6 m out2 6k
XU2 p m vcc vee out2 OA
""", ["in"]),
    "in-amp": ("""* three-op-amp instrumentation amplifier
V1 vcc 0 DC 12
V2 vee 0 DC -12
XU1 inp n1 vcc vee o1 OA
XU2 inn n2 vcc vee o2 OA
R1 o1 n1 10k
RG n1 n2 2.2k
R2 n2 o2 10k
R3 o1 d1 10k
R4 d1 out 20k
R5 o2 d2 10k
R6 d2 0 20k
XU3 d2 d1 vcc vee out OA
""", ["inn", "inp"]),
    "composite": ("""* composite amplifier with a divider bias on in+
V1 vcc 0 DC 12
V2 vee 0 DC -12
R7 vcc bias 100k
R8 bias 0 100k
R1 in fb 1k
R2 fb out 10k
XU1 bias fb vcc vee out OA
R3 out m 10k
R9 m c2 20k
XU2 0 m vcc vee c2 OA
R4 c2 fb 100k
""", ["in"]),
}


def lcapy_netlist(text: str, driven: dict[str, float]) -> str:
    """The same netlist for Lcapy: rails at 0 V (superposition: the gain of one source is
    its transfer with the others at zero), each op-amp instance (pins in+ in- v+ v- out)
    as E NAME out 0 opamp in+ in- A0, and a source on each off-board input."""
    lines = []
    for line in text.splitlines()[1:]:
        words = line.split()
        if not words:
            continue
        if words[0].upper().startswith("X"):
            in_pos, in_neg, _vp, _vn, out = words[1:6]
            lines.append(f"E{words[0][1:]} {out} 0 opamp {in_pos} {in_neg} {A0!r}")
        elif words[0].upper().startswith("V"):
            lines.append(f"{words[0]} {words[1]} {words[2]} 0")
        else:
            lines.append(line)
    lines += [f"Vt{i} {net} 0 {value!r}" for i, (net, value) in enumerate(driven.items())]
    return "\n".join(lines)


def lcapy_dc(text: str, driven: dict[str, float], net: str) -> float:
    import lcapy

    return float(lcapy.Circuit(lcapy_netlist(text, driven))[net].V.dc.sympy)


@pytest.mark.parametrize("board", sorted(LCAPY_BOARDS))
def test_dc_gains_of_extracted_stages_agree_with_lcapy(board):
    pytest.importorskip("lcapy")
    text, inputs = LCAPY_BOARDS[board]
    stages, _ = extract_text(text, IDEAL_MAP_HEADER)
    checked = 0
    for stage in stages.values():
        figures = analyse(stage, AnalysisOptions())
        for i, source in enumerate(stage.sources):
            ours = figures.dc_transfer(stage.output_net, ("source", i))
            if source.net in inputs:
                # expected: Lcapy, DC nodal analysis of the same netlist with this input
                # at 1 V and the others at 0 V
                driven = {net: 1.0 if net == source.net else 0.0 for net in inputs}
                expected = lcapy_dc(text, driven, stage.output_net)
            else:
                # a stage fed by another: Lcapy's V(out)/V(its input) on the whole board,
                # the feeding op-amp an ideal-output controlled source
                driven = {net: 1.0 for net in inputs}
                expected = lcapy_dc(text, driven, stage.output_net) / \
                    lcapy_dc(text, driven, source.net)
            assert ours == pytest.approx(expected, rel=RELATIVE)
            checked += 1
    assert checked == {"chain": 2, "in-amp": 2, "composite": 1}[board]
