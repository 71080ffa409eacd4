"""Rank-one updates of a solved stage: many candidate values from one solve.

The fix searches predict every candidate from one solve (Sherman-Morrison identity)
before solving a few in full. References: the same stage solved again with the new
value by the full nodal analysis, and closed forms of the textbook loops (Sedra and
Smith, Microelectronic Circuits, 7th ed., op-amp chapter): a follower with output resistance Ro
driving Riso + RL || CL has T = A Z/(Z + Ro), Z = Riso + RL/(1 + s RL CL); a
non-inverting amplifier has G = A/(1 + A beta), beta = Rg/(Rg + Rf).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from analysis_helpers import analyse_text, params, rails

from checker.analysis import analyse
from checker.analysis.figures import grid_upper_edges
from checker.analysis.loop import grid_phase_margins
from checker.analysis.updates import (loop_gain_candidates, margins_with_admittances,
                                      source_gain_candidates)
from checker.variants import (inverting_input_capacitance_removed, with_resistance,
                              without_inverting_input_capacitance, without_load_capacitance)

A0, GBW, RO, RL, CL = 2e5, 1e6, 75.0, 10e3, 10e-9
DRIVER = params(open_loop_gain=A0, gbw=GBW, output_resistance=RO)


def isolated_follower(riso: float) -> str:
    return f"""
        (stage driver {rails()}
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor Riso out cable {riso!r})
          (source in (range 0V 1V) (band 0Hz 1kHz))
          (load cable (resistance 10k) (capacitance 10n)))
        """


def closed_form_loop_gain(frequencies: np.ndarray, riso: float) -> np.ndarray:
    s = 2j * math.pi * frequencies
    gain = A0 / (1 + s / (2 * math.pi * GBW / A0))
    z = riso + RL / (1 + s * RL * CL)
    return gain * z / (z + RO)


RISO_VALUES = [1.0, 4.7, 22.0, 100.0, 1e3]


def test_loop_gain_for_many_resistances_matches_solving_each():
    figures = analyse_text(isolated_follower(1.0))
    added = np.subtract.outer(1 / np.array(RISO_VALUES), 1 / 1.0)
    added = np.broadcast_to(added[:, None], (len(RISO_VALUES), figures.frequencies_hz.size))
    predicted = loop_gain_candidates(figures, "U1", "out", "cable", added)
    for row, riso in zip(predicted, RISO_VALUES):
        solved = analyse_text(isolated_follower(riso)).loops["U1"].loop_gain
        np.testing.assert_allclose(row, solved, rtol=1e-8)
        np.testing.assert_allclose(row, closed_form_loop_gain(figures.frequencies_hz, riso),
                                   rtol=1e-6)


def test_grid_margins_rank_candidates_within_half_a_degree_of_the_refined_ones():
    figures = analyse_text(isolated_follower(1.0))
    added = np.subtract.outer(1 / np.array(RISO_VALUES), 1 / 1.0)
    added = np.broadcast_to(added[:, None], (len(RISO_VALUES), figures.frequencies_hz.size))
    on_grid = grid_phase_margins(figures.frequencies_hz, loop_gain_candidates(figures,
        "U1", "out", "cable", added))
    for margin, riso in zip(on_grid, RISO_VALUES):
        refined = analyse_text(isolated_follower(riso)).loops["U1"].phase_margin_deg
        assert margin == pytest.approx(refined, abs=0.5)


def test_grid_margins_are_nan_where_the_loop_never_reaches_one():
    frequencies = np.logspace(0, 6, 50)
    loop_gain = 0.5 / (1 + 1j * frequencies / 1e3)  # below 1 everywhere
    assert np.isnan(grid_phase_margins(frequencies, loop_gain[None]))[0]


RF, RG = 9e3, 1e3


def non_inverting(gbw: float) -> str:
    return f"""
        (stage gain-ten {rails()}
          (opamp U1 {params(open_loop_gain=A0, gbw=gbw)} (in+ in) (in- fb) (out out)
                 (v+ vcc) (v- vee))
          (resistor Rf out fb 9k) (resistor Rg fb gnd 1k)
          (source in (range 0V 0.1V) (band 10Hz 10kHz)))
        """


GBW_VALUES = [0.5e6, 1e6, 2.2e6, 10e6]


def _opamp_gains(figures, values, frequencies):
    block = figures.circuit.gain_blocks[0]
    s = 2j * math.pi * frequencies
    return np.stack([block.with_gbw(g).gain(s) for g in values])


def test_source_gain_for_many_gbws_matches_solving_each_and_the_closed_form():
    figures = analyse_text(non_inverting(1e6))
    frequencies = figures.frequencies_hz
    predicted = source_gain_candidates(
        figures, 0, "U1", _opamp_gains(figures, GBW_VALUES, frequencies), frequencies)
    beta = RG / (RG + RF)
    for row, gbw in zip(predicted, GBW_VALUES):
        solved = analyse_text(non_inverting(gbw)).gain_at
        np.testing.assert_allclose(row[::17], [solved(0, f) for f in frequencies[::17]],
                                   rtol=1e-8)
        a = A0 / (1 + 2j * math.pi * frequencies / (2 * math.pi * gbw / A0))
        np.testing.assert_allclose(row, a / (1 + a * beta), rtol=1e-6)


def test_grid_edges_rank_candidates_within_two_percent_of_the_refined_ones():
    figures = analyse_text(non_inverting(1e6))
    frequencies = figures.frequencies_hz
    at = int(np.argmin(np.abs(frequencies - figures.sources[0].reference_hz)))
    edges = grid_upper_edges(frequencies, source_gain_candidates(
        figures, 0, "U1", _opamp_gains(figures, GBW_VALUES, frequencies), frequencies), at)
    for edge, gbw in zip(edges, GBW_VALUES):
        refined = analyse_text(non_inverting(gbw)).sources[0].bandwidth_high_hz
        assert edge == pytest.approx(refined, rel=0.02)
        assert refined == pytest.approx(gbw * RG / (RG + RF), rel=0.05)  # GBW x beta


def test_changing_an_existing_resistor_is_the_same_update():
    text = isolated_follower(10.0)
    figures = analyse_text(text)
    stage = figures.stage
    added = np.full((1, figures.frequencies_hz.size), 1 / 47.0 - 1 / 10.0)
    predicted = loop_gain_candidates(figures, "U1", "out", "cable", added)[0]
    solved = analyse(with_resistance(stage, "Riso", 47.0), figures.options).loops["U1"]
    np.testing.assert_allclose(predicted, solved.loop_gain, rtol=1e-8)


def two_loads() -> str:
    """A follower driving a cable directly and a second capacitive load behind 47 ohms:
    taking both capacitances out is a rank-two change."""
    return f"""
        (stage two-loads {rails()}
          (opamp U1 {DRIVER} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor R1 out far 47)
          (source in (range 0V 1V) (band 0Hz 1kHz))
          (load out (resistance 10k) (capacitance 4.7n))
          (load far (resistance 10k) (capacitance 22n)))
        """


def test_margins_with_several_elements_removed_match_solving_the_copy():
    figures = analyse_text(two_loads())
    stage = figures.stage

    def removed(frequencies):
        s = 2j * math.pi * frequencies
        return [(load.net, stage.ground, -s * load.capacitance_f) for load in stage.loads]

    updated = margins_with_admittances(figures, "U1", removed)
    solved = analyse(without_load_capacitance(stage), figures.options).margins_of("U1")
    assert updated.phase_margin_deg == pytest.approx(solved.phase_margin_deg, abs=1e-6)
    assert updated.crossover_hz == pytest.approx(solved.crossover_hz, rel=1e-8)
    # and the loads mattered: with them the margin is lower
    assert figures.loops["U1"].phase_margin_deg < solved.phase_margin_deg - 5


@pytest.mark.parametrize("riso", [4.7, 47.0])
def test_margins_with_a_changed_resistor_match_solving_the_copy(riso):
    figures = analyse_text(isolated_follower(1.0))
    updated = margins_with_admittances(
        figures, "U1", lambda f: [("out", "cable", np.full(f.size, 1 / riso - 1.0))])
    solved = analyse_text(isolated_follower(riso)).margins_of("U1")
    assert updated.phase_margin_deg == pytest.approx(solved.phase_margin_deg, abs=1e-6)
    # the closed form of the module docstring, read on a dense grid, agrees too
    frequencies = np.logspace(2, 8, 4000)
    loop = closed_form_loop_gain(frequencies, riso)
    crossing = np.argmax(np.abs(loop) < 1)
    expected = 180 + np.degrees(np.angle(loop[crossing]))
    assert updated.phase_margin_deg == pytest.approx(expected, abs=0.3)


def test_inverting_input_capacitance_as_admittances_matches_the_variant():
    # A transimpedance stage with every kind of capacitance the variant removes: the
    # part's Ccm and Cdiff, a photodiode's own capacitance, a capacitor from in- to a
    # rail, and stray at the inverting input.
    opamp = params(open_loop_gain=1e5, gbw=10e6, output_resistance=50.0,
                   input_capacitance_cm=5e-12, input_capacitance_diff=3e-12)
    figures = analyse_text(f"""
        (stage tia {rails()}
          (opamp U1 {opamp} (in+ gnd) (in- sum) (out out) (v+ vcc) (v- vee))
          (resistor Rf sum out 1M) (capacitor Cr sum vee 2p)
          (source sum (kind current) (range 0A 1uA) (capacitance 20p) (impedance 1G))
          (load out (resistance 10k)))
        """, stray_capacitance_f=1.5e-12)
    stage = figures.stage
    updated = margins_with_admittances(
        figures, "U1", lambda f: inverting_input_capacitance_removed(stage, "U1", 1.5e-12, f))
    variant = without_inverting_input_capacitance(stage, "U1")
    solved = analyse(variant, replace(figures.options, stray_capacitance_f=0.0)) \
        .margins_of("U1")
    assert updated.phase_margin_deg == pytest.approx(solved.phase_margin_deg, abs=1e-6)
    assert updated.crossover_hz == pytest.approx(solved.crossover_hz, rel=1e-8)
    assert figures.loops["U1"].phase_margin_deg < solved.phase_margin_deg - 10
