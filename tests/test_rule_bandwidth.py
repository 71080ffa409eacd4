"""The bandwidth rule: the closed-loop -3 dB edge against the band, and the gain that
finite loop gain costs at the band's top.

Expected values, derived independently:

* closed-loop -3 dB bandwidth of a non-inverting stage on a single-pole op-amp,
  A(s) = A0 / (1 + s/w1), w1 = 2 pi GBW / A0 (Sedra and Smith, Microelectronic Circuits, 7th ed.,
  op-amp chapter): python-control ``bandwidth`` of A/(1 + A/NG), NG = 1 + Rf/Rg;
* the closed-loop bandwidth of that model, f3dB = fb (1 + A0/(1 + R2/R1)), about
  ft/(1 + R2/R1) (A. S. Sedra and K. C. Smith, Microelectronic Circuits, 7th ed., Oxford
  University Press 2015, chapter 2, section "Effect of Finite Open-Loop Gain and
  Bandwidth on Circuit Performance"), computed here: gain 50 with open-loop gain
  250 000 and a 160 Hz open-loop pole -> 800.16 kHz; GBW 1 MHz at gain 10 -> 100 kHz;
* closed-loop bandwidth ~ GBW / noise gain, so the GBW a band needs is about the band
  times the noise gain (common practice);
* the gain error at a frequency: |G|/|G_ideal| = |T/(1 + T)|, T = A/NG, evaluated with
  python-control ``evalfr`` on the same transfer function;
* an inverting stage with Cf across Rf on an ideal op-amp: a single RC pole at
  1/(2 pi Rf Cf) (first-order low-pass, common practice).
"""

from __future__ import annotations

import math

import control
import pytest
from rule_helpers import TWO_PI, findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import at_least

RULE = "bandwidth"


def non_inverting(a0: float, gbw: float, rf: float, rg: float, band_top: float,
                  require: str = "") -> str:
    """A non-inverting stage, gain 1 + rf/rg, op-amp on line 4, +-15 V."""
    opamp = params(open_loop_gain=a0, gbw=gbw)
    return f"""
        (version 1)
        (stage preamp
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd {rg!r})
          (resistor R2 fb out {rf!r})
          (source in (amplitude 10mV) (band 10Hz {band_top!r}))
          (load out (resistance 10k))
          {require})
        """


def closed_loop(a0: float, gbw: float, noise_gain: float):
    """python-control model: A(s)/(1 + A(s)/NG) for A(s) = A0/(1 + s/w1)."""
    opamp = control.tf([a0], [a0 / (TWO_PI * gbw), 1])
    return control.feedback(opamp, 1 / noise_gain)


# A0 = 250 000, open-loop pole 160 Hz, gain 50: f3dB = 160 Hz (1 + 250 000/50).
A0_50, POLE_50 = 250e3, 160.0
GBW_50 = A0_50 * POLE_50  # 40 MHz
GAIN_50 = non_inverting(A0_50, GBW_50, 49e3, 1e3, 1e6)


def test_gain_50_on_a_250k_160hz_part_reaches_800_khz_and_falls_short_of_1_mhz():
    finding = only(GAIN_50, RULE)
    # f3dB = fb (1 + A0/(1 + R2/R1)) = 160 Hz x 5001 = 800.16 kHz (Sedra and Smith,
    # Microelectronic Circuits, 7th ed., section "Effect of Finite Open-Loop Gain and
    # Bandwidth on Circuit Performance")
    assert finding.measured == pytest.approx(POLE_50 * (1 + A0_50 / 50), rel=0.01)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING  # no requirement: the band's top
    assert finding.limit == pytest.approx(1e6)
    assert finding.unit == "Hz"
    assert finding.elements == ("U1", "source at in")
    assert finding.line == 4 == line_of(GAIN_50, "(opamp U1")


def test_measured_bandwidth_agrees_with_python_control():
    finding = only(GAIN_50, RULE)
    expected = TWO_PI ** -1 * float(control.bandwidth(closed_loop(A0_50, GBW_50, 50.0)))
    assert finding.measured == pytest.approx(expected, rel=0.005)


def test_gbw_1mhz_at_gain_10_gives_100_khz_against_a_required_150_khz():
    text = non_inverting(1e5, 1e6, 9e3, 1e3, 20e3, "(require (bandwidth 150kHz))")
    finding = only(text, RULE)
    # ft/(1 + R2/R1) = 1 MHz/10 = 100 kHz (Sedra and Smith, Microelectronic Circuits,
    # 7th ed., section "Effect of Finite Open-Loop Gain and Bandwidth on Circuit
    # Performance")
    assert finding.measured == pytest.approx(1e6 / 10, rel=0.01)
    assert finding.severity is Severity.ERROR  # a stated requirement
    assert finding.limit == pytest.approx(150e3)
    assert finding.details["noise_gain"] == pytest.approx(10.0, rel=1e-3)


def test_wide_band_part_passes():
    # GBW 10 MHz at gain 10: about 1 MHz, and at 50 kHz |T/(1+T)| = 0.9988, a 0.12 %
    # error (python-control below), both inside the limits.
    model = closed_loop(1e5, 10e6, 10.0)
    error = 1 - abs(complex(control.evalfr(model, 1j * TWO_PI * 50e3))) / 10
    assert error < 0.01
    assert findings(non_inverting(1e5, 10e6, 9e3, 1e3, 50e3), RULE) == []


def test_suggested_gbw_is_band_times_noise_gain_rounded_up_to_e12():
    finding = only(GAIN_50, RULE)
    # required bandwidth x noise gain = 1 MHz x 50 = 50 MHz (common practice), next E12
    # value up 56 MHz; the E12 value below it (47 MHz) leaves 940 kHz (GBW/NG).
    assert finding.suggestion.value == pytest.approx(at_least(50e6, "E12"))
    assert finding.suggestion.value == pytest.approx(56e6)
    assert finding.suggestion.unit == "Hz"
    assert finding.suggestion.element == "U1"


def test_suggested_gbw_clears_the_bandwidth_finding():
    finding = only(GAIN_50, RULE)
    fixed = non_inverting(A0_50, finding.suggestion.value, 49e3, 1e3, 1e6)
    # The -3 dB edge now passes 1 MHz; what is left is the gain error at the band's top,
    # a separate finding whose GBW the suggestion also names (next test).
    assert [f for f in findings(fixed, RULE) if f.unit == "Hz"] == []


def test_gbw_named_for_a_flat_band_top_clears_every_finding():
    finding = only(GAIN_50, RULE)
    flat = finding.details["gbw_for_gain_error_hz"]
    # 1 % at 1 MHz needs an edge near 1 MHz / sqrt(1/0.99^2 - 1) = 7.0 MHz, so about
    # 350 MHz at a noise gain of 50 (single pole, common practice).
    assert flat >= 7.0e6 * 50 * 0.9
    assert findings(non_inverting(A0_50, flat, 49e3, 1e3, 1e6), RULE) == []


def test_e12_gbw_below_the_suggestion_does_not_clear():
    finding = only(GAIN_50, RULE)
    assert finding.suggestion.value == pytest.approx(56e6)
    still = only(non_inverting(A0_50, 47e6, 49e3, 1e3, 1e6), RULE)
    assert still.measured == pytest.approx(47e6 / 50, rel=0.01)  # GBW / NG


def filtered(require: str = "") -> str:
    """Inverting gain -10 (R1 10k, R2 100k) with C1 1.5 nF across R2."""
    opamp = params(open_loop_gain=1e5, gbw=10e6)
    return f"""
        (version 1)
        (stage filtered
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k)
          (resistor R2 fb out 100k)
          (capacitor C1 fb out 1.5n)
          (source in (amplitude 10mV) (band 0.1Hz 10kHz))
          (load out (resistance 10k))
          {require})
        """


def test_feedback_capacitor_against_a_requirement_is_reported_as_the_network():
    # C1 1.5 nF across R2 100k: an RC pole at 1/(2 pi 100k 1.5n) = 1.06 kHz
    # (first-order low-pass), far below the required 10 kHz.
    finding = only(filtered("(require (bandwidth 10kHz))"), RULE)
    # The band's centre (31.6 Hz) is where the mid-band gain is read; the pole is 34
    # times higher, so the -3 dB edge sits within 0.1 % of it.
    pole = 1 / (TWO_PI * 100e3 * 1.5e-9)
    assert finding.details["ideal_bandwidth_hz"] == pytest.approx(pole, rel=0.01)
    assert finding.measured == pytest.approx(pole, rel=0.01)
    assert finding.severity is Severity.ERROR
    assert "network" in finding.message
    assert finding.suggestion.value is None


def test_deliberate_filter_inside_the_band_without_a_requirement_is_not_flagged():
    # The same 1.06 kHz pole against the band's top alone: the network shapes the band
    # on purpose, and finite loop gain costs nothing there (GBW 10 MHz).
    assert findings(filtered(), RULE) == []


def test_the_edge_is_read_from_the_passband_not_from_a_centre_on_the_slope():
    # The same 1.06 kHz pole with a band of 10 Hz to 100 kHz: the band's centre, 1 kHz,
    # sits on the slope (gain down to 0.73 of -10 there), so 3 dB below the centre's gain
    # would put the edge near 1.7 kHz; 3 dB below the band's largest gain (-10, at its
    # bottom) is the pole itself.
    text = filtered("(require (bandwidth 1.5kHz))").replace("(band 0.1Hz 10kHz)",
                                                            "(band 10Hz 100kHz)")
    finding = only(text, RULE)
    pole = 1 / (TWO_PI * 100e3 * 1.5e-9)
    assert finding.measured == pytest.approx(pole, rel=0.01)
    assert finding.severity is Severity.ERROR


def coupled(capacitor: str, require: str = "(require (gain -10) (gain-tolerance 3%))") -> str:
    """Inverting gain -10 behind a coupling capacitor C1 into R1 (10k, the source's 100
    ohm in series): a high-pass at 1/(2 pi (R1 + Rs) C1)."""
    opamp = params(open_loop_gain=1e6, gbw=100e6)
    return f"""
        (version 1)
        (stage coupled
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in a {capacitor}) (resistor R1 a fb 10k)
          (resistor R2 fb out 100k)
          (source in (amplitude 100mV) (band 20Hz 20kHz) (impedance 100))
          (load out (resistance 10k))
          {require})
        """


def test_a_coupling_capacitor_that_cuts_the_bottom_of_the_band_is_warned():
    # 159 nF into 10.1 kOhm: a corner at 1/(2 pi 10.1k 159n) = 99.1 Hz (first-order
    # high-pass, common practice), inside the band from 20 Hz; at 20 Hz the gain is
    # 1/sqrt(1 + (99.1/20)^2) of the passband's, 14.1 dB down.
    finding = only(coupled("159n"), RULE)
    corner = 1 / (TWO_PI * 10.1e3 * 159e-9)
    assert finding.severity is Severity.WARNING
    assert finding.measured == pytest.approx(corner, rel=0.01) and finding.limit == 20
    assert finding.details["loss_db"] == pytest.approx(
        10 * math.log10(1 + (corner / 20) ** 2), abs=0.1)
    # the fix: the smallest E12 capacitance with the corner at 20 Hz or below,
    # 1/(2 pi 10.1k 20) = 788 nF -> 820 nF (IEC 60063 E12)
    assert finding.suggestion.value == pytest.approx(at_least(1 / (TWO_PI * 10.1e3 * 20), "E12"))
    assert finding.suggestion.value == pytest.approx(820e-9)
    assert finding.suggestion.check.clears


def test_a_coupling_capacitor_large_enough_for_the_band_passes():
    # 1 uF: a corner at 15.8 Hz, below the band's bottom
    assert findings(coupled("1u"), RULE) == []


def test_a_high_pass_without_a_stated_gain_or_bandwidth_shapes_the_band_on_purpose():
    assert findings(coupled("159n", require=""), RULE) == []


def test_gain_error_at_the_band_top_from_finite_loop_gain():
    text = non_inverting(1e5, 1e6, 9e3, 1e3, 20e3)
    finding = only(text, RULE)
    # python-control: 1 - |G(j 2 pi 20 kHz)| / 10, about 1.95 %.
    model = closed_loop(1e5, 1e6, 10.0)
    expected = 1 - abs(complex(control.evalfr(model, 1j * TWO_PI * 20e3))) / 10
    assert finding.measured == pytest.approx(expected, rel=0.01)
    assert finding.unit == "%"
    assert finding.limit == pytest.approx(0.01)  # default max_gain_error
    assert finding.severity is Severity.WARNING
    assert finding.line == line_of(text, "(opamp U1")


def test_gain_tolerance_requirement_sets_the_gain_error_limit():
    # The same 1.95 % error is within a stated 5 % tolerance.
    text = non_inverting(1e5, 1e6, 9e3, 1e3, 20e3, "(require (gain-tolerance 5%))")
    assert findings(text, RULE) == []


def test_suggested_gbw_clears_the_gain_error():
    finding = only(non_inverting(1e5, 1e6, 9e3, 1e3, 20e3), RULE)
    gbw = finding.suggestion.value
    assert findings(non_inverting(1e5, gbw, 9e3, 1e3, 20e3), RULE) == []


def test_part_without_gbw_cannot_be_checked():
    text = non_inverting(1e5, 1e6, 9e3, 1e3, 20e3).replace(
        params(open_loop_gain=1e5, gbw=1e6), params(open_loop_gain=1e5))
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the bandwidth of U1")
    assert finding.details.get("unchecked") is True


def test_open_loop_stage_is_left_to_the_open_loop_rule():
    opamp = params(open_loop_gain=1e5, gbw=1e6)
    text = f"""
        (version 1)
        (stage comparator
          (ground gnd) (supply vcc 5V)
          (opamp U1 {opamp} (in+ in) (in- ref) (out out) (v+ vcc) (v- gnd))
          (resistor R1 vcc ref 100k)
          (resistor R2 ref gnd 100k)
          (source in (range 0V 5V) (band 0Hz 1Hz))
          (load out (resistance 100k)))
        """
    assert findings(text, RULE) == []


def test_a_band_from_dc_through_a_series_capacitor_is_warned():
    # 10 nF into 10k blocks DC: the band from 0 Hz loses its bottom whatever the size
    opamp = params(open_loop_gain=1e6, gbw=100e6)
    text = f"""
        (version 1)
        (stage dc-blocked (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ pos) (in- out) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in pos 10n) (resistor R1 pos gnd 10k)
          (source in (range 0V 2V) (band 0Hz 1kHz))
          (load out (resistance 100k))
          (require (bandwidth 1kHz)))
        """
    finding = only(text, RULE)
    assert finding.limit == 0 and "the DC is blocked" in finding.message
    assert "blocks at any size" in finding.suggestion.text


def test_a_gain_legs_capacitor_to_ground_is_the_one_to_raise():
    # Non-inverting gain 11 with R1 1k in series with C2 4.7 uF to ground: a corner near
    # 1/(2 pi 1k C2) = 33.9 Hz, inside a band from 20 Hz; C2 >= 1/(2 pi 1k 20 Hz) = 7.96
    # uF puts it at the bottom (first-order high-pass of the leg, common practice),
    # 8.2 uF in E12 (IEC 60063).
    opamp = params(open_loop_gain=1e6, gbw=100e6)
    text = f"""
        (version 1)
        (stage leg (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R2 fb out 10k) (resistor R1 fb x 1k) (capacitor C2 x gnd 4.7u)
          (source in (amplitude 0.1V) (band 20Hz 20kHz))
          (load out (resistance 100k))
          (require (gain 11) (gain-tolerance 5%)))
        """
    finding = only(text, RULE)
    assert finding.suggestion.element == "C2"
    assert finding.suggestion.value == pytest.approx(8.2e-6)
