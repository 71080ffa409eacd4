"""Loop figures against python-control on the textbook loop transfer function A(s) beta(s).

For each stage the loop gain is written out by hand: the textbook op-amp model
A(s) = A0 / ((1 + s/w1)(1 + s/w2)) (w1 = 2 pi GBW / A0; w2 only where the part has a
second pole) times the feedback factor beta(s) derived for that exact netlist (the
derivation sits beside each one). python-control's ``stability_margins`` on that transfer
function gives the expected phase margin, crossover and gain margin; our return-ratio
figures must agree within 0.5 degree of phase margin and 1 % of crossover (tolerances of
our own choosing).

The closed-loop peaking checks use the same transfer functions, closed with
``control.feedback``, and the standard second-order relation between phase margin,
damping ratio and peaking.
"""

from __future__ import annotations

import math
from dataclasses import replace

import control
import numpy as np
import pytest
from analysis_helpers import analyse_text, params, rails
from scipy.optimize import brentq

from checker.analysis import analyse

PHASE_MARGIN_DEG = 0.5
CROSSOVER_RELATIVE = 1e-2
TWO_PI = 2 * math.pi


def opamp_tf(a0: float, gbw_hz: float, second_pole_hz: float | None = None):
    """A(s) = A0 / ((1 + s/w1)(1 + s/w2)): the textbook single-pole op-amp, with an optional
    second pole (Sedra and Smith, Microelectronic Circuits, 7th ed., op-amp chapter)."""
    w1 = TWO_PI * gbw_hz / a0
    gain = control.tf([a0], [1 / w1, 1])
    if second_pole_hz:
        gain = gain * control.tf([1], [1 / (TWO_PI * second_pole_hz), 1])
    return gain


def python_control_margins(loop):
    """(phase margin deg, crossover Hz, gain margin dB or None): python-control
    ``stability_margins`` of the loop transfer function."""
    gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(loop)
    gain_margin_db = None if not np.isfinite(gm) else 20 * math.log10(gm)
    return float(pm), float(wgc) / TWO_PI, gain_margin_db


def opamp_params(a0, gbw_hz, second_pole_hz=None, **more):
    values = dict(open_loop_gain=a0, gbw=gbw_hz, **more)
    if second_pole_hz:
        values["second_pole"] = second_pole_hz
    return params(**values)


# -- (a) inverting stage with the input capacitance in the feedback network -----------------
# Netlist: ideal source at `in` (an AC ground for the loop), Rg from `in` to in- (net fb),
# Rf from fb to the output, in+ grounded, no output resistance (the op-amp drives the
# output pin itself, so the load does not enter beta), no input resistance. The part's
# Ccm (in- to ground) and Cdiff (in- to the grounded in+) plus the stray option all sit
# from fb to ground: Cin = Ccm + Cdiff + stray. Nodal equation at fb with the output at
# v_out: v_fb (1/Rg + 1/Rf + s Cin) = v_out / Rf, so
#     beta(s) = v_fb / v_out = Rg/(Rg + Rf) / (1 + s (Rf||Rg) Cin).
INVERTING_CASES = {
    # name: (A0, GBW, second pole, Rg, Rf, Ccm, Cdiff, stray)
    "gain-1-10pF": (1e5, 10e6, None, 10e3, 10e3, 6e-12, 4e-12, 0.0),
    "gain-1-100k-10pF": (1e5, 1e6, None, 100e3, 100e3, 6e-12, 4e-12, 0.0),
    "gain-9-20pF": (2e5, 1e6, None, 1e3, 9e3, 12e-12, 8e-12, 0.0),
    "gain-1-stray-5pF": (1e5, 10e6, None, 10e3, 10e3, 3e-12, 2e-12, 5e-12),
    "gain-4-second-pole": (1e6, 20e6, 30e6, 2e3, 8e3, 3e-12, 2e-12, 0.0),
}


def inverting_case(name: str):
    """(our figures, python-control's loop transfer function) for one inverting case."""
    a0, gbw, pole2, rg, rf, ccm, cdiff, stray = INVERTING_CASES[name]
    opamp = opamp_params(a0, gbw, pole2, input_capacitance_cm=ccm,
                         input_capacitance_diff=cdiff)
    figures = analyse_text(f"""(stage inv {rails()}
      (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (resistor Rg in fb {rg!r}) (resistor Rf fb out {rf!r})
      (source in (range -0.1V 0.1V)) (load out (resistance 10k)))""",
                           stray_capacitance_f=stray)
    cin = ccm + cdiff + stray
    parallel = rf * rg / (rf + rg)
    beta = control.tf([rg / (rg + rf)], [parallel * cin, 1])
    return figures, opamp_tf(a0, gbw, pole2) * beta


@pytest.mark.parametrize("name", list(INVERTING_CASES))
def test_inverting_phase_margin_with_input_capacitance_matches_python_control(name):
    figures, loop = inverting_case(name)
    # expected: python-control stability_margins on A(s) beta(s) of the same netlist
    expected_pm, _crossover, _gm = python_control_margins(loop)
    assert figures.loops["U1"].phase_margin_deg == pytest.approx(expected_pm,
                                                                 abs=PHASE_MARGIN_DEG)


@pytest.mark.parametrize("name", list(INVERTING_CASES))
def test_inverting_crossover_with_input_capacitance_matches_python_control(name):
    figures, loop = inverting_case(name)
    # expected: python-control stability_margins (gain crossover) on A(s) beta(s)
    _pm, expected_crossover, _gm = python_control_margins(loop)
    assert figures.loops["U1"].crossover_hz == pytest.approx(expected_crossover,
                                                             rel=CROSSOVER_RELATIVE)


def test_inverting_gain_margin_with_a_second_pole_matches_python_control():
    figures, loop = inverting_case("gain-4-second-pole")
    # expected: python-control stability_margins (gain margin at the -180 deg crossing)
    # on A(s) beta(s): three poles, so the phase does reach -180 deg. Our phase crossing
    # is pinned down by a local solve, so 0.02 dB holds whatever the grid's density.
    _pm, _crossover, expected_gm_db = python_control_margins(loop)
    assert expected_gm_db is not None
    assert figures.loops["U1"].margins.gain_margin_db == pytest.approx(expected_gm_db, abs=0.02)
    coarse = analyse(figures.stage, replace(figures.options, points=20))
    assert coarse.loops["U1"].margins.gain_margin_db == pytest.approx(expected_gm_db, abs=0.02)


# -- (b) follower driving a capacitive load through the output resistance ------------------
# Netlist: ideal source at in+ (an AC ground for the loop), in- tied to the op-amp's
# output pin `out`, Ro inside the op-amp between its gain block and `out`, no input
# resistance. Without an isolation resistor CL sits on `out`:
#     beta(s) = Z_CL / (Ro + Z_CL) = 1 / (1 + s Ro CL).
# With Riso from `out` to the load net `vl` and CL on `vl` (feedback taken before Riso,
# so Riso is outside the loop), the impedance from `out` to ground is Riso + 1/(s CL):
#     beta(s) = (Riso + 1/(s CL)) / (Ro + Riso + 1/(s CL))
#             = (1 + s Riso CL) / (1 + s (Ro + Riso) CL).
CAPACITIVE_LOAD_CASES = {
    # name: (A0, GBW, Ro, CL, Riso or None)
    "10nF": (200e3, 1e6, 75.0, 10e-9, None),
    "10nF-riso-50": (200e3, 1e6, 75.0, 10e-9, 50.0),
    "1uF": (200e3, 1e6, 75.0, 1e-6, None),
    "1uF-riso-50": (200e3, 1e6, 75.0, 1e-6, 50.0),
    "100pF-fast": (10e3, 100e6, 20.0, 100e-12, None),
    "100pF-fast-riso-20": (10e3, 100e6, 20.0, 100e-12, 20.0),
}


def capacitive_load_case(name: str):
    """(our figures, python-control's loop transfer function) for one follower case."""
    a0, gbw, ro, cl, riso = CAPACITIVE_LOAD_CASES[name]
    opamp = opamp_params(a0, gbw, output_resistance=ro)
    if riso is None:
        network = f"(load out (capacitance {cl!r}))"
        beta = control.tf([1], [ro * cl, 1])
    else:
        network = f"(resistor Riso out vl {riso!r}) (load vl (capacitance {cl!r}))"
        beta = control.tf([riso * cl, 1], [(ro + riso) * cl, 1])
    figures = analyse_text(f"""(stage follower {rails()}
      (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      {network}
      (source in (range -1V 1V)))""")
    return figures, opamp_tf(a0, gbw) * beta


@pytest.mark.parametrize("name", list(CAPACITIVE_LOAD_CASES))
def test_follower_phase_margin_with_capacitive_load_matches_python_control(name):
    figures, loop = capacitive_load_case(name)
    # expected: python-control stability_margins on A(s) beta(s) of the same netlist
    expected_pm, _crossover, _gm = python_control_margins(loop)
    assert figures.loops["U1"].phase_margin_deg == pytest.approx(expected_pm,
                                                                 abs=PHASE_MARGIN_DEG)


@pytest.mark.parametrize("name", list(CAPACITIVE_LOAD_CASES))
def test_follower_crossover_with_capacitive_load_matches_python_control(name):
    figures, loop = capacitive_load_case(name)
    # expected: python-control stability_margins (gain crossover) on A(s) beta(s)
    _pm, expected_crossover, _gm = python_control_margins(loop)
    assert figures.loops["U1"].crossover_hz == pytest.approx(expected_crossover,
                                                             rel=CROSSOVER_RELATIVE)


@pytest.mark.parametrize("cl", ["10nF", "1uF", "100pF-fast"])
def test_isolation_resistor_outside_the_loop_raises_the_phase_margin(cl):
    bare, bare_loop = capacitive_load_case(cl)
    isolated, isolated_loop = capacitive_load_case(
        f"{cl}-riso-{'20' if 'fast' in cl else '50'}")
    # expected: the zero of Riso and CL at 1/(2 pi Riso CL) in beta(s) (derived above)
    # restores phase. python-control stability_margins on the two loops gives the gain:
    # more than 10 degrees in every case here, and ours must match it.
    expected_bare, _crossover, _gm = python_control_margins(bare_loop)
    expected_isolated, _crossover, _gm = python_control_margins(isolated_loop)
    assert expected_isolated > expected_bare + 10
    ours = isolated.loops["U1"].phase_margin_deg - bare.loops["U1"].phase_margin_deg
    assert ours == pytest.approx(expected_isolated - expected_bare,
                                 abs=2 * PHASE_MARGIN_DEG)


# -- second-order check: closed-loop peaking against phase margin ---------------------------
# A part with a second pole w2 above the crossover makes the loop (for A0 >> 1, w1 << wc)
#     T(s) = wT beta w2 / (s (s + w2)),   wT = 2 pi GBW,
# the standard second-order loop wn^2 / (s (s + 2 zeta wn)). Its phase margin is
# 90 deg - atan(wc/w2), so w2 = wT beta / sqrt 2 gives 45 deg and w2 = 1.5 wT beta gives
# 60 deg (|T(wc)| = 1 solved for each).
PEAKING_CASES = {
    # name: (target PM, noise gain, second pole Hz); GBW 10 MHz, A0 1e6
    "follower-pm45": (45.0, 1.0, 10e6 / math.sqrt(2)),
    "follower-pm60": (60.0, 1.0, 1.5 * 10e6),
    "gain-2-pm45": (45.0, 2.0, 5e6 / math.sqrt(2)),
    "gain-2-pm60": (60.0, 2.0, 1.5 * 5e6),
}
PEAKING_A0, PEAKING_GBW_HZ = 1e6, 10e6
PEAKING_POINTS = 4000  # a fine grid, so the sampled peak is within 1e-4 of the true one


def peaking_case(name: str):
    """(our figures, python-control's loop transfer function) for one peaking case."""
    _pm, noise_gain, pole2 = PEAKING_CASES[name]
    opamp = opamp_params(PEAKING_A0, PEAKING_GBW_HZ, pole2)
    if noise_gain == 1.0:
        stage = f"""(stage follower {rails()}
          (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range -1V 1V)) (load out (resistance 10k)))"""
    else:  # non-inverting, Rf = Rg: beta = 1/2
        stage = f"""(stage noninv {rails()}
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor Rg fb gnd 10k) (resistor Rf fb out 10k)
          (source in (range -1V 1V)) (load out (resistance 10k)))"""
    figures = analyse_text(stage, points=PEAKING_POINTS)
    loop = opamp_tf(PEAKING_A0, PEAKING_GBW_HZ, pole2) * control.tf([1 / noise_gain], [1])
    return figures, loop


def our_peaking(figures) -> float:
    """max |closed-loop gain| over its low-frequency value."""
    gain = np.abs(figures.sources[0].gain)
    return float(np.max(gain) / gain[0])


def python_control_peaking(loop) -> float:
    """max |T/(1+T)| over its DC value, python-control ``feedback`` evaluated on a dense
    grid around the crossover (the closed loop of a non-inverting stage is (1/beta) times
    T/(1+T), which has the same peaking)."""
    closed = control.feedback(loop, 1)
    _pm, crossover_hz, _gm = python_control_margins(loop)
    w = TWO_PI * np.geomspace(crossover_hz / 20, crossover_hz * 20, 200001)
    magnitude = np.abs(closed(1j * w))
    return float(np.max(magnitude) / abs(closed(0j)))


def second_order_peaking(phase_margin_deg: float) -> float:
    """Mp of the standard second-order loop with this phase margin: zeta from
    PM = atan(2 zeta / sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2)), then
    Mp = 1 / (2 zeta sqrt(1 - zeta^2)) for zeta < 1/sqrt 2 (N. S. Nise, Control Systems
    Engineering, 6th ed., Wiley 2011, chapter 10: the sections relating the closed-loop
    transient to the closed-loop and to the open-loop frequency response; section
    titles from memory). python-control checks the same peaks in
    test_closed_loop_peaking_matches_python_control."""
    def margin(zeta):
        return math.degrees(math.atan(2 * zeta / math.sqrt(math.sqrt(1 + 4 * zeta ** 4)
                                                           - 2 * zeta ** 2)))
    zeta = brentq(lambda z: margin(z) - phase_margin_deg, 0.01, 0.7)
    return 1 / (2 * zeta * math.sqrt(1 - zeta ** 2))


@pytest.mark.parametrize("name", list(PEAKING_CASES))
def test_second_pole_sets_the_phase_margin(name):
    figures, loop = peaking_case(name)
    target, _noise_gain, _pole2 = PEAKING_CASES[name]
    # expected: python-control stability_margins on A(s) beta; it agrees with the
    # closed-form target (45 or 60 degrees) to a few millidegrees
    expected_pm, _crossover, _gm = python_control_margins(loop)
    assert expected_pm == pytest.approx(target, abs=0.01)
    assert figures.loops["U1"].phase_margin_deg == pytest.approx(expected_pm,
                                                                 abs=PHASE_MARGIN_DEG)


@pytest.mark.parametrize("name", list(PEAKING_CASES))
def test_closed_loop_peaking_matches_python_control(name):
    figures, loop = peaking_case(name)
    # expected: python-control, feedback(T, 1) of the same loop, peak over a dense grid;
    # tolerance 1e-4 relative for the sampling of our grid
    assert our_peaking(figures) == pytest.approx(python_control_peaking(loop), rel=1e-4)


@pytest.mark.parametrize("name", list(PEAKING_CASES))
def test_closed_loop_peaking_matches_the_second_order_relation(name):
    figures, _loop = peaking_case(name)
    target, _noise_gain, _pole2 = PEAKING_CASES[name]
    # expected: Mp from the phase margin by the standard second-order relation: about
    # 1.31 (2.3 dB) at 45 degrees, 1.03 (0.3 dB) at 60 degrees; tolerance 1e-3 relative
    # covers the loop's departure from an exact integrator (w1/wc = 1e-6) and our grid
    assert our_peaking(figures) == pytest.approx(second_order_peaking(target), rel=1e-3)
