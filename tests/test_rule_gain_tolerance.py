"""The gain-tolerance rule: the gain's worst corner over resistor tolerances.

Expected values, derived by hand:

* an inverting stage's gain is G = -R2/R1; its worst corners put R2 and R1 at opposite
  ends of their tolerance t, |G/G0 - 1| = (1 + t)/(1 - t) - 1 = 2t/(1 - t): about twice
  the tolerance (common practice), exactly 2.0202 % for t = 1 %;
* a non-inverting stage's gain is G = 1 + R2/R1, worst at R2(1 + t), R1(1 - t);
* the op-amps are inline with A0 = 10^7, so the closed-loop gain stays within NG/A0 of
  the ideal one (1.1e-6 for NG = 11): tolerances below are abs=1e-5 on a fraction;
* with two resistors uniform within +-t, the gain error is close to (u2 - u1) t with
  u1, u2 uniform on [-1, 1]; their difference has a triangular density on [-2, 2] and
  P(|u2 - u1| <= 1) = 1 - (2 - 1)^2/4 = 0.75 (common probability result).
"""

from __future__ import annotations

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "gain-tolerance"
OPAMP = params(open_loop_gain=1e7, gbw=1e6)


def inverting(require: str = "(gain -10) (gain-tolerance 1.5%)", r1_tolerance: str = "1%",
              r2_tolerance: str = "1%") -> str:
    """Inverting gain -10 (R1 10k on line 5, R2 100k on line 6) on +-15 V."""
    t1 = f"(tolerance {r1_tolerance})" if r1_tolerance else ""
    t2 = f"(tolerance {r2_tolerance})" if r2_tolerance else ""
    return f"""
        (version 1)
        (stage probe-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k {t1})
          (resistor R2 fb out 100k {t2})
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require {require}))
        """


def test_worst_corner_of_an_inverting_stage_is_two_t_over_one_minus_t():
    t = 0.01
    expected = (1 + t) / (1 - t) - 1  # 2.0202 %, R2 high and R1 low (by hand)
    finding = only(inverting(), RULE)
    assert finding.measured == pytest.approx(expected, abs=1e-5)
    assert finding.details["worst_gain"] == pytest.approx(-10 * (1 + t) / (1 - t), rel=1e-5)


def test_worst_corner_is_about_twice_the_tolerance():
    finding = only(inverting(), RULE)
    assert finding.measured == pytest.approx(2 * 0.01, rel=0.02)  # ~2t (common practice)


def test_gain_outside_its_band_is_a_warning_at_the_most_sensitive_resistor():
    text = inverting()
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("R1", "R2")
    # R2 moves G by t, R1 by t/(1 + t): R2 is the more sensitive, on line 6.
    assert finding.line == 6 == line_of(text, "(resistor R2")
    assert finding.unit == "%"
    assert finding.limit == pytest.approx(0.015)


def test_gain_within_its_band_at_every_corner_passes():
    assert findings(inverting("(gain -10) (gain-tolerance 2.5%)"), RULE) == []


def test_gain_without_a_tolerance_requirement_is_not_checked():
    assert findings(inverting("(gain -10)"), RULE) == []


def test_worst_corner_of_a_non_inverting_stage_by_hand():
    text = f"""
        (version 1)
        (stage temp-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 10k (tolerance 1%))
          (resistor R2 fb out 39k (tolerance 1%))
          (source in (range 0.2V 0.9V) (band 0Hz 1Hz) (impedance 5k))
          (load out (resistance 100k))
          (require (gain 4.9) (gain-tolerance 0.5%)))
        """
    worst = 1 + 39e3 * 1.01 / (10e3 * 0.99)  # G = 1 + R2/R1 at R2 high, R1 low: 4.9788
    finding = only(text, RULE)
    assert finding.measured == pytest.approx(worst / 4.9 - 1, abs=1e-5)  # 1.608 %


def test_suggested_tolerance_is_the_loosest_that_meets_the_band():
    finding = only(inverting(), RULE)
    # 1 % gives 2.02 % (above 1.5 %); 0.5 % gives 2(0.005)/0.995 = 1.005 % (by hand).
    assert finding.suggestion.value == pytest.approx(0.005)
    assert finding.suggestion.unit == "%"


def test_applying_the_suggested_tolerance_clears_the_finding():
    finding = only(inverting(), RULE)
    tolerance = f"{finding.suggestion.value * 100:g}%"
    assert findings(inverting(r1_tolerance=tolerance, r2_tolerance=tolerance), RULE) == []


def test_resistor_without_tolerance_takes_the_default_and_says_so():
    finding = only(inverting(r1_tolerance=""), RULE)
    expected = 1.01 / 0.95 - 1  # R1 at 5 % (the default, common practice), R2 at 1 %
    assert finding.measured == pytest.approx(expected, abs=1e-5)
    assert "R1 has no tolerance, 5 % assumed" in finding.message


def test_monte_carlo_share_within_the_band():
    # Band 1 % with two 1 % resistors: |u2 - u1| <= 1, probability 0.75; 10000 samples
    # put the estimate within about 0.013 (three standard errors) of it.
    finding = only(inverting("(gain -10) (gain-tolerance 1%)"), RULE)
    assert finding.details["share_within"] == pytest.approx(0.75, abs=0.015)


def test_too_many_resistors_take_the_first_order_corner():
    # beyond max_corner_resistors the corner is chosen by the sensitivities' signs: for
    # a ratio R2/R1 that is R2 high, R1 low, the true worst corner (common practice)
    finding = only(inverting(), RULE, settings={"max_corner_resistors": 1})
    corner = 1.01 / 0.99 - 1
    assert finding.details["exact_corners"] is False
    assert finding.details["worst_case"] == {"method": "sensitivity", "verified": True}
    assert finding.measured == pytest.approx(corner, abs=1e-5)  # finite loop gain
    # the same corner as the full enumeration finds
    assert finding.measured == pytest.approx(only(inverting(), RULE).measured, rel=1e-12)
    assert "at the first-order worst corner (R1 -1 %, R2 +1 %)" in finding.message
    assert "not full enumeration" in finding.message


def test_stage_with_only_a_current_source_is_reported_unchecked():
    text = f"""
        (version 1)
        (stage photo-tia
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {OPAMP} (in+ gnd) (in- in) (out out) (v+ vcc) (v- vee))
          (resistor R1 in out 10M (tolerance 1%))
          (capacitor C1 in out 1p)
          (source in (kind current) (range 0nA 400nA) (band 0Hz 1kHz))
          (load out (resistance 10k))
          (require (gain -10) (gain-tolerance 1%)))
        """
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.details.get("unchecked") is True


def test_the_fix_names_only_the_resistors_it_tightens():
    # R1 0.1 %, R2 1 %: worst error about t1 + t2 = 1.1 % against +-0.8 %; R2 at 0.5 %
    # gives about 0.6 % (by hand, 2 x the ratio's tolerances): R1 is left as it is
    finding = only(inverting("(gain -10) (gain-tolerance 0.8%)", r1_tolerance="0.1%"), RULE)
    text = finding.suggestion.text
    assert text.startswith("use 0.5 % resistors for R2 (R1 already at or below it)")
    assert finding.suggestion.changes[0].elements == ("R2",)
