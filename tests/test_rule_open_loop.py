"""The open-loop rule: an op-amp with no negative feedback is a comparator in disguise.

Expected values, derived by hand:

* the return ratio of an op-amp whose output reaches its non-inverting input through
  Rh against Rth there is T = -A0 * Rth/(Rth + Rh) at DC: positive feedback
  (superposition on the non-inverting input, common practice);
* hysteresis from that divider: the non-inverting input moves by
  dV = Vswing * Rth/(Rth + Rh) when the output swings by Vswing, so for a wanted dV,
  Rh = Rth * (Vswing/dV - 1) (common practice); the rule asks for 1 % of the supply
  span and rounds Rh to the nearest E24 value.
"""

from __future__ import annotations

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import nearest

RULE = "open-loop"
A0 = 1e5
OPAMP = params(open_loop_gain=A0, gbw=1e6, output_headroom_high="50mV",
               output_headroom_low="50mV")
SUPPLY, PROBE_IMPEDANCE = 5.0, 10e3


def threshold_detector(extra: str = "") -> str:
    """A water probe (10 kOhm) on in+, a divider reference on in-; U1 on line 4."""
    return f"""
        (version 1)
        (stage flood-alarm
          (ground gnd) (supply vcc 5V)
          (opamp U1 {OPAMP} (in+ in) (in- ref) (out out) (v+ vcc) (v- gnd))
          (resistor R1 vcc ref 100k)
          (resistor R2 ref gnd 47k)
          {extra}
          (source in (range 0V 3.3V) (band 0Hz 1Hz) (impedance 10k))
          (load out (resistance 1M)))
        """


def test_open_loop_comparator_is_flagged():
    text = threshold_detector()
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.column == 3
    assert "no negative feedback" in finding.message
    # Nothing connects the output to either input: the loop gain is zero.
    assert finding.measured == pytest.approx(0.0, abs=1e-9)
    assert finding.limit == pytest.approx(1.0)


def test_suggested_hysteresis_resistor_is_rth_times_swing_over_step_minus_one():
    finding = only(threshold_detector(), RULE)
    step = 0.01 * SUPPLY  # 1 % of the 5 V span: 50 mV
    rh = PROBE_IMPEDANCE * (SUPPLY / step - 1)  # 990 kOhm
    assert rh == pytest.approx(990e3)
    assert finding.suggestion.value == pytest.approx(nearest(rh, "E24"))
    assert finding.suggestion.value == pytest.approx(1e6)  # 990 k -> 1.0 M in E24
    assert finding.suggestion.unit == "Ω"


def test_suggested_hysteresis_resistor_gives_about_one_percent_of_the_supply():
    finding = only(threshold_detector(), RULE)
    rh = finding.suggestion.value
    band = SUPPLY * PROBE_IMPEDANCE / (PROBE_IMPEDANCE + rh)  # dV = Vswing Rth/(Rth + Rh)
    assert band == pytest.approx(0.01 * SUPPLY, rel=0.02)


def test_schmitt_trigger_with_positive_feedback_only_is_flagged():
    # The threshold detector with its suggested hysteresis resistor fitted: a Schmitt
    # trigger built from an op-amp is still an op-amp used as a comparator (the rule's
    # main fix is a comparator part), now with positive feedback only.
    text = threshold_detector("(resistor R3 out in 1M)")
    finding = only(text, RULE)
    expected = -A0 * PROBE_IMPEDANCE / (PROBE_IMPEDANCE + 1e6)  # T = -A0 Rth/(Rth + Rh)
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert "positive feedback only" in finding.message
    assert finding.measured == pytest.approx(expected, rel=1e-6)
    assert finding.suggestion.value is None  # the hysteresis network is already there


def test_integrator_with_only_a_capacitor_in_feedback_is_not_flagged():
    # No feedback at DC (C1 is open there), but the loop closes above DC.
    text = f"""
        (version 1)
        (stage integrator
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 100k)
          (capacitor C1 fb out 100n)
          (source in (amplitude 1V) (band 10Hz 1kHz))
          (load out (resistance 10k)))
        """
    assert findings(text, RULE) == []


def test_inverting_amplifier_is_not_flagged():
    text = f"""
        (version 1)
        (stage inverting-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k)
          (resistor R2 fb out 47k)
          (source in (amplitude 1V) (band 10Hz 1kHz))
          (load out (resistance 10k)))
        """
    assert findings(text, RULE) == []
