"""Stability whatever the cause: every loop's margins, the stage's natural frequencies, and
fix searches that do not assume a monotonic response.

Expected values:

* margins: python-control ``stability_margins`` on the loop transfer function written
  out for the same netlist, with the textbook op-amp model A(s) = A0/((1 + s/w1)(1 +
  s/w2)), w1 = 2 pi GBW / A0 (Sedra and Smith, Microelectronic Circuits, op-amp
  chapter);
* an integrator's loop, T = A(s) sRC/(1 + sRC), in closed form: phase 90 deg - atan(w/w1)
  - atan(wRC) - atan(w/w2), its crossover found with scipy's ``brentq`` on |T(jw)| = 1;
* poles: python-control's poles of the closed loop ``feedback(A, beta)`` of the same
  transfer functions;
* overshoot: the standard second-order relations, PM = atan(2 zeta / sqrt(sqrt(1 +
  4 zeta^4) - 2 zeta^2)) and overshoot exp(-pi zeta / sqrt(1 - zeta^2)) (K. Ogata, Modern
  Control Engineering, chapters on transient response and frequency response).
"""

from __future__ import annotations

import math
import pathlib

import control
import numpy as np
import pytest
from analysis_helpers import analyse_text, params, rails
from rule_helpers import findings
from scipy.optimize import brentq

from checker.analysis.poles import stage_poles
from checker.analysis.updates import margins_with_admittances

ROOT = pathlib.Path(__file__).resolve().parents[1]
TWO_PI = 2 * math.pi


def opamp_tf(a0: float, gbw: float, second_pole: float | None = None):
    """A(s) = A0 / (1 + s/w1) [/(1 + s/w2)], w1 = 2 pi GBW / A0."""
    tf = control.tf([a0], [a0 / (TWO_PI * gbw), 1])
    if second_pole:
        tf = tf * control.tf([1], [1 / (TWO_PI * second_pole), 1])
    return tf


def margins(loop) -> tuple[float, float]:
    """(phase margin deg, gain crossover Hz) by python-control."""
    result = control.stability_margins(loop)  # (gm, pm, sm, wpc, wgc, wms)
    return result[1], result[4] / TWO_PI


# -- a loop through two op-amps -----------------------------------------------------------
A1, GBW1 = 2e6, 1.5e6
A2, GBW2 = 2e5, 4e6


def composite(extra: str = "") -> str:
    return f"""(stage composite {rails()}
      (opamp U1 {params(open_loop_gain=A1, gbw=GBW1)} (in+ in) (in- fb) (out mid)
        (v+ vcc) (v- vee))
      (opamp U2 {params(open_loop_gain=A2, gbw=GBW2)} (in+ mid) (in- fb2) (out out)
        (v+ vcc) (v- vee))
      (resistor R3 fb2 gnd 1k) (resistor R4 fb2 out 9k)
      (resistor R1 fb gnd 1k) (resistor R2 fb out 9.1k) {extra}
      (source in (range -0.1V 0.1V) (band 10Hz 10kHz))
      (load out (resistance 10k)))"""


def test_composite_loop_margin_matches_python_control():
    # U1's return ratio: A1(s) x U2's closed loop A2/(1 + A2 beta2) x beta1, with
    # beta2 = 1k/10k and beta1 = 1k/10.1k (ideal parts: no Rin, Ro or Cin)
    a2 = opamp_tf(A2, GBW2)
    loop = opamp_tf(A1, GBW1) * control.feedback(a2, 0.1) * (1e3 / 10.1e3)
    expected_pm, expected_crossover = margins(loop)  # python-control
    figures = analyse_text(composite())
    assert figures.loops["U1"].phase_margin_deg == pytest.approx(expected_pm, abs=0.05)
    assert figures.loops["U1"].crossover_hz == pytest.approx(expected_crossover, rel=1e-3)


def test_composite_loop_is_reported_once_naming_the_inner_op_amp():
    found = findings(f"(version 1)\n{composite()}", "loop-margin")
    assert len(found) == 1
    assert found[0].elements[0] == "U1"
    assert "U2 inside the loop eats it" in found[0].message


def test_compensated_composite_passes():
    # a capacitor across R2 adds a zero that lifts the outer loop's phase (lead
    # compensation: common practice); 22 pF puts the margin above 45 deg
    text = f"(version 1)\n{composite('(capacitor C1 fb out 22p)')}"
    figures = analyse_text(composite("(capacitor C1 fb out 22p)"))
    assert figures.loops["U1"].phase_margin_deg > 45
    assert findings(text, "loop-margin") == []


# -- an integrator with nothing across its capacitor ------------------------------------------
def integrator_margin_closed_form(a0, gbw, second_pole, r, c) -> float:
    w1, w2 = TWO_PI * gbw / a0, TWO_PI * second_pole

    def magnitude(w):
        return a0 * w * r * c / (math.hypot(1, w / w1) * math.hypot(1, w * r * c)
                                 * math.hypot(1, w / w2)) - 1

    wc = brentq(magnitude, TWO_PI * 1e3, TWO_PI * 1e9)  # scipy, |T| = 1
    phase = 90 - math.degrees(math.atan(wc / w1) + math.atan(wc * r * c) + math.atan(wc / w2))
    return 180 + phase


@pytest.mark.parametrize("second_pole", [2e6, 5e6, 20e6])
def test_integrator_margin_matches_its_closed_form(second_pole):
    a0, gbw, r, c = 1e5, 10e6, 10e3, 10e-9
    figures = analyse_text(f"""(stage integrator {rails()}
      (opamp U1 {params(open_loop_gain=a0, gbw=gbw, second_pole=second_pole)} (in+ gnd)
        (in- sum) (out out) (v+ vcc) (v- vee))
      (resistor R1 in sum {r!r}) (capacitor C1 sum out {c!r})
      (source in (range -0.1V 0.1V) (band 10Hz 1kHz)))""")
    expected = integrator_margin_closed_form(a0, gbw, second_pole, r, c)
    loop = figures.loops["U1"]
    assert loop.feedback == "none" and loop.closes_anywhere  # no feedback at DC
    assert loop.phase_margin_deg == pytest.approx(expected, abs=0.05)


def test_integrator_with_a_low_margin_gets_a_finding():
    text = f"""(version 1)
      (stage integrator {rails()}
      (opamp U1 {params(open_loop_gain=1e5, gbw=10e6, second_pole=3e6)} (in+ gnd)
        (in- sum) (out out) (v+ vcc) (v- vee))
      (resistor R1 in sum 10k) (capacitor C1 sum out 10n)
      (source in (range -0.1V 0.1V) (band 10Hz 1kHz)))"""
    found = findings(text, "loop-margin")
    assert len(found) == 1 and "second pole" in found[0].message


# -- the stage's natural frequencies -------------------------------------------------------
def test_single_pole_non_inverting_pole_matches_python_control():
    a0, gbw, beta = 1e5, 1e6, 0.1
    figures = analyse_text(f"""(stage s {rails()}
      (opamp U1 {params(open_loop_gain=a0, gbw=gbw)} (in+ in) (in- fb) (out out)
        (v+ vcc) (v- vee))
      (resistor R1 fb gnd 1k) (resistor R2 fb out 9k) (source in (range 0V 1V)))""")
    expected = control.feedback(opamp_tf(a0, gbw), beta).poles()  # python-control
    ours = stage_poles(figures).poles
    assert ours.size == 1
    assert ours[0] == pytest.approx(complex(expected[0]), rel=1e-9)


@pytest.mark.parametrize("second_pole", [10e6 / math.sqrt(2), 15e6, 3e6])
def test_two_pole_follower_poles_match_python_control(second_pole):
    a0, gbw = 1e6, 10e6
    figures = analyse_text(f"""(stage f {rails()}
      (opamp U1 {params(open_loop_gain=a0, gbw=gbw, second_pole=second_pole)} (in+ in)
        (in- out) (out out) (v+ vcc) (v- vee))
      (source in (range 0V 1V)))""")
    expected = np.sort_complex(control.feedback(opamp_tf(a0, gbw, second_pole), 1).poles())
    ours = np.sort_complex(stage_poles(figures).poles)
    assert ours == pytest.approx(expected, rel=1e-8)


def test_dominant_pair_overshoot_follows_the_second_order_relations():
    # second pole at GBW/sqrt 2: the loop wn^2/(s(s + 2 zeta wn)) with PM 45 deg
    figures = analyse_text(f"""(stage f {rails()}
      (opamp U1 {params(open_loop_gain=1e6, gbw=10e6, second_pole=10e6 / math.sqrt(2))}
        (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (range 0V 1V)))""")
    pm = figures.loops["U1"].phase_margin_deg
    zeta = brentq(lambda z: math.degrees(math.atan(2 * z / math.sqrt(
        math.sqrt(1 + 4 * z ** 4) - 2 * z ** 2))) - pm, 0.01, 0.99)  # Ogata's relation
    pair = stage_poles(figures).dominant_pair
    assert pair.damping == pytest.approx(zeta, rel=1e-3)
    expected_overshoot = math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2))
    assert pair.overshoot == pytest.approx(expected_overshoot, rel=3e-3)
    assert pair.overshoot == pytest.approx(0.23, abs=0.01)  # PM 45 -> about 23 %


def test_a_growing_pair_is_an_oscillation_at_its_frequency():
    text = (ROOT / "samples" / "siren-buffer.stage").read_text()
    found = findings(text, "unstable-stage")
    poles = stage_poles(analyse_text(text.split("(version 1)")[1]))
    assert not poles.stable
    assert len(found) == 1 and "oscillates near" in found[0].message
    assert found[0].measured == pytest.approx(poles.oscillation_hz(), rel=1e-9)


# -- fix searches that find what exists ---------------------------------------------------
def test_feedback_capacitor_search_does_not_assume_more_is_better():
    # the turbidity photodiode stage on a part with a second pole at 3 MHz: a small
    # capacitor across Rf restores the margin, and at large values the margin falls
    # again (the noise gain falls towards 1, the crossover climbs to where the second
    # pole bites), so a search that tries its largest value first would give up
    text = (ROOT / "samples" / "turbidity.stage").read_text().replace(
        "(part jfet-input)", "(part jfet-input) (params (second-pole 3MHz))")
    # the input capacitance is not the only cause here: loop-margin reports the loop
    finding = next(f for f in findings(text, "loop-margin"))
    chosen = finding.suggestion.value
    assert "the smallest E12 value" in finding.suggestion.text
    figures = analyse_text(text.split("(version 1)")[1])

    def margin(farads):
        return margins_with_admittances(figures, "U1", lambda f: [
            ("in", "out", 2j * np.pi * f * farads)]).phase_margin_deg

    assert margin(chosen) >= 60
    assert margin(10e-6) < 60  # the ladder's top fails: the response is not monotonic
