"""Solution's reuse of its solves: a column solved before at the same frequencies is read
back, and the adjoint node transfers equal the direct solve's node row.

The reference for every value is a direct dense solve of the whole system
(mna.assemble + mna.system_stack + numpy.linalg.solve) at the same frequencies; the
adjoint identity e^T Y^-1 b = (Y^-T e)^T b holds to rounding (plain linear algebra).
"""

from __future__ import annotations

import numpy as np
import pytest
from analysis_helpers import analyse_text, params, rails

from checker.analysis.mna import GMIN_SIEMENS, assemble, system_stack, with_ties
from checker.analysis.solution import OUTPUT, Excitation

# A non-inverting stage biased from the rails: R3 and R4 divide vcc to the input, so
# resistors touch the rail nodes (the rows the AC system drops).
BIASED = f"""(stage biased {rails()}
  (opamp U1 {params(open_loop_gain=2e5, gbw="1MHz")} (in+ p) (in- fb) (out out)
    (v+ vcc) (v- vee))
  (capacitor C1 in p 1u) (resistor R3 vcc p 100k) (resistor R4 p gnd 100k)
  (resistor Rg fb gnd 10k) (resistor Rf fb out 47k) (capacitor Cf fb out 100p)
  (source in (range -0.1V 0.1V) (band 10Hz 20kHz)) (load out (resistance 10k)))"""

FREQUENCIES = np.geomspace(10.0, 1e6, 23)


def direct(figures, B: np.ndarray) -> np.ndarray:
    """X (F, n, m) from the whole system, no reduction and no cache."""
    solution = figures.solution
    s = 2j * np.pi * FREQUENCIES
    Y = system_stack(solution.ac_matrices, solution.open_loop_gains(FREQUENCIES), s)
    return np.linalg.solve(Y, np.broadcast_to(B, (FREQUENCIES.size,) + B.shape))


def test_a_column_solved_again_reads_back_the_same_values_in_its_place():
    figures = analyse_text(BIASED)
    solution = figures.solution
    names = [Excitation.source(0), OUTPUT, Excitation.loop("U1")]
    first = solution.solve_excitations(FREQUENCIES, names[:1])
    again = solution.solve_excitations(FREQUENCIES, [names[1], names[0], names[2], names[0]])
    reference = direct(figures, solution.excitations(names))
    # the AC solve leaves the supplies' currents unsolved (solution.py): compare the rest
    rows = [r for r in range(figures.circuit.size) if r not in solution.reduced[2]]
    assert np.allclose(first[:, rows, 0], reference[:, rows, 0], rtol=1e-9, atol=1e-15)
    for column, k in enumerate([1, 0, 2, 0]):
        assert np.allclose(again[:, rows, column], reference[:, rows, k], rtol=1e-9,
                           atol=1e-15)
    assert np.array_equal(again[:, :, 1], first[:, :, 0])  # read back, not re-solved
    again[:, :, 1] = 0.0  # the result is the caller's own: the cache stays intact
    assert np.array_equal(solution.solve_excitations(FREQUENCIES, names[:1]), first)


def test_node_transfers_equal_the_direct_solve_with_currents_into_the_rails():
    figures = analyse_text(BIASED)
    solution, circuit = figures.solution, figures.circuit
    out = circuit.node("out")
    # unit currents across R3 (vcc to p), R4, Rf, and a unit at the gain block's row
    U = solution.unit_currents([(circuit.node("vcc"), circuit.node("p")),
                                (circuit.node("p"), 0),
                                (circuit.node("fb"), out)])
    gain_row = np.zeros((circuit.size, 1))
    gain_row[circuit.row_of_branch(circuit.gain_branch["U1"]), 0] = 1.0
    B = np.concatenate([U, gain_row], axis=1)
    transfers = figures.node_transfers(FREQUENCIES, out, B)
    reference = direct(figures, B)[:, out - 1, :]
    assert transfers.shape == (FREQUENCIES.size, 4)
    assert np.allclose(transfers, reference, rtol=1e-9, atol=1e-15)
    assert np.abs(reference).max() > 0.1  # the reference is not trivially zero


def test_node_transfers_of_a_supply_excitation_use_the_whole_system():
    figures = analyse_text(BIASED)
    solution = figures.solution
    out = figures.circuit.node("out")
    B = solution.excitations([Excitation("supply", "vcc")])
    transfers = figures.node_transfers(FREQUENCIES, out, B)
    reference = direct(figures, B)[:, out - 1, :]
    # 1 V on vcc reaches p through R3 into R4 || C1 (the source holds `in` at AC
    # ground), then the non-inverting gain 1 + Rf/Rg; Cf and the op-amp's finite gain
    # change it by < 0.1 % at this frequency (divider and gain: common practice)
    f = FREQUENCIES[5]
    shunt = 1 / (1 / 100e3 + 2j * np.pi * f * 1e-6)
    expected = shunt / (100e3 + shunt) * (1 + 47e3 / 10e3)
    assert reference[5, 0] == pytest.approx(expected, rel=1e-2)
    assert np.allclose(transfers, reference, rtol=1e-9, atol=1e-15)


def test_the_tied_systems_are_exactly_the_ones_assembled_with_their_ties():
    # x reaches ground only through capacitors: tied at DC (GMIN), not in AC
    figures = analyse_text(BIASED.replace("(load out", "(capacitor C8 out x 1n)"
                                          " (capacitor C9 x gnd 1n) (load out"))
    solution, circuit = figures.solution, figures.solution.circuit
    x = circuit.node("x")
    assert solution.unreferenced(at_dc=True) == (x,)
    assert solution.unreferenced(at_dc=False) == ()
    for at_dc in (True, False):
        ties = solution.unreferenced(at_dc=at_dc)
        tied, assembled = with_ties(assemble(circuit), ties), assemble(circuit, ties)
        assert np.array_equal(tied.G, assembled.G) and np.array_equal(tied.C, assembled.C)
    assert np.array_equal(solution.ac_matrices.G, assemble(circuit, ()).G)
    assert solution.dc_system()[x - 1, x - 1] == pytest.approx(GMIN_SIEMENS, rel=1e-9)
