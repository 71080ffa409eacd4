"""The difference-balance rule: common-mode rejection over the resistors' tolerances.

Expected values, derived by hand:

* a difference stage (R1 from source 1 to in-, R2 in- to out, R3 from source 2 to in+,
  R4 in+ to ground) with an ideal op-amp gives Vout = V2 R4/(R3 + R4) (1 + R2/R1)
  - V1 R2/R1 (superposition, common practice); its common-mode gain is the sum of the
  two coefficients, its differential gain half their difference, and CMRR their ratio;
* the worst case over resistor tolerance t is about CMRR = (1 + G)/(4t), so G = 1 with
  1 % parts gives 50, 34 dB (common practice); the tests also enumerate the corners of
  the ideal formula in plain Python;
* the op-amps are inline with A0 = 10^7, which leaves the transfers within about
  NG/A0 = 2e-7 of the ideal ones.
"""

from __future__ import annotations

import itertools
import math

import pytest
from rule_helpers import db, findings, line_of, only, params

from checker.findings import Severity

RULE = "difference-balance"
OPAMP = params(open_loop_gain=1e7, gbw=1e6)


def difference(r: float = 10e3, gain: float = 1.0, tolerance: str = "1%",
               require: str = "") -> str:
    """A difference stage of gain ``gain`` (R2 = R4 = gain * R1); U1 on line 4."""
    rf = gain * r
    tol = f"(tolerance {tolerance})" if tolerance else ""
    return f"""
        (version 1)
        (stage bridge-diff
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {OPAMP} (in+ p) (in- n) (out out) (v+ vcc) (v- vee))
          (resistor R1 a n {r!r} {tol})
          (resistor R2 n out {rf!r} {tol})
          (resistor R3 b p {r!r} {tol})
          (resistor R4 p gnd {rf!r} {tol})
          (source a (range 2.4V 2.6V) (band 0Hz 10Hz))
          (source b (range 2.4V 2.6V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          {f"(require {require})" if require else ""})
        """


def corner_cmrr(gain: float, t: float) -> float:
    """The worst CMRR over the 16 corners of the ideal difference-stage formula."""
    worst = math.inf
    for s1, s2, s3, s4 in itertools.product((-1, 1), repeat=4):
        r1, r2, r3, r4 = 1 + s1 * t, gain * (1 + s2 * t), 1 + s3 * t, gain * (1 + s4 * t)
        h2 = r4 / (r3 + r4) * (1 + r2 / r1)
        h1 = -r2 / r1
        common = abs(h1 + h2)
        if common > 1e-12:  # some corners keep the ratios equal: no common-mode gain
            worst = min(worst, abs((h2 - h1) / 2) / common)
    return worst


def test_unity_gain_with_one_percent_parts_rejects_about_34_db():
    finding = only(difference(), RULE)
    assert corner_cmrr(1.0, 0.01) == pytest.approx(50.0, rel=1e-3)  # (1 + G)/(4t) = 50
    assert finding.details["cmrr_ratio"] == pytest.approx(corner_cmrr(1.0, 0.01), rel=1e-5)
    assert finding.measured == pytest.approx(db(50.0), abs=0.01)  # 33.98 dB


def test_gain_ten_follows_one_plus_g_over_four_t():
    finding = only(difference(gain=10.0, require="(cmrr 60dB)"), RULE)
    assert finding.details["cmrr_ratio"] == pytest.approx(corner_cmrr(10.0, 0.01), rel=1e-5)
    assert finding.details["cmrr_ratio"] == pytest.approx(11 / 0.04, rel=0.02)  # 275


def test_below_the_default_minimum_is_a_warning_at_the_opamp():
    text = difference()
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1", "R1", "R2", "R3", "R4")
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.unit == "dB"
    assert finding.limit == pytest.approx(40.0)


def test_below_the_required_cmrr_is_an_error():
    finding = only(difference(require="(cmrr 100)"), RULE)  # a plain ratio: 40 dB
    assert finding.severity is Severity.ERROR
    assert finding.limit == pytest.approx(40.0)


def test_matched_parts_that_reach_the_requirement_pass():
    # 0.1 % parts: (1 + 1)/(4 x 0.001) = 500, 54 dB, over the required 50 dB.
    assert corner_cmrr(1.0, 0.001) > 10 ** (50 / 20)
    assert findings(difference(tolerance="0.1%", require="(cmrr 50dB)"), RULE) == []


def test_suggested_match_is_the_loosest_that_reaches_the_limit():
    finding = only(difference(require="(cmrr 45dB)"), RULE)
    # 0.5 %: 100 (40 dB), short; 0.25 %: about 200 (46 dB), enough (by the corners).
    assert db(corner_cmrr(1.0, 0.005)) < 45 < db(corner_cmrr(1.0, 0.0025))
    assert finding.suggestion.value == pytest.approx(0.0025)
    assert finding.suggestion.unit == "%"


def test_applying_the_suggested_match_clears_the_finding():
    finding = only(difference(require="(cmrr 45dB)"), RULE)
    tolerance = f"{finding.suggestion.value * 100:g}%"
    assert findings(difference(tolerance=tolerance, require="(cmrr 45dB)"), RULE) == []


def test_no_part_tolerance_fixes_mismatched_ratios():
    # R4 at 11 k against R2 10 k: the nominal stage is unbalanced before any tolerance.
    balanced = difference(tolerance="0.1%", require="(cmrr 60dB)")
    text = balanced.replace("(resistor R4 p gnd 10000.0", "(resistor R4 p gnd 11000.0")
    assert text != balanced
    finding = only(text, RULE)
    # Nominal, by the ideal formula: H2 = 11/21 x 2, H1 = -1; CMRR = |H2 - H1|/2/|H1 + H2|
    # = 21.5, 26.6 dB.
    h2, h1 = 11 / 21 * 2, -1.0
    nominal = abs(h2 - h1) / 2 / abs(h1 + h2)
    assert f"nominal {db(nominal):.1f} dB" in finding.message
    assert "even matched 0.1 %" in finding.suggestion.text
    assert finding.suggestion.value is None


def test_missing_tolerances_take_the_default():
    finding = only(difference(tolerance=""), RULE)
    # 5 % parts (the default, common practice): (1 + 1)/(4 x 0.05) = 10, 20 dB.
    assert finding.details["cmrr_ratio"] == pytest.approx(corner_cmrr(1.0, 0.05), rel=1e-5)
    assert "5 % assumed" in finding.message


def test_inverting_stage_is_not_a_difference_stage():
    text = f"""
        (version 1)
        (stage probe-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 5%))
          (resistor R2 fb out 100k (tolerance 5%))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (cmrr 80dB)))
        """
    assert findings(text, RULE) == []


def test_beyond_max_corner_resistors_the_first_order_corner_is_the_enumerated_one():
    # a balanced stage (nominal Acm = 0): the ratio Acm/Ad starts at zero and moves both
    # ways; the first-order corner must still be the worst of the 16 by hand
    finding = only(difference(), RULE, settings={"max_corner_resistors": 2})
    assert finding.details["exact_corners"] is False
    assert finding.details["worst_case"] == {"method": "sensitivity", "verified": True}
    assert finding.measured == pytest.approx(db(corner_cmrr(1.0, 0.01)), abs=1e-3)
    assert finding.measured == pytest.approx(only(difference(), RULE).measured, rel=1e-9)
    assert "at the first-order worst corner of its resistors" in finding.message
    assert "not full enumeration" in finding.message
    assert "worst_case" not in only(difference(), RULE).details
