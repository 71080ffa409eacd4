"""The common-mode-range rule: each op-amp input against the part's input range.

Expected values, derived by hand:

* the allowed window is V- + input-range-low to V+ + input-range-high, the part's
  range written relative to its rails (the format's convention, docs/format.md);
* a follower's input is the source's voltage; its inverting input is the output,
  Vin * A0/(1 + A0) for an op-amp of open-loop gain A0 (Sedra and Smith,
  Microelectronic Circuits, 7th ed., op-amp chapter: the finite-gain follower);
* a bias current Ib flowing into the input through the source impedance Rs moves the
  input by Ib * Rs (Ohm's law), and the worst case widens the range by that much
  (Eggleston, Basic Electronics for Scientists and Engineers, section 6.4, DC error
  terms of the op-amp).
"""

from __future__ import annotations

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "common-mode-range"
VOLT_TOLERANCE = 1e-4  # 0.1 mV
A0 = 1e5

# A CMOS-like input that reaches 0.1 V below V- but stops 1.5 V below V+.
TOP_LIMITED = params(open_loop_gain=A0, gbw=1e6, output_headroom_high="50mV",
                     output_headroom_low="50mV", input_range_low="-0.1V",
                     input_range_high="-1.5V")


def follower(low: float, high: float, opamp: str = TOP_LIMITED, supply: str = "5V",
             impedance: str = "") -> str:
    """A single-supply follower; U1 is on line 4."""
    return f"""
        (version 1)
        (stage sensor-buffer
          (ground gnd) (supply vcc {supply})
          (opamp U1 {opamp} (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range {low!r} {high!r}) (band 0Hz 10Hz) {impedance})
          (load out (resistance 10k)))
        """


def test_follower_inside_the_common_mode_range_passes():
    # 0.5 V to 3.4 V inside -0.1 V to 3.5 V.
    assert findings(follower(0.5, 3.4), RULE) == []


def test_follower_input_above_the_range_is_an_error_at_the_opamp():
    text = follower(0.5, 4.5)
    finding = only(text, RULE)
    assert finding.details["pin"] == "in+"
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.column == 3
    assert finding.unit == "V"
    assert finding.measured == pytest.approx(4.5, abs=VOLT_TOLERANCE)  # the source itself
    assert finding.limit == pytest.approx(5.0 - 1.5)  # V+ + input-range-high


def test_follower_fault_is_reported_once_at_the_non_inverting_input():
    # in- is the output, held by feedback at 4.5 V * A0/(1 + A0) (finite-gain follower,
    # Sedra and Smith): out of range too, but the same fault.
    assert 4.5 * A0 / (1 + A0) > 3.5
    found = findings(follower(0.5, 4.5), RULE)
    assert [f.details["pin"] for f in found] == ["in+"]


def test_open_loop_inverting_input_beyond_the_range_is_reported():
    # A comparator: in+ from 1 V to 2 V is inside, in- on a 4 V reference is 0.5 V
    # above the 3.5 V top of the range; nothing holds one input at the other.
    text = f"""
        (version 1)
        (stage level-switch
          (ground gnd) (supply vcc 5V) (supply ref 4V)
          (opamp U1 {TOP_LIMITED} (in+ in) (in- ref) (out out) (v+ vcc) (v- gnd))
          (source in (range 1V 2V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
        """
    finding = only(text, RULE)
    assert finding.details["pin"] == "in-" and finding.details["net"] == "ref"
    assert finding.measured == pytest.approx(4.0, abs=VOLT_TOLERANCE)
    assert finding.limit == pytest.approx(3.5)
    assert finding.line == line_of(text, "(opamp U1")


def test_input_below_the_bottom_of_the_range_is_an_error():
    # A bipolar-like input that stops 2 V above V-, on a 12 V single supply: 1 V is low.
    opamp = params(open_loop_gain=A0, gbw=1e6, output_headroom_high="1.5V",
                   output_headroom_low="1.5V", input_range_low="2V", input_range_high="-2V")
    found = findings(follower(1.0, 5.0, opamp=opamp, supply="12V"), RULE)
    plus = [f for f in found if f.details["pin"] == "in+"]
    assert len(plus) == 1
    assert plus[0].measured == pytest.approx(1.0, abs=VOLT_TOLERANCE)
    assert plus[0].limit == pytest.approx(0.0 + 2.0)  # V- + input-range-low


def test_bias_current_through_the_source_impedance_widens_the_range():
    # Ib = 80 nA through Rs = 1 MOhm: 80 mV (Ohm's law). 2.05 V less 80 mV is 1.97 V,
    # below the 2 V bottom of the range; without the source impedance it fits.
    opamp = params(open_loop_gain=A0, gbw=1e6, bias_current=80e-9,
                   output_headroom_high="1.5V", output_headroom_low="1.5V",
                   input_range_low="2V", input_range_high="-2V")
    assert findings(follower(2.05, 5.0, opamp=opamp, supply="12V"), RULE) == []
    found = findings(follower(2.05, 5.0, opamp=opamp, supply="12V",
                              impedance="(impedance 1M)"), RULE)
    plus = [f for f in found if f.details["pin"] == "in+"]
    assert len(plus) == 1
    assert plus[0].measured == pytest.approx(2.05 - 80e-9 * 1e6, abs=VOLT_TOLERANCE)


def test_keeping_the_input_inside_the_suggested_window_clears_it():
    finding = next(f for f in findings(follower(0.5, 4.5), RULE)
                   if f.details["pin"] == "in+")
    high = finding.details["allowed_high"]
    assert "between -100 mV and 3.5 V" in finding.suggestion.text
    assert findings(follower(0.5, high - 0.01), RULE) == []


def test_part_without_an_input_range_cannot_be_checked():
    opamp = params(open_loop_gain=A0, gbw=1e6)
    text = follower(0.5, 3.0, opamp=opamp)
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the input common-mode range of U1")
    assert finding.elements == ("U1",)
    assert finding.line == line_of(text, "(opamp U1")


def test_floating_input_has_no_level_to_check():
    # A coupling capacitor with nothing to ground behind it: the DC level of in+ is
    # undefined (floating-input reports it), so nothing is compared with the range.
    # (The solver ties such a net with a tiny conductance, so its bias current would
    # read as volts far outside any range.)
    opamp = params(open_loop_gain=A0, gbw=1e6, bias_current=1e-12,
                   input_range_low="-0.1V", input_range_high="-1.5V")
    text = f"""
        (version 1)
        (stage coupled-buffer
          (ground gnd) (supply vcc 5V)
          (opamp U1 {opamp} (in+ pos) (in- out) (out out) (v+ vcc) (v- gnd))
          (capacitor C1 in pos 100n)
          (source in (amplitude 100mV) (band 10Hz 10kHz))
          (load out (resistance 10k)))
        """
    assert findings(text, RULE) == []
