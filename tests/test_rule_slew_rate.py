"""The slew-rate rule: the steepest output swing against the part's slew rate.

Expected values, derived independently:

* a sine of peak V at frequency f needs a slew rate of 2 pi f V; the full-power
  bandwidth at a swing V is SR / (2 pi V); the largest undistorted peak at f is
  SR / (2 pi f) (A. S. Sedra and K. C. Smith, Microelectronic Circuits, 7th ed., Oxford
  University Press 2015, chapter 2, section "Large-Signal Operation of Op Amps": slew
  rate and full-power bandwidth);
* the closed-loop bandwidth of a single-pole op-amp, ft/(1 + R2/R1): GBW 1 MHz at gain
  10 gives 100 kHz (the same book, section "Effect of Finite Open-Loop Gain and
  Bandwidth on Circuit Performance");
* values of those relations, computed here: SR 2 V/us at 12 V peak -> 26.5 kHz; SR
  0.5 V/us at 100 kHz -> 0.796 V;
* the output peak at the band's top: the source's amplitude times |G(j 2 pi f)| of the
  closed loop A/(1 + A/NG), A(s) = A0/(1 + s/w1), from python-control ``evalfr``.
"""

from __future__ import annotations

import math

import control
import pytest
from rule_helpers import TWO_PI, findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import at_least

RULE = "slew-rate"


def follower(slew: float, amplitude: float, band_top: float, source: str = "") -> str:
    """A follower on +-15 V with a fast (10 MHz) part of slew rate ``slew``; op-amp on
    line 4."""
    opamp = params(open_loop_gain=1e5, gbw=10e6, slew_rate=slew)
    source = source or f"(source in (amplitude {amplitude!r}) (band 10Hz {band_top!r}))"
    return f"""
        (version 1)
        (stage buffer
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          {source}
          (load out (resistance 10k)))
        """


def gain_ten(amplitude: float, slew: float = 0.5e6) -> str:
    """Non-inverting gain 10 on a part of GBW 1 MHz and SR 0.5 V/us; band up to its
    100 kHz closed-loop bandwidth (ft/(1 + R2/R1), Sedra and Smith, 7th ed.)."""
    opamp = params(open_loop_gain=1e5, gbw=1e6, slew_rate=slew)
    return f"""
        (version 1)
        (stage gain-ten
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k)
          (resistor R2 fb out 9k)
          (source in (amplitude {amplitude!r}) (band 10Hz 100kHz))
          (load out (resistance 10k)))
        """


def test_full_power_bandwidth_of_2_v_per_us_at_12_v_is_26_5_khz():
    # A 12 V peak to 30 kHz: 2 pi 30 kHz 12 V = 2.26 V/us, over the part's 2 V/us.
    text = follower(2e6, 12.0, 30e3)
    finding = only(text, RULE)
    # SR/(2 pi Vpeak) = 2e6/(2 pi 12) = 26.5 kHz (Sedra and Smith, Microelectronic
    # Circuits, 7th ed., large-signal operation of op-amps: full-power bandwidth).
    assert finding.details["full_power_bandwidth_hz"] == pytest.approx(26.5e3, rel=0.002)
    assert finding.details["output_peak_v"] == pytest.approx(12.0, rel=1e-3)


def test_slew_finding_reports_rule_severity_element_line_and_rate():
    text = follower(2e6, 12.0, 30e3)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1", "source at in")
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.unit == "V/s"
    assert finding.limit == pytest.approx(2e6)
    assert finding.measured == pytest.approx(TWO_PI * 30e3 * 12.0, rel=1e-3)  # 2 pi f V


def test_swing_within_the_full_power_bandwidth_passes():
    # 2 pi 25 kHz 12 V = 1.88 V/us, under 2 V/us (25 kHz < 26.5 kHz).
    assert TWO_PI * 25e3 * 12.0 < 2e6
    assert findings(follower(2e6, 12.0, 25e3), RULE) == []


def test_gain_ten_on_a_half_v_per_us_part_keeps_0_796_v_at_100_khz():
    finding = only(gain_ten(0.2), RULE)
    # SR/(2 pi f) = 0.5 V/us / (2 pi 100 kHz) = 0.796 V (Sedra and Smith, Microelectronic
    # Circuits, 7th ed., section "Large-Signal Operation of Op Amps")
    expected = 0.5e6 / (TWO_PI * 100e3)
    assert expected == pytest.approx(0.796, abs=0.001)
    assert finding.details["frequency_hz"] == pytest.approx(100e3)
    assert finding.details["largest_peak_v"] == pytest.approx(expected, rel=1e-3)


def test_gain_ten_output_peak_follows_the_closed_loop_roll_off():
    finding = only(gain_ten(0.2), RULE)
    opamp = control.tf([1e5], [1e5 / (TWO_PI * 1e6), 1])
    model = control.feedback(opamp, 0.1)
    peak = 0.2 * abs(complex(control.evalfr(model, 1j * TWO_PI * 100e3)))  # about 1.41 V
    assert finding.details["output_peak_v"] == pytest.approx(peak, rel=0.002)
    assert finding.measured == pytest.approx(TWO_PI * 100e3 * peak, rel=0.002)


def test_range_source_with_a_band_swings_by_its_half_span():
    # 0 V to 4 V to 50 kHz: a 2 V peak about 2 V, 2 pi 50 kHz 2 V = 0.628 V/us.
    text = follower(0.5e6, 0.0, 0.0, source="(source in (range 0V 4V) (band 0Hz 50kHz))")
    finding = only(text, RULE)
    assert finding.details["output_peak_v"] == pytest.approx(2.0, rel=1e-3)
    assert finding.measured == pytest.approx(TWO_PI * 50e3 * 2.0, rel=1e-3)


def test_range_source_without_a_band_is_not_a_slew_question():
    text = follower(0.5e6, 0.0, 0.0, source="(source in (range 0V 4V))")
    assert findings(text, RULE) == []


def test_suggested_slew_rate_is_the_need_rounded_up_to_e12():
    finding = only(follower(2e6, 12.0, 30e3), RULE)
    assert finding.suggestion.value == pytest.approx(at_least(finding.measured, "E12"))
    assert finding.suggestion.value == pytest.approx(2.7e6)  # 2.26 V/us -> 2.7 V/us
    assert finding.suggestion.unit == "V/s"
    assert finding.suggestion.element == "U1"


def test_suggested_slew_rate_clears_the_finding():
    finding = only(follower(2e6, 12.0, 30e3), RULE)
    assert findings(follower(finding.suggestion.value, 12.0, 30e3), RULE) == []


def test_swing_under_the_largest_undistorted_peak_clears_the_finding():
    finding = only(follower(2e6, 12.0, 30e3), RULE)
    largest = finding.details["largest_peak_v"]
    assert largest == pytest.approx(2e6 / (TWO_PI * 30e3), rel=1e-9)  # SR/(2 pi f)
    assert findings(follower(2e6, math.floor(largest * 100) / 100, 30e3), RULE) == []


def test_min_ratio_setting_asks_for_slew_margin():
    # 1.88 V/us passes 2 V/us, but not with 25 % to spare.
    text = follower(2e6, 12.0, 25e3)
    finding = only(text, RULE, settings={"min_ratio": 1.25})
    assert finding.measured == pytest.approx(TWO_PI * 25e3 * 12.0, rel=1e-3)


def test_part_without_slew_rate_cannot_be_checked():
    text = follower(2e6, 12.0, 30e3).replace("(slew-rate 2000000.0)", "")
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the slew rate of U1")
    assert finding.details.get("unchecked") is True


def test_a_resonance_inside_the_band_is_where_the_slew_is_read():
    # R2 || L1 || C1 in the feedback of a non-inverting stage: gain 1 away from
    # f0 = 1/(2 pi sqrt(L C)) = 30 kHz and 1 + R2/R1 = 11 at it (the tank's impedance is
    # R2 there; parallel resonance, any circuits text), Q = R2 sqrt(C/L) = 50. On a near
    # ideal op-amp, 0.5 V swings the output 5.5 V at 30 kHz: 2 pi f0 5.5 V = 1.04 V/us
    # (SR = 2 pi f Vpeak), against 0.5 V/us. The band's top, 100 kHz, asks for only
    # 2 pi 100 kHz 0.5 V = 0.31 V/us, and the resonance lies between grid points.
    opamp = params(open_loop_gain=1e9, gbw=1e12, slew_rate="0.5V/us")
    text = f"""
        (version 1)
        (stage bump (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 10k)
          (inductor L1 fb out 1.061m) (capacitor C1 fb out 26.5n)
          (source in (amplitude 0.5V) (band 1kHz 100kHz))
          (load out (resistance 100k)))
        """
    f0 = 1 / (TWO_PI * math.sqrt(1.061e-3 * 26.5e-9))
    finding = only(text, RULE)
    assert finding.measured == pytest.approx(TWO_PI * f0 * 0.5 * 11, rel=0.01)
