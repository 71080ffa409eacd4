"""The resistor-power rule: each resistor's dissipation against its derated rating.

Expected values, derived by hand:

* dissipation P = V^2/R (Joule heating) with V the largest voltage across the resistor;
* in an inverting stage the input resistor's current flows on through the feedback
  resistor, so the voltage across Rf is (Vin - Vfb) * Rf/R1, with the inverting input
  at Vfb = -Vout/A0 (Sedra and Smith, Microelectronic Circuits, 7th ed., op-amp chapter: the
  finite-gain inverting amplifier), Vout = -Vin (Rf/R1) A0/(A0 + 1 + Rf/R1);
* a divider of two equal resistors across a rail puts half the rail across each;
* derating to half the rating and 0.1 W for an unrated small chip resistor: common
  practice.
"""

from __future__ import annotations

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "resistor-power"
A0 = 1e6
OPAMP = params(open_loop_gain=A0, gbw=1e6)
R1, R2 = 200.0, 2e3


def inverting(high: float, rating: str = "") -> str:
    """Inverting gain -10 on +-15 V, input 0 V to ``high``; R2 is on line 6."""
    return f"""
        (version 1)
        (stage drive-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb {R1!r})
          (resistor R2 fb out {R2!r} {rating})
          (source in (range 0V {high!r}) (band 0Hz 10Hz))
          (load out (resistance 100k)))
        """


def across_r2(vin: float) -> float:
    """(Vin - Vfb) * R2/R1 with Vfb = -Vout/A0 (finite-gain inverting amplifier)."""
    gain = R2 / R1
    vout = -vin * gain * A0 / (A0 + 1 + gain)
    return (vin + vout / A0) * gain


def test_dissipation_within_half_the_assumed_rating_passes():
    # 1 V in: 10 V across R2, 50 mW, exactly half of the 0.1 W assumed (inclusive).
    assert across_r2(1.0) ** 2 / R2 <= 0.05
    assert findings(inverting(1.0), RULE) == []


def test_feedback_resistor_over_half_its_assumed_rating_is_a_warning():
    text = inverting(1.2)
    finding = only(text, RULE)
    expected = across_r2(1.2) ** 2 / R2  # 12 V across 2 kOhm: 72 mW (P = V^2/R)
    assert expected == pytest.approx(0.072, rel=1e-4)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("R2",)
    assert finding.line == 6 == line_of(text, "(resistor R2")
    assert finding.unit == "W"
    assert finding.measured == pytest.approx(expected, rel=1e-6)
    assert finding.limit == pytest.approx(0.1 * 0.5)
    assert "assumed" in finding.message


def test_suggested_rating_is_the_next_common_one_above_twice_the_dissipation():
    finding = only(inverting(1.2), RULE)
    # 72 mW / 0.5 = 144 mW: 0.125 W is too small, 0.25 W is next (common practice ladder).
    assert finding.suggestion.value == pytest.approx(0.25)
    assert finding.suggestion.element == "R2"


def test_the_suggested_rating_clears_the_finding():
    finding = only(inverting(1.2), RULE)
    rating = f"(power-rating {finding.suggestion.value!r}W)"
    assert findings(inverting(1.2, rating), RULE) == []


def test_a_stated_rating_is_used_in_place_of_the_default():
    # 72 mW against a stated 0.125 W: over half of it (62.5 mW), under the rating.
    finding = only(inverting(1.2, "(power-rating 0.125W)"), RULE)
    assert finding.severity is Severity.WARNING
    assert finding.limit == pytest.approx(0.0625)
    assert "assumed" not in finding.message


def test_dissipation_beyond_the_rating_itself_is_an_error():
    # 14 V across 2 kOhm: 98 mW, beyond a stated 0.063 W.
    finding = only(inverting(1.4, "(power-rating 0.063W)"), RULE)
    assert finding.severity is Severity.ERROR
    assert finding.measured == pytest.approx(across_r2(1.4) ** 2 / R2, rel=1e-6)


def test_divider_across_a_rail_dissipates_half_the_rail_squared_over_r_each():
    text = f"""
        (version 1)
        (stage mid-rail
          (ground gnd) (supply vcc 15V)
          (opamp U1 {OPAMP} (in+ ref) (in- out) (out out) (v+ vcc) (v- gnd))
          (resistor R3 vcc ref 150)
          (resistor R4 ref gnd 150)
          (load out (resistance 100k)))
        """
    found = findings(text, RULE)
    assert [f.elements for f in found] == [("R3",), ("R4",)]
    for finding in found:
        # 7.5 V across 150 Ohm: 0.375 W, beyond the 0.1 W assumed (error).
        assert finding.measured == pytest.approx(7.5 ** 2 / 150, rel=1e-6)
        assert finding.severity is Severity.ERROR
        assert finding.suggestion.value == pytest.approx(1.0)  # 0.75 W needed


def test_beyond_the_largest_rating_suggests_raising_the_resistance():
    text = f"""
        (version 1)
        (stage heater
          (ground gnd) (supply vcc 15V)
          (opamp U1 {OPAMP} (in+ ref) (in- out) (out out) (v+ vcc) (v- gnd))
          (resistor R3 vcc ref 20)
          (resistor R4 ref gnd 20)
          (load out (resistance 100k)))
        """
    finding = findings(text, RULE)[0]
    # 7.5 V across 20 Ohm: 2.81 W, needing 5.6 W derated: more than 2 W.
    assert finding.measured == pytest.approx(7.5 ** 2 / 20, rel=1e-6)
    assert finding.suggestion.value is None
    assert "raise its resistance" in finding.suggestion.text
