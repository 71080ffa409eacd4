"""The analysis core against textbook formulas, worked examples and structural facts.

Sources:
- A. S. Sedra and K. C. Smith, Microelectronic Circuits, 7th ed., Oxford University Press
  2015, chapter 2 (Operational Amplifiers): the ideal inverting, non-inverting and
  follower stages; the sections "Effect of Finite Open-Loop Gain and Bandwidth on
  Circuit Performance" (closed-loop bandwidth of a single-pole op-amp,
  f3dB = fb (1 + A0/(1 + R2/R1)) = ft/(1 + R2/R1)) and "Large-Signal Operation of Op
  Amps" (slew rate, full-power bandwidth);
- the T-network inverting stage: derived here by nodal analysis at the inverting input
  and the tee (the project's own), and checked with Lcapy on the same netlist in
  test_analysis_lcapy.py;
- R. Mancini (ed.), Op Amps for Everyone, 2nd ed., Newnes 2003, chapter on stability
  (feedback pole from the input capacitance);
- the pole of the output resistance Ro with a load capacitance CL: the single-time-
  constant low-pass 1/(2 pi Ro CL), derived beside the test (any circuits text; common
  practice);
- D. L. Eggleston, Basic Electronics for Scientists and Engineers, Cambridge University
  Press 2011, section 6.4 (DC error with bias-current compensation);
- common practice where marked.

The formulas are those of the ideal op-amp; the parts here have an open-loop gain of 1e9,
which leaves an error of at most noise gain / A0 (below 1e-7 for every stage here) against
the 1e-6 relative tolerance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from analysis_helpers import analyse_text, params, rails

from checker.analysis.mna import SingularCircuit

IDEAL = params(open_loop_gain=1e9)  # flat gain, no input or output resistance
TOLERANCE = 1e-6


def inverting(r1: str, r2: str, opamp: str = IDEAL) -> str:
    return f"""(stage inv {rails()}
      (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb {r1}) (resistor R2 fb out {r2})
      (source in (range -0.1V 0.1V)) (load out (resistance 10k)))"""


def non_inverting(rg: str, rf: str, opamp: str = IDEAL) -> str:
    return f"""(stage noninv {rails()}
      (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor Rg fb gnd {rg}) (resistor Rf fb out {rf})
      (source in (range -0.1V 0.1V)) (load out (resistance 10k)))"""


FOLLOWER = f"""(stage follower {rails()}
  (opamp U1 {IDEAL} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
  (source in (range -1V 1V)) (load out (resistance 10k)))"""

# T-network inverting stage: R1 input resistor, R2 in- to the tee, R3 tee to output,
# R4 tee to ground.
T_R1, T_R2, T_R3, T_R4 = 10e3, 47e3, 47e3, 4.7e3
T_NETWORK = f"""(stage tee {rails()}
  (opamp U1 {IDEAL} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
  (resistor R1 in fb {T_R1!r}) (resistor R2 fb tee {T_R2!r})
  (resistor R3 tee out {T_R3!r}) (resistor R4 tee gnd {T_R4!r})
  (source in (range -0.1V 0.1V)) (load out (resistance 10k)))"""


# -- ideal-op-amp formulas (Sedra and Smith, Microelectronic Circuits, 7th ed., ch. 2) -----
@pytest.mark.parametrize("r1, r2", [(1e3, 49e3), (10e3, 10e3), (4.7e3, 100e3)])
def test_inverting_gain_is_minus_rf_over_r1(r1, r2):
    figures = analyse_text(inverting(repr(r1), repr(r2)))
    # expected: -Rf/R1 (Sedra and Smith, inverting configuration)
    assert figures.sources[0].gain_mid.real == pytest.approx(-r2 / r1, rel=TOLERANCE)


@pytest.mark.parametrize("r1, r2", [(1e3, 49e3), (10e3, 10e3), (4.7e3, 100e3)])
def test_inverting_input_resistance_is_r1(r1, r2):
    figures = analyse_text(inverting(repr(r1), repr(r2)))
    # expected: R1, the input resistor to a virtual ground (Sedra and Smith)
    assert figures.sources[0].input_impedance_mid.real == pytest.approx(r1, rel=TOLERANCE)


@pytest.mark.parametrize("r1, r2", [(1e3, 49e3), (10e3, 10e3), (4.7e3, 100e3)])
def test_inverting_noise_gain_is_one_plus_rf_over_r1(r1, r2):
    figures = analyse_text(inverting(repr(r1), repr(r2)))
    # expected: 1/beta = 1 + R2/R1, beta = R1/(R1 + R2) (Sedra and Smith, feedback factor
    # of the inverting configuration)
    assert figures.loops["U1"].noise_gain_dc == pytest.approx(1 + r2 / r1, rel=TOLERANCE)


@pytest.mark.parametrize("rg, rf", [(1e3, 49e3), (10e3, 10e3), (2.2e3, 100e3)])
def test_non_inverting_gain_is_one_plus_rf_over_rg(rg, rf):
    figures = analyse_text(non_inverting(repr(rg), repr(rf)))
    # expected: 1 + Rf/Rg (Sedra and Smith, non-inverting configuration)
    assert figures.sources[0].gain_mid.real == pytest.approx(1 + rf / rg, rel=TOLERANCE)


def test_non_inverting_input_resistance_is_infinite_without_op_amp_input_resistance():
    figures = analyse_text(non_inverting("1k", "9k"))
    # expected: the input resistance of the op-amp input itself, infinite for an ideal
    # op-amp (Sedra and Smith, non-inverting configuration)
    assert math.isinf(abs(figures.sources[0].input_impedance_mid))


def test_follower_gain_is_one():
    figures = analyse_text(FOLLOWER)
    # expected: 1 (Sedra and Smith, voltage follower)
    assert figures.sources[0].gain_mid.real == pytest.approx(1.0, rel=TOLERANCE)


def test_follower_noise_gain_is_one():
    figures = analyse_text(FOLLOWER)
    # expected: beta = 1, all of the output fed back (Sedra and Smith, voltage follower)
    assert figures.loops["U1"].noise_gain_dc == pytest.approx(1.0, rel=TOLERANCE)


def test_t_network_gain_magnitude_is_r2_plus_r3_plus_r2_r3_over_r4_all_over_r1():
    figures = analyse_text(T_NETWORK)
    # expected: G = -(R2 + R3 + R2*R3/R4)/R1 = -56.4 (T-network inverting stage: the
    # virtual ground at in- puts Vin/R1 through R2, so the tee sits at -R2 Vin/R1, and
    # the node equation at the tee gives Vout; derived by nodal analysis, the project's
    # own, and checked with Lcapy on the same netlist in test_analysis_lcapy.py)
    expected = -(T_R2 + T_R3 + T_R2 * T_R3 / T_R4) / T_R1
    assert figures.sources[0].gain_mid.real == pytest.approx(expected, rel=TOLERANCE)


def test_t_network_noise_gain_is_one_plus_gain_plus_r3_over_r4():
    figures = analyse_text(T_NETWORK)
    # expected: 1 + |G| + R3/R4 = 67.4, above the 57.4 of a plain inverter of the same
    # gain (T-network inverting stage: 1/beta with the source shorted, by the same nodal
    # analysis at in- and the tee; the project's own derivation)
    gain = (T_R2 + T_R3 + T_R2 * T_R3 / T_R4) / T_R1
    assert figures.loops["U1"].noise_gain_dc == pytest.approx(1 + gain + T_R3 / T_R4,
                                                              rel=TOLERANCE)


def test_t_network_input_resistance_is_r1():
    figures = analyse_text(T_NETWORK)
    # expected: R1, the input resistor to a virtual ground (Sedra and Smith)
    assert figures.sources[0].input_impedance_mid.real == pytest.approx(T_R1, rel=TOLERANCE)


# -- worked examples: closed-loop bandwidth of a single-pole op-amp -------------------------
def test_bandwidth_of_gain_50_with_a0_250k_and_160_hz_pole_is_800_khz():
    # A0 250 000 with its open-loop pole at 160 Hz is a GBW of 40 MHz.
    opamp = params(open_loop_gain=250e3, gbw="40MHz")
    figures = analyse_text(non_inverting("1k", "49k", opamp))
    # expected: f3dB = fb (1 + A0/(1 + R2/R1)) = 160 Hz x (1 + 250 000/50) = 800.16 kHz
    # (Sedra and Smith, Microelectronic Circuits, 7th ed., section "Effect of Finite
    # Open-Loop Gain and Bandwidth on Circuit Performance", frequency response of
    # closed-loop amplifiers); tolerance 0.2 % for the -3 dB edge's interpolation on the
    # frequency grid
    expected = 160.0 * (1 + 250e3 / 50)
    assert expected == pytest.approx(800.16e3)
    assert figures.sources[0].bandwidth_high_hz == pytest.approx(expected, rel=2e-3)


def test_bandwidth_of_gain_10_with_gbw_1_mhz_is_100_khz():
    opamp = params(open_loop_gain=200e3, gbw="1MHz")
    figures = analyse_text(non_inverting("1k", "9k", opamp))
    # expected: f3dB = ft/(1 + R2/R1) = 1 MHz/10 = 100 kHz (Sedra and Smith,
    # Microelectronic Circuits, 7th ed., section "Effect of Finite Open-Loop Gain and
    # Bandwidth on Circuit Performance"); tolerance 0.5 % for the grid interpolation of
    # the -3 dB edge
    assert figures.sources[0].bandwidth_high_hz == pytest.approx(100e3, rel=5e-3)


@pytest.mark.parametrize("stage, noise_gain", [
    (non_inverting("10k", "10k", params(open_loop_gain=1e6, gbw="1MHz")), 2),
    (non_inverting("1k", "9k", params(open_loop_gain=1e6, gbw="1MHz")), 10),
    (non_inverting("1k", "99k", params(open_loop_gain=1e6, gbw="1MHz")), 100),
    (inverting("10k", "10k", params(open_loop_gain=1e6, gbw="1MHz")), 2),
    (inverting("1k", "19k", params(open_loop_gain=1e6, gbw="1MHz")), 20),
], ids=["non-inverting-ng2", "non-inverting-ng10", "non-inverting-ng100",
        "inverting-ng2", "inverting-ng20"])
def test_closed_loop_bandwidth_is_gbw_over_noise_gain(stage, noise_gain):
    figures = analyse_text(stage)
    # expected: GBW / noise gain for a single-pole op-amp (common practice); 1 %
    # tolerance covers the approximation (p1 = 1 Hz here) and the grid interpolation
    assert figures.sources[0].bandwidth_high_hz == pytest.approx(1e6 / noise_gain, rel=1e-2)


# -- worked examples: poles from capacitances ------------------------------------------------
def test_feedback_pole_of_20_pf_at_2k7_ohm_is_2_95_mhz():
    # Cin = Ccm + Cdiff = 12 pF + 8 pF = 20 pF at in- (in+ is grounded); Rf || Rg =
    # 5.4k || 5.4k = 2.7 kOhm.
    opamp = params(open_loop_gain=1e6, gbw="10MHz", input_capacitance_cm="12pF",
                   input_capacitance_diff="8pF")
    figures = analyse_text(inverting("5.4k", "5.4k", opamp))
    _resistance, _capacitance, pole_hz = figures.inverting_input["U1"]
    # expected: about 2.95 MHz, 1/(2 pi (Rf||Rg) Cin) (R. Mancini (ed.), Op Amps for
    # Everyone, 2nd ed., stability chapter); tolerance 0.5 % for "about"
    assert pole_hz == pytest.approx(2.95e6, rel=5e-3)


def test_feedback_pole_counts_stray_capacitance_at_the_inverting_input():
    # The same 20 pF, half from the part (Ccm 10 pF) and half as layout stray.
    opamp = params(open_loop_gain=1e6, gbw="10MHz", input_capacitance_cm="10pF")
    figures = analyse_text(inverting("5.4k", "5.4k", opamp), stray_capacitance_f=10e-12)
    _resistance, _capacitance, pole_hz = figures.inverting_input["U1"]
    # expected: about 2.95 MHz, as above: Cin = Cdiff + Ccm + stray (R. Mancini (ed.),
    # Op Amps for Everyone, 2nd ed., stability chapter)
    assert pole_hz == pytest.approx(2.95e6, rel=5e-3)


def test_capacitive_load_pole_of_1_uf_behind_75_ohm_is_2_12_khz():
    # A follower's feedback factor is beta = 1/(1 + s Ro CL) with CL behind Ro, so the
    # noise gain 1/beta has its corner, |1/beta| = sqrt 2, at the pole 1/(2 pi Ro CL).
    opamp = params(open_loop_gain=200e3, gbw="1MHz", output_resistance=75)
    figures = analyse_text(f"""(stage cload {rails()}
      (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (range -1V 1V)) (load out (capacitance 1uF)))""")
    frequencies = figures.frequencies_hz
    magnitude = np.abs(figures.loops["U1"].noise_gain)
    i = int(np.nonzero(magnitude >= math.sqrt(2))[0][0])
    corner = np.exp(np.interp(math.log(math.sqrt(2)), np.log(magnitude[i - 1:i + 1]),
                              np.log(frequencies[i - 1:i + 1])))
    # expected: 1/(2 pi Ro CL) = 1/(2 pi 75 Ohm 1 uF) = 2.12 kHz, the corner of the
    # single-time-constant low-pass that Ro and CL form (derived above; any circuits
    # text, common practice); tolerance 1 % for the grid interpolation
    expected = 1 / (2 * math.pi * 75 * 1e-6)
    assert expected == pytest.approx(2.122e3, rel=1e-3)
    assert corner == pytest.approx(expected, rel=1e-2)


# -- DC figures, loading and coupling --------------------------------------------------------
def test_dc_error_with_bias_current_compensation_is_ng_vos_plus_rf_ios():
    # Inverting gain -10 (Rg 10k, Rf 100k, noise gain 11) with Rf||Rg from in+ to ground.
    rf, rg = 100e3, 10e3
    opamp = params(open_loop_gain=1e9, offset_voltage="1mV", bias_current="100nA",
                   offset_current="10nA")
    figures = analyse_text(f"""(stage dc {rails()}
      (opamp U1 {opamp} (in+ p) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R3 p gnd {rf * rg / (rf + rg)!r})
      (resistor R1 in fb {rg!r}) (resistor R2 fb out {rf!r})
      (source in (range -0.1V 0.1V)) (load out (resistance 10k)))""")
    # expected: Vo_err = NG Vos + Rf Ios = 11 x 1 mV + 100k x 10 nA = 12 mV (Eggleston,
    # Basic Electronics for Scientists and Engineers, Cambridge University Press 2011,
    # section 6.4); the bias current itself cancels
    assert figures.output_range.error == pytest.approx(11 * 1e-3 + rf * 10e-9, rel=TOLERANCE)


def test_output_current_is_the_load_current_plus_the_feedback_current():
    figures = analyse_text(inverting("10k", "100k"))
    # expected: at the 1 V output extreme (0.1 V x 10), 1 V / 10k into the load plus
    # 1 V / 100k through the feedback resistor to the virtual ground = 0.11 mA (Ohm's
    # law; common practice)
    assert figures.output_currents["U1"].peak_a == pytest.approx(1 / 10e3 + 1 / 100e3,
                                                                 rel=TOLERANCE)


def test_loading_loss_of_an_equal_source_impedance_is_6_db():
    figures = analyse_text(f"""(stage loaded {rails()}
      (opamp U1 {IDEAL} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor R1 in fb 1k) (resistor R2 fb out 10k)
      (source in (range -0.1V 0.1V) (impedance 1k)) (load out (resistance 10k)))""")
    # expected: the source sees the input resistance R1 = 1k behind its own 1k: a loss of
    # 20 log10((Rs + Rin)/Rin) = 6.02 dB (voltage divider; common practice)
    assert figures.sources[0].loss_db == pytest.approx(20 * math.log10(2), rel=TOLERANCE)


def test_coupling_capacitor_sets_the_low_corner_at_1_over_2_pi_r1_c1():
    opamp = params(open_loop_gain=1e6, gbw="10MHz")
    figures = analyse_text(f"""(stage coupled {rails()}
      (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (capacitor C1 in a 1u) (resistor R1 a fb 10k) (resistor R2 fb out 100k)
      (source in (range -0.1V 0.1V) (band 100Hz 10kHz)) (load out (resistance 10k)))""")
    # expected: 1/(2 pi R1 C1) = 15.9 Hz, C1 in series with R1 into a virtual ground (RC
    # high-pass; common practice); tolerance 1 % for the grid interpolation
    expected = 1 / (2 * math.pi * 10e3 * 1e-6)
    assert figures.sources[0].bandwidth_low_hz == pytest.approx(expected, rel=1e-2)


# -- structure: problems are reported, never a LinAlgError ---------------------------------
# A net reached only through capacitors or op-amp inputs has no DC solution, and a loop of
# ideal voltage sources fixes one net at two voltages; either makes the nodal matrix
# singular (common practice of nodal analysis).
CAPACITOR_COUPLED = f"""(stage coupled {rails()}
  (opamp U1 {params(open_loop_gain=1e6, gbw="1MHz")} (in+ p) (in- out) (out out)
    (v+ vcc) (v- vee))
  (capacitor C1 in p 100n)
  (source in (range -0.1V 0.1V) (band 100Hz 10kHz)) (load out (resistance 10k)))"""

OUTPUT_ON_SUPPLY = f"""(stage shorted {rails()}
  (opamp U1 {params(open_loop_gain=1e6, gbw="1MHz")} (in+ in) (in- vcc) (out vcc)
    (v+ vcc) (v- vee))
  (resistor R1 in gnd 10k)
  (source in (range -0.1V 0.1V)))"""

# (A source on a supply net is refused by the builder before any analysis: see
# tests/test_hostile_inputs.py.)
SOURCE_LOOPS = {
    "two-ideal-sources-on-one-net": f"""(stage loop {rails()}
      (opamp U1 {params(open_loop_gain=1e6, gbw="1MHz")} (in+ in) (in- out) (out out)
        (v+ vcc) (v- vee))
      (source in (range -0.1V 0.1V)) (source in (range -1V 1V))
      (load out (resistance 10k)))""",
}


def test_net_with_no_dc_path_is_reported_by_name():
    figures = analyse_text(CAPACITOR_COUPLED)
    floating = [problem for problem in figures.problems if problem.nets == ("p",)]
    assert len(floating) == 1


def test_net_with_no_dc_path_still_solves():
    figures = analyse_text(CAPACITOR_COUPLED)
    # expected: a follower behind a series capacitor passes the signal at mid-band
    # (common practice); the tie to ground only keeps the DC solve defined
    assert figures.solvable
    assert abs(figures.sources[0].gain_mid) == pytest.approx(1.0, rel=1e-3)


def test_a_source_without_a_band_is_read_at_dc():
    # docs/format.md: a source with no band is a DC signal, read at 0 Hz; behind a series
    # capacitor nothing reaches the output at DC (a capacitor blocks DC: any circuits text)
    figures = analyse_text(CAPACITOR_COUPLED.replace(" (band 100Hz 10kHz)", ""))
    assert figures.sources[0].reference_hz == 0.0
    assert abs(figures.sources[0].gain_from_source_mid) < 1e-6


def test_op_amp_output_tied_to_a_supply_is_reported():
    figures = analyse_text(OUTPUT_ON_SUPPLY)
    tied = [problem for problem in figures.problems
            if "U1" in problem.elements and "vcc" in problem.nets]
    assert len(tied) == 1


def test_op_amp_output_tied_to_a_supply_makes_the_stage_unsolvable():
    figures = analyse_text(OUTPUT_ON_SUPPLY)
    # its gain block and the supply both fix net vcc: a loop of voltage sources
    assert not figures.solvable
    with pytest.raises(SingularCircuit):
        figures.sources  # noqa: B018  (the property does the solve)


@pytest.mark.parametrize("name", list(SOURCE_LOOPS))
def test_loop_of_ideal_voltage_sources_is_a_fatal_problem(name):
    figures = analyse_text(SOURCE_LOOPS[name])
    fatal = [problem for problem in figures.problems if problem.fatal]
    # the problem names the source that closes the loop
    assert len(fatal) == 1 and any(e.startswith("source at") for e in fatal[0].elements)


@pytest.mark.parametrize("figure", ["sources", "loops", "output_impedance", "output_range",
                                    "output_currents"])
@pytest.mark.parametrize("name", list(SOURCE_LOOPS))
def test_loop_of_ideal_voltage_sources_raises_singular_circuit_not_linalg_error(name, figure):
    figures = analyse_text(SOURCE_LOOPS[name])
    with pytest.raises(SingularCircuit):
        getattr(figures, figure)


PARALLEL_INDUCTORS = """
(stage rl-highpass (ground gnd) (supply vcc 12V) (supply vee -12V)
  (opamp U1 (part gp-bipolar) (in+ a) (in- out) (out out) (v+ vcc) (v- vee))
  (resistor R1 in a 1k)
  (inductor L1 a gnd 10m)
  (inductor L2 a gnd 10m)
  (source in (amplitude 1V) (band 1kHz 10kHz))
  (load out (resistance 10k)))
"""


def test_parallel_inductors_solve_as_their_parallel_value():
    # Two 10 mH in parallel are one 5 mH (L1 L2 / (L1 + L2): any circuits text); at DC
    # both short net a, which fixes its voltage but not how the two share the current,
    # so the stage is solvable and reads as the single inductor does.
    figures = analyse_text(PARALLEL_INDUCTORS)
    single = analyse_text(PARALLEL_INDUCTORS.replace("(inductor L1 a gnd 10m)\n", "")
                          .replace("(inductor L2 a gnd 10m)", "(inductor L2 a gnd 5m)"))
    assert figures.solvable and not [p for p in figures.problems if p.fatal]
    both, one = figures.sources[0], single.sources[0]
    assert both.gain_mid == pytest.approx(one.gain_mid, rel=1e-9)
    assert both.bandwidth_low_hz == pytest.approx(one.bandwidth_low_hz, rel=1e-9)
    # R-L high-pass from the source: |H| = wL / sqrt(R^2 + (wL)^2) at the band's
    # geometric centre (any circuits text), the follower adding its own ~1e-5 gain error
    w = 2 * math.pi * both.reference_hz
    expected = w * 5e-3 / math.hypot(1e3, w * 5e-3)
    assert abs(both.gain_from_source_mid) == pytest.approx(expected, rel=1e-4)
    assert figures.dc_transfer("a", ("source", 0)) == pytest.approx(0.0, abs=1e-9)


def test_an_inductor_across_a_supply_is_still_unsolvable():
    # A source shorted by an inductor at DC: the loop holds a source, so no voltage
    # satisfies it (a loop of voltage sources and inductors).
    figures = analyse_text(PARALLEL_INDUCTORS.replace("(inductor L2 a gnd 10m)",
                                                      "(inductor L2 vcc gnd 10m)"))
    fatal = [p for p in figures.problems if p.fatal]
    assert fatal and "L2" in fatal[0].elements
