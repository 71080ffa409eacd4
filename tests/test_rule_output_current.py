"""The output-current rule: load, feedback network and capacitance against the limit.

Expected values, derived independently (the op-amps are inline, with no output
resistance, so the hand figures see exactly the drawn parts):

* inverting stage: in- is a virtual ground, so the output delivers Vout/RL into the load
  and Vout/Rf into the feedback resistor (Ohm's law and Kirchhoff's current law; any
  circuits text), Vout = -(Rf/R1) Vin;
* non-inverting stage: Vout/(Rf + Rg) through the feedback divider plus Vout/RL;
* a capacitor C driven by a sine of peak V at f: C dV/dt peaks at 2 pi f C V (any
  circuits text);
* adding the resistive and capacitive peaks as a worst case: common practice;
* the smallest resistance in a preferred series: E24 of IEC 60063 (eseries).
"""

from __future__ import annotations

import eseries
import pytest
from rule_helpers import TWO_PI, findings, line_of, only, params

from checker.findings import Severity

RULE = "output-current"
LIMIT = 20e-3


def opamp(limit: float = LIMIT) -> str:
    return params(open_loop_gain=1e5, gbw=10e6, output_current=limit)


def inverting(load_ohms: float, limit: float = LIMIT) -> str:
    """Gain -10 (R1 1k, R2 10k) from a -1 V..1 V source: the output spans +-10 V."""
    return f"""
        (version 1)
        (stage cable-driver
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp(limit)} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 1k)
          (resistor R2 fb out 10k)
          (source in (range -1V 1V))
          (load out (resistance {load_ohms!r})))
        """


def low_divider(rf: float, rg: float) -> str:
    """Non-inverting gain 2 from -5 V..5 V: +-10 V across Rf + Rg, 100 kOhm load."""
    return f"""
        (version 1)
        (stage low-divider
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp()} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd {rg!r})
          (resistor R2 fb out {rf!r})
          (source in (range -5V 5V))
          (load out (resistance 100k)))
        """


def capacitive(farads: float, limit: float = LIMIT, amplitude: float = 2.0) -> str:
    """A follower with a sine of ``amplitude`` to 20 kHz into ``farads`` only."""
    return f"""
        (version 1)
        (stage probe-driver
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp(limit)} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (amplitude {amplitude!r}) (band 10Hz 20kHz))
          (load out (capacitance {farads!r})))
        """


def test_heavy_resistive_load_exceeds_the_limit():
    text = inverting(470.0)
    finding = only(text, RULE)
    expected = 10 / 470 + 10 / 10e3  # 22.3 mA: load plus feedback resistor (Ohm, KCL)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.unit == "A"
    assert finding.limit == pytest.approx(LIMIT)
    assert finding.measured == pytest.approx(expected, rel=1e-3)


def test_light_load_passes():
    assert 10 / 1e3 + 10 / 10e3 < LIMIT  # 11 mA
    assert findings(inverting(1e3), RULE) == []


def test_suggested_load_is_the_smallest_e24_value_that_fits():
    finding = only(inverting(470.0), RULE)
    # 10/RL + 1 mA <= 20 mA needs RL >= 526 Ohm; the E24 values from 470 Ohm up (eseries).
    least = 10 / (LIMIT - 10 / 10e3)
    candidates = [float(v) for v in eseries.erange(eseries.E24, 470.0, 1e4)]
    expected = min(v for v in candidates if v >= least)
    assert expected == pytest.approx(560.0)
    assert finding.suggestion.value == pytest.approx(expected)
    assert finding.suggestion.unit == "Ω"
    assert finding.suggestion.element == "load out"


def test_suggested_load_clears_the_finding():
    finding = only(inverting(470.0), RULE)
    assert findings(inverting(finding.suggestion.value), RULE) == []


def test_low_value_feedback_divider_draws_the_current():
    finding = only(low_divider(200.0, 200.0), RULE)
    expected = 10 / 400 + 10 / 100e3  # 25.1 mA through Rf + Rg and the load
    assert finding.measured == pytest.approx(expected, rel=1e-3)


def test_feedback_suggestion_is_the_smallest_e24_rf_that_fits_with_rg_scaled():
    finding = only(low_divider(200.0, 200.0), RULE)
    # 10/(2 R) + 0.1 mA <= 20 mA needs R >= 251 Ohm; next E24 value 270 Ohm (eseries).
    least = 10 / (2 * (LIMIT - 10 / 100e3))
    candidates = [float(v) for v in eseries.erange(eseries.E24, 200.0, 1e4)]
    expected = min(v for v in candidates if v >= least)
    assert finding.suggestion.value == pytest.approx(expected)
    assert finding.suggestion.value == pytest.approx(270.0)
    assert finding.suggestion.element == "R2"
    assert "R1" in finding.suggestion.text


def test_feedback_suggestion_clears_the_finding():
    finding = only(low_divider(200.0, 200.0), RULE)
    rf = finding.suggestion.value
    assert findings(low_divider(rf, rf), RULE) == []  # Rg scaled by the same factor


def test_capacitive_load_current_at_the_band_top():
    finding = only(capacitive(100e-9), RULE)
    expected = TWO_PI * 20e3 * 100e-9 * 2.0  # 2 pi f C V = 25.1 mA
    assert finding.measured == pytest.approx(expected, rel=1e-3)
    assert finding.details["capacitive_a"] == pytest.approx(expected, rel=1e-3)
    assert finding.details["resistive_a"] == pytest.approx(0.0, abs=1e-9)


def test_small_capacitive_load_passes():
    assert TWO_PI * 20e3 * 10e-9 * 2.0 < LIMIT  # 2.5 mA
    assert findings(capacitive(10e-9), RULE) == []


def test_capacitive_overload_suggests_a_buffer_rated_for_the_total():
    finding = only(capacitive(100e-9), RULE)
    assert finding.suggestion.unit == "A"
    assert finding.suggestion.value == pytest.approx(27e-3)  # 25.1 mA up to E12
    assert "buffer" in finding.suggestion.text


def test_part_rated_for_the_suggested_current_clears_the_finding():
    finding = only(capacitive(100e-9), RULE)
    assert findings(capacitive(100e-9, limit=finding.suggestion.value), RULE) == []


def test_capacitance_behind_a_series_resistor_counts():
    text = f"""
        (version 1)
        (stage probe-driver
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp()} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor R3 out probe 10)
          (source in (amplitude 2V) (band 10Hz 20kHz))
          (load probe (capacitance 100n)))
        """
    finding = only(text, RULE)
    # 10 Ohm and 100 nF: a pole at 159 kHz, so at 20 kHz the probe sees
    # 2 V/|1 + j 2 pi 20k 10 100n| = 1.985 V (first-order RC, common practice).
    volts = 2.0 / abs(1 + 1j * TWO_PI * 20e3 * 10 * 100e-9)
    assert finding.measured == pytest.approx(TWO_PI * 20e3 * 100e-9 * volts, rel=1e-3)


def test_part_without_output_current_cannot_be_checked():
    text = inverting(470.0).replace(opamp(), params(open_loop_gain=1e5, gbw=10e6))
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the output current of U1")
    assert finding.details.get("unchecked") is True


def test_integrator_without_dc_feedback_cannot_be_checked():
    text = f"""
        (version 1)
        (stage ramp
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp()} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 100k)
          (capacitor C1 fb out 1u)
          (source in (amplitude 0.5V) (band 1Hz 50Hz))
          (load out (resistance 10k)))
        """
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the output current of U1")
    assert "no feedback at DC" in finding.message


SHORTED = """
    (version 1)
    (stage probe-follower
      (ground gnd) (supply vcc 12V) (supply vee -12V)
      (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
      (source in (amplitude 1V) (band 100Hz 1kHz))
      (load out (resistance 1u)))
"""


def test_an_output_all_but_shorted_by_its_load_is_an_output_current_error():
    # 1 uohm against the class's 75 ohm output resistance divides the loop gain of 2e5 by
    # about 7.5e7 (voltage divider, any circuits text): below 1, so the loop reads as open.
    # The fault is the short, not a comparator: output-current reports it, with the 1 V
    # peak of the follower, plus the gp-bipolar class's 2 mV offset (the project's own
    # class value) as the worst case adds it, into 1 uohm (Ohm's law); open-loop stays
    # quiet.
    finding = only(SHORTED, RULE)
    assert finding.severity == Severity.ERROR
    assert "all but shorts U1's output" in finding.message
    assert finding.measured == pytest.approx((1.0 + 2e-3) / 1e-6, rel=1e-4)
    assert finding.details["shorted"] is True
    assert findings(SHORTED, "open-loop") == []


def test_a_comparator_without_a_load_problem_stays_with_the_open_loop_rule():
    # No feedback at all (in- on a divider): taking the load away does not close a loop.
    text = SHORTED.replace("(in- out)", "(in- ref)").replace(
        "(load out", "(resistor R1 vcc ref 100k) (resistor R2 ref gnd 100k) (load out")
    assert findings(text, RULE) == []
    assert len(findings(text, "open-loop")) == 1


AC_COUPLED = """
    (version 1)
    (stage ac-driver
      (ground gnd) (supply vcc 15V) (supply vee -15V)
      (opamp U1 (params (open-loop-gain 1e6) (gbw 10MHz) (output-current 50mA))
        (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
      (capacitor C1 in x 10u) (resistor R1 x fb 1k) (resistor R2 fb out 100k)
      (source in (amplitude 0.1V) (band 1kHz 10kHz))
      (load out (resistance 100)))
"""


def test_an_ac_coupled_output_is_judged_on_its_in_band_current():
    # Through the 10 uF coupling capacitor the source has no DC transfer, so the DC
    # solution draws nothing; in band the output swings 100 x 0.1 V = 10 V into the
    # 100 ohm load and the 100k feedback resistor (to a virtual ground): 10/100 + 10/100k
    # = 100.1 mA (Ohm's law) against the part's 50 mA.
    finding = only(AC_COUPLED, RULE)
    assert finding.severity is Severity.ERROR
    assert finding.measured == pytest.approx(10 / 100 + 10 / 100e3, rel=0.01)
    assert finding.details["capacitive_a"] == 0
