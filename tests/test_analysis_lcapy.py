"""The analysis core against Lcapy: symbolic nodal analysis of the same netlists.

Each topology is written twice: as a stage in the stage format (our side) and as an Lcapy
netlist with the op-amp as a voltage-controlled voltage source of symbolic gain ``A``
(plus its input resistance and output resistance when the part states them). Lcapy
solves the netlist symbolically; the expected value is then either the limit A -> oo
(the ideal op-amp, against our part with an open-loop gain of 1e12 and no GBW) or the
expression evaluated at the textbook single-pole gain A(jw) = A0 / (1 + jw/p1),
p1 = 2 pi GBW / A0, at the frequency our figure is read at (against our part with the
same A0 and GBW).

Every expected number here comes from "Lcapy, symbolic nodal analysis of the same
netlist" and is compared to 1e-6 relative.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cache

import lcapy
import numpy as np
import pytest
import sympy as sp
from analysis_helpers import analyse_text, params, rails

RELATIVE = 1e-6

# The op-amp of the ideal-limit checks: no input resistance, no output resistance, and a
# flat open-loop gain of 1e12 (NG/A0 <= 1e-9, far below the tolerance).
IDEAL = {"open_loop_gain": 1e12}
IDEAL_RIN = None
IDEAL_RO = 0.0

# The op-amp of the finite-gain checks: single pole, p1 = GBW / A0 = 160 Hz, with an
# input resistance and an output resistance that the Lcapy netlist carries too.
A0 = 250e3
GBW_HZ = 40e6
FINITE_RIN = 10e6
FINITE_RO = 50.0
FINITE = {"open_loop_gain": A0, "gbw": GBW_HZ, "input_resistance": FINITE_RIN,
          "output_resistance": FINITE_RO}
BAND = "(band 1kHz 100kHz)"  # centre sqrt(1k * 100k) = 10 kHz, where A is about 4000 /_-89 deg
BAND_LOW_HZ, BAND_HIGH_HZ = 1e3, 100e3


@dataclass(frozen=True)
class Topology:
    """One circuit written for both solvers.

    ``stage`` is the stage text with ``{opamp}`` for the inline parameters and ``{band}``
    for each source's band; ``netlist`` is the same circuit for Lcapy (ground is node 0)
    without the op-amp and the sources; ``opamp`` gives the op-amp's (in+, in-, out) nets
    in Lcapy's names; ``sources`` the (net, kind) of each source in the stage's order.
    """

    stage: str
    netlist: str
    opamp: tuple[str, str, str]
    sources: tuple[tuple[str, str], ...]


TOPOLOGIES: dict[str, Topology] = {
    "inverting": Topology(
        stage="""(opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
                 (resistor R1 in fb 1k) (resistor R2 fb out 49k)
                 (source in (range -0.1V 0.1V) {band}) (load out (resistance 10k))""",
        netlist="""R1 in fb 1e3
                   R2 fb out 49e3
                   RL out 0 10e3""",
        opamp=("0", "fb", "out"), sources=(("in", "voltage"),)),
    "non-inverting": Topology(
        stage="""(opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
                 (resistor Rg fb gnd 1k) (resistor Rf fb out 9k)
                 (source in (range -0.1V 0.1V) {band}) (load out (resistance 10k))""",
        netlist="""Rg fb 0 1e3
                   Rf fb out 9e3
                   RL out 0 10e3""",
        opamp=("in", "fb", "out"), sources=(("in", "voltage"),)),
    "follower": Topology(
        stage="""(opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
                 (source in (range -1V 1V) {band}) (load out (resistance 10k))""",
        netlist="""RL out 0 10e3""",
        opamp=("in", "out", "out"), sources=(("in", "voltage"),)),
    "t-network": Topology(
        stage="""(opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
                 (resistor R1 in fb 10k) (resistor R2 fb tee 47k)
                 (resistor R3 tee out 47k) (resistor R4 tee gnd 4.7k)
                 (source in (range -0.1V 0.1V) {band}) (load out (resistance 10k))""",
        netlist="""R1 in fb 10e3
                   R2 fb tee 47e3
                   R3 tee out 47e3
                   R4 tee 0 4.7e3
                   RL out 0 10e3""",
        opamp=("0", "fb", "out"), sources=(("in", "voltage"),)),
    "difference": Topology(
        stage="""(opamp U1 {opamp} (in+ p) (in- fb) (out out) (v+ vcc) (v- vee))
                 (resistor R1 in1 fb 10k) (resistor R2 fb out 20k)
                 (resistor R3 in2 p 10k) (resistor R4 p gnd 20k)
                 (source in1 (range -1V 1V) {band}) (source in2 (range -1V 1V) {band})
                 (load out (resistance 10k))""",
        netlist="""R1 in1 fb 10e3
                   R2 fb out 20e3
                   R3 in2 p 10e3
                   R4 p 0 20e3
                   RL out 0 10e3""",
        opamp=("p", "fb", "out"), sources=(("in1", "voltage"), ("in2", "voltage"))),
    "summing": Topology(
        stage="""(opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
                 (resistor R1 in1 fb 10k) (resistor R2 in2 fb 20k) (resistor R3 fb out 40k)
                 (source in1 (range -1V 1V) {band}) (source in2 (range -1V 1V) {band})
                 (load out (resistance 10k))""",
        netlist="""R1 in1 fb 10e3
                   R2 in2 fb 20e3
                   R3 fb out 40e3
                   RL out 0 10e3""",
        opamp=("0", "fb", "out"), sources=(("in1", "voltage"), ("in2", "voltage"))),
    "transimpedance": Topology(
        stage="""(opamp U1 {opamp} (in+ gnd) (in- in) (out out) (v+ vcc) (v- vee))
                 (resistor Rf in out 100k)
                 (source in (kind current) (range 0A 10uA) {band})
                 (load out (resistance 10k))""",
        netlist="""Rf in out 100e3
                   RL out 0 10e3""",
        opamp=("0", "in", "out"), sources=(("in", "current"),)),
}

# Every (topology, source index), for the checks that apply to each source.
EVERY_SOURCE = [(name, i) for name, topology in TOPOLOGIES.items()
                for i in range(len(topology.sources))]
EVERY_SOURCE_IDS = [f"{name}-source{i}" for name, i in EVERY_SOURCE]

# Sources whose input resistance has a finite, non-zero ideal limit (the others tend to
# infinity -- an op-amp input with no input resistance -- or to zero -- a virtual ground
# driven by a current source).
FINITE_LIMIT_INPUTS = [("inverting", 0), ("t-network", 0), ("difference", 0),
                       ("difference", 1), ("summing", 0), ("summing", 1)]


# -- our side -----------------------------------------------------------------------------
def our_figures(name: str, opamp: dict, band: str = ""):
    topology = TOPOLOGIES[name]
    body = topology.stage.format(opamp=params(**opamp), band=band)
    return analyse_text(f"(stage {name.replace('-', '_')} {rails()} {body})")


# -- Lcapy's side -------------------------------------------------------------------------
def lcapy_netlist(topology: Topology, rin: float | None, ro: float, active: int | None,
                  keep_active: bool = True, with_load: bool = True) -> str:
    """The Lcapy netlist: the passives, the op-amp as E (gain A) with Rin and Ro, and the
    sources -- source ``active`` at 1 (V or A), the others at 0 (voltage sources then act
    as shorts, current sources as opens, as in our per-source solve)."""
    inp, inn, out = topology.opamp
    lines = [line.strip() for line in topology.netlist.splitlines() if line.strip()]
    if not with_load:
        lines = [line for line in lines if not line.startswith("RL ")]
    if ro:
        lines += [f"EU1 u1int 0 {inp} {inn} A", f"RU1o u1int {out} {ro!r}"]
    else:
        lines += [f"EU1 {out} 0 {inp} {inn} A"]
    if rin:
        lines += [f"RU1in {inp} {inn} {rin!r}"]
    for i, (net, kind) in enumerate(topology.sources):
        if i == active and not keep_active:
            continue
        value = 1 if i == active else 0
        if kind == "voltage":
            lines.append(f"Vs{i} {net} 0 {value}")
        elif i == active:  # a current source injects into its net: I n+ n- drives n+
            lines.append(f"Is{i} {net} 0 {value}")
    return "\n".join(lines)


def _in_a(expression) -> tuple[sp.Expr, sp.Symbol]:
    """A sympy expression and the gain symbol A in it."""
    expression = sp.sympify(expression)
    symbols = [s for s in expression.free_symbols if s.name == "A"]
    return expression, (symbols[0] if symbols else sp.Symbol("A"))


@cache
def lcapy_gain(name: str, source: int, rin: float | None, ro: float):
    """V(out) per unit of source ``source`` (V/V for a voltage source at its own net, V/A
    for a current source), as a sympy expression in A: Lcapy, DC nodal analysis."""
    topology = TOPOLOGIES[name]
    circuit = lcapy.Circuit(lcapy_netlist(topology, rin, ro, source))
    return _in_a(circuit["out"].V.dc.sympy)


@cache
def lcapy_input_impedance(name: str, source: int, rin: float | None, ro: float):
    """Impedance into the source's net with that source removed and the others killed,
    as a sympy expression in A: Lcapy ``Circuit.impedance``."""
    topology = TOPOLOGIES[name]
    circuit = lcapy.Circuit(lcapy_netlist(topology, rin, ro, source, keep_active=False))
    return _in_a(circuit.impedance(topology.sources[source][0], 0).sympy)


@cache
def lcapy_output_impedance(name: str, rin: float | None, ro: float):
    """Impedance into the output net with every source killed and the load removed, as a
    sympy expression in A: Lcapy ``Circuit.impedance``."""
    topology = TOPOLOGIES[name]
    circuit = lcapy.Circuit(lcapy_netlist(topology, rin, ro, None, with_load=False))
    return _in_a(circuit.impedance("out", 0).sympy)


def ideal_limit(expression_and_symbol) -> complex:
    """Lcapy's expression in the limit A -> oo (sympy ``limit``)."""
    expression, a = expression_and_symbol
    return complex(sp.limit(expression, a, sp.oo))


def single_pole_gain(frequency_hz):
    """A(jw) = A0 / (1 + jw/p1), p1 = 2 pi GBW / A0: the textbook single-pole op-amp."""
    pole_hz = GBW_HZ / A0
    return A0 / (1 + 1j * np.asarray(frequency_hz) / pole_hz)


def at_single_pole_gain(expression_and_symbol, frequency_hz):
    """Lcapy's expression with A = A(jw) substituted, at one frequency or an array."""
    expression, a = expression_and_symbol
    function = sp.lambdify(a, expression, "numpy")
    return np.asarray(function(single_pole_gain(frequency_hz)), dtype=complex) * \
        np.ones(np.shape(frequency_hz))


def assert_close(got, expected, relative=RELATIVE):
    got, expected = np.asarray(got, dtype=complex), np.asarray(expected, dtype=complex)
    error = np.abs(got - expected) / np.abs(expected)
    assert np.all(error <= relative), f"got {got}, expected {expected} (Lcapy)"


# -- (a) ideal op-amp: the limit of a very large gain ---------------------------------------
@pytest.mark.parametrize("name, source", EVERY_SOURCE, ids=EVERY_SOURCE_IDS)
def test_gain_matches_lcapy_in_the_infinite_gain_limit(name, source):
    figures = our_figures(name, IDEAL)
    # expected: Lcapy, symbolic nodal analysis of the same netlist, limit A -> oo
    expected = ideal_limit(lcapy_gain(name, source, IDEAL_RIN, IDEAL_RO))
    assert_close(figures.sources[source].gain_mid, expected)


@pytest.mark.parametrize("name, source", FINITE_LIMIT_INPUTS,
                         ids=[f"{name}-source{i}" for name, i in FINITE_LIMIT_INPUTS])
def test_input_resistance_matches_lcapy_in_the_infinite_gain_limit(name, source):
    figures = our_figures(name, IDEAL)
    # expected: Lcapy, impedance of the same netlist into the source's net, limit A -> oo
    expected = ideal_limit(lcapy_input_impedance(name, source, IDEAL_RIN, IDEAL_RO))
    assert_close(figures.sources[source].input_impedance_mid, expected)


# -- (b) single-pole op-amp with Rin and Ro, read at the band centre ------------------------
@pytest.mark.parametrize("name, source", EVERY_SOURCE, ids=EVERY_SOURCE_IDS)
def test_mid_band_gain_matches_lcapy_with_single_pole_gain(name, source):
    figures = our_figures(name, FINITE, BAND)
    ours = figures.sources[source]
    assert ours.reference_hz == pytest.approx(math.sqrt(BAND_LOW_HZ * BAND_HIGH_HZ))
    # expected: Lcapy, same netlist (with Rin and Ro), A = A0/(1 + jf/p1) at the band centre
    expected = at_single_pole_gain(lcapy_gain(name, source, FINITE_RIN, FINITE_RO),
                                   ours.reference_hz)
    assert_close(ours.gain_mid, expected)


@pytest.mark.parametrize("name, source", EVERY_SOURCE, ids=EVERY_SOURCE_IDS)
def test_gain_over_the_frequency_grid_matches_lcapy_with_single_pole_gain(name, source):
    figures = our_figures(name, FINITE, BAND)
    # expected: Lcapy, same netlist, A = A0/(1 + jf/p1) at every frequency of our grid
    expected = at_single_pole_gain(lcapy_gain(name, source, FINITE_RIN, FINITE_RO),
                                   figures.frequencies_hz)
    assert_close(figures.sources[source].gain, expected)


@pytest.mark.parametrize("name, source", EVERY_SOURCE, ids=EVERY_SOURCE_IDS)
def test_mid_band_input_impedance_matches_lcapy_with_single_pole_gain(name, source):
    figures = our_figures(name, FINITE, BAND)
    ours = figures.sources[source]
    # expected: Lcapy, impedance into the source's net (the other sources killed),
    # A = A0/(1 + jf/p1) at the band centre
    expected = at_single_pole_gain(lcapy_input_impedance(name, source, FINITE_RIN, FINITE_RO),
                                   ours.reference_hz)
    assert_close(ours.input_impedance_mid, expected)


@pytest.mark.parametrize("name, source", EVERY_SOURCE, ids=EVERY_SOURCE_IDS)
def test_smallest_input_resistance_in_band_matches_lcapy_with_single_pole_gain(name, source):
    figures = our_figures(name, FINITE, BAND)
    frequencies = figures.frequencies_hz
    in_band = (frequencies >= BAND_LOW_HZ * (1 - 1e-9)) & (frequencies <= BAND_HIGH_HZ * (1 + 1e-9))
    # expected: Lcapy's input impedance with A = A0/(1 + jf/p1) at each of our in-band
    # frequencies; the figure is the smallest magnitude among them
    impedance = at_single_pole_gain(lcapy_input_impedance(name, source, FINITE_RIN, FINITE_RO),
                                    frequencies[in_band])
    expected = float(np.min(np.abs(impedance)))
    assert figures.sources[source].input_resistance_min == pytest.approx(expected, rel=RELATIVE)


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_output_impedance_matches_lcapy_with_single_pole_gain(name):
    figures = our_figures(name, FINITE, BAND)
    # expected: Lcapy, impedance into the output net of the same netlist with the load
    # removed and the sources killed, A = A0/(1 + jf/p1) at every frequency of our grid
    expected = at_single_pole_gain(lcapy_output_impedance(name, FINITE_RIN, FINITE_RO),
                                   figures.frequencies_hz)
    assert_close(figures.output_impedance, expected)


# -- a source with its own impedance ------------------------------------------------------
def test_gain_from_the_source_emf_matches_lcapy_for_an_inverting_stage_behind_600_ohm():
    stage = f"""(stage inv_rs {rails()}
      (opamp U1 {params(**FINITE)} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 1k) (resistor R2 fb out 49k)
      (source in (range -0.1V 0.1V) (impedance 600) {BAND}) (load out (resistance 10k)))"""
    ours = analyse_text(stage).sources[0]
    circuit = lcapy.Circuit("\n".join([
        "Vs emf 0 1", "Rs emf in 600", "R1 in fb 1e3", "R2 fb out 49e3", "RL out 0 10e3",
        "EU1 u1int 0 0 fb A", f"RU1o u1int out {FINITE_RO!r}", f"RU1in 0 fb {FINITE_RIN!r}"]))
    # expected: Lcapy, V(out)/V(emf) of the same netlist with the 600 Ohm source
    # impedance, A = A0/(1 + jf/p1) at the band centre
    expected = at_single_pole_gain(_in_a(circuit["out"].V.dc.sympy), ours.reference_hz)
    assert_close(ours.gain_from_source_mid, expected)
