"""The stable-gain rule: a decompensated part below its minimum stable noise gain.

Expected values, derived independently with python-control on the loop written out by
hand: the two-pole op-amp A(s) = A0 / ((1 + s/w1)(1 + s/w2)), w1 = 2 pi GBW / A0
(Sedra and Smith, Microelectronic Circuits, 7th ed., op-amp chapter), times the feedback factor
beta(s) of the network; ``stability_margins`` gives the crossover wc, and the noise gain
is |1/beta(j wc)|. The inline part has no input capacitance, input or output resistance,
so beta is the drawn network alone:

* follower: beta = 1, noise gain 1;
* inverting gain -Rf/Rg: beta = Rg/(Rg + Rf), noise gain 1 + Rf/Rg;
* non-inverting with Cf across Rf: 1/beta = 1 + Zf/Rg, Zf = Rf/(1 + s Rf Cf).

The minimum stable gain is a noise gain, met at the crossover (common practice for
decompensated parts).
"""

from __future__ import annotations

import control
import eseries
import pytest
from rule_helpers import TWO_PI, findings, line_of, only, params

from checker.findings import Severity

RULE = "stable-gain"
A0, GBW, P2, MINIMUM = 1e6, 50e6, 15e6, 5.0
PART = params(open_loop_gain=A0, gbw=GBW, second_pole=P2, min_stable_gain=MINIMUM)


def stage(body: str, part: str = PART) -> str:
    """A stage on +-15 V; the op-amp is on line 4."""
    return f"""
        (version 1)
        (stage hydro
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          {body.replace("PART", part)}
          (source in (amplitude 10mV) (band 10Hz 10kHz))
          (load out (resistance 10k)))
        """


FOLLOWER = "(opamp U1 PART (in+ in) (in- out) (out out) (v+ vcc) (v- vee))"


def inverting(rg: float, rf: float, extra: str = "") -> str:
    return stage(f"(opamp U1 PART (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))"
                 f" (resistor R1 in fb {rg!r}) (resistor R2 fb out {rf!r}) {extra}")


def non_inverting_with_cf(rg: float, rf: float, cf: float) -> str:
    return stage(f"(opamp U1 PART (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))"
                 f" (resistor R1 fb gnd {rg!r}) (resistor R2 fb out {rf!r})"
                 f" (capacitor C1 fb out {cf!r})")


def opamp_tf():
    w1, w2 = TWO_PI * GBW / A0, TWO_PI * P2
    return control.tf([A0], [1 / (w1 * w2), 1 / w1 + 1 / w2, 1])


def crossover_hz(beta) -> float:
    """python-control's gain crossover of A(s) beta(s), in Hz."""
    return float(control.stability_margins(opamp_tf() * beta)[4]) / TWO_PI  # wgc


def test_follower_on_a_decompensated_part_is_an_error():
    text = stage(FOLLOWER)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.unit == "V/V"
    assert finding.limit == pytest.approx(MINIMUM)
    assert finding.measured == pytest.approx(1.0, rel=1e-3)  # beta = 1
    assert finding.details["topology"] == "follower"


def test_follower_crossover_agrees_with_python_control():
    finding = only(stage(FOLLOWER), RULE)
    expected = crossover_hz(control.tf([1], [1]))
    assert finding.details["crossover_hz"] == pytest.approx(expected, rel=0.01)


def test_inverting_gain_2_has_noise_gain_3():
    finding = only(inverting(1e3, 2e3), RULE)
    assert finding.measured == pytest.approx(3.0, rel=1e-3)  # 1 + Rf/Rg


def test_noise_gain_at_the_minimum_and_above_passes():
    # Inverting gain -4: noise gain 1 + 4 = 5, the minimum itself; gain -10: 11.
    assert findings(inverting(1e3, 4e3), RULE) == []
    assert findings(inverting(1e3, 10e3), RULE) == []


def test_feedback_capacitor_brings_the_noise_gain_down_at_crossover():
    # Gain 11 at DC, but Cf = 100 pF across Rf = 10 kOhm puts a zero of 1/beta at 159 kHz.
    rg, rf, cf = 1e3, 10e3, 100e-12
    finding = only(non_inverting_with_cf(rg, rf, cf), RULE)
    beta = control.tf([rg * rf * cf, rg], [rg * rf * cf, rg + rf])  # Rg/(Rg + Zf)
    fc = crossover_hz(beta)
    noise_gain = 1 / abs(complex(control.evalfr(beta, 1j * TWO_PI * fc)))
    assert noise_gain < MINIMUM
    assert finding.details["crossover_hz"] == pytest.approx(fc, rel=0.01)
    assert finding.measured == pytest.approx(noise_gain, rel=0.01)
    assert "at DC 11" in finding.message


def test_integrator_is_flagged():
    text = stage("(opamp U1 PART (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))"
                 " (resistor R1 in fb 10k) (capacitor C1 fb out 10n)")
    finding = only(text, RULE)
    # 1/beta = 1 + 1/(s R C): 1.0000 at tens of MHz.
    assert finding.measured == pytest.approx(1.0, rel=0.01)
    assert finding.details["topology"] == "integrator"
    assert finding.suggestion.value is None  # no feedback resistor: a unity-stable part


def test_built_in_decompensated_class_is_flagged_as_a_follower():
    text = stage(FOLLOWER, part="(part decomp-bipolar-g5)")
    finding = only(text, RULE)
    # Its 50 Ohm output resistance and 3 pF at in- barely move beta from 1.
    assert finding.measured == pytest.approx(1.0, rel=0.02)


def test_unity_stable_part_is_not_checked():
    part = params(open_loop_gain=A0, gbw=10e6)
    assert findings(stage(FOLLOWER, part=part), RULE) == []


def test_shaping_network_suggestion_clears_the_finding():
    finding = only(inverting(1e3, 2e3), RULE)
    rs = finding.details["shaping_resistor_ohm"]
    cs = finding.details["shaping_capacitor_f"]
    assert finding.suggestion.value == pytest.approx(rs)
    assert finding.suggestion.unit == "Ω"
    fixed = inverting(1e3, 2e3, f"(resistor R3 fb mid {rs!r}) (capacitor C2 mid gnd {cs!r})")
    assert findings(fixed, RULE) == []


def test_shaping_resistor_is_the_largest_e24_value_that_passes():
    finding = only(inverting(1e3, 2e3), RULE)
    rs = finding.details["shaping_resistor_ohm"]
    cs = finding.details["shaping_capacitor_f"]
    # 1 + Rf/(Rg || Rs) >= 5 needs Rg || Rs <= 500 Ohm, Rs <= 1 kOhm (common practice);
    # the capacitor's reactance at crossover takes a little more.
    assert rs <= 1e3 * (1 + 1e-9)
    larger = float(eseries.find_greater_than(eseries.E24, rs))  # next E24 value up
    still = inverting(1e3, 2e3, f"(resistor R3 fb mid {larger!r}) (capacitor C2 mid gnd {cs!r})")
    assert len(findings(still, RULE)) == 1


def test_part_without_gbw_passes_when_the_noise_gain_never_falls_below_the_minimum():
    part = params(open_loop_gain=A0, min_stable_gain=MINIMUM)
    assert findings(inverting(1e3, 10e3).replace(PART, part), RULE) == []


def test_part_without_gbw_cannot_check_a_low_noise_gain():
    part = params(open_loop_gain=A0, min_stable_gain=MINIMUM)
    finding = only(stage(FOLLOWER, part=part), RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the noise gain of U1 at crossover")
