"""The preferred-values rule: resistor and capacitor values outside their E series.

Expected values come from the eseries package (its E12, E24 and E96 series and
find_nearest), an implementation of IEC 60063 independent of checker.preferred. The
pairing of tolerance and series (E96 for 1 %, E24 for 5 %, E12 for capacitors without a
tolerance) and the stocking of E24 values in 1 % parts are common practice. The gain of
an inverting stage is -R2/R1 (common practice); the inline op-amp has A0 = 10^7, so the
solved gain is within 1e-6 of it.
"""

from __future__ import annotations

import math

import eseries
import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "preferred-values"
OPAMP = params(open_loop_gain=1e7, gbw=1e6)


def stage(parts: str) -> str:
    """A follower whose input net carries ``parts`` (from in to gnd) from line 5 on."""
    return f"""
        (version 1)
        (stage sense
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          {parts}
          (source in (range 0V 1V) (band 0Hz 10Hz) (impedance 100))
          (load out (resistance 10k)))
        """


def inverting(r2: str, tolerance: str = "1%") -> str:
    """Inverting gain -R2/10k; R2 on line 6."""
    return f"""
        (version 1)
        (stage probe-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 1%))
          (resistor R2 fb out {r2} (tolerance {tolerance}))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
        """


def decade(series_key, scale: float) -> list[float]:
    """One decade of an eseries series, scaled (eseries lists 1.0 ... as 10 ...)."""
    values = eseries.series(series_key)
    return [v * scale / 10 ** math.floor(math.log10(values[0])) for v in values]


def resistors(values: list[float], tolerance: str) -> str:
    return "\n".join(f"(resistor R{i} in gnd {v!r} (tolerance {tolerance}))"
                     for i, v in enumerate(values, start=1))


def test_every_e96_value_passes_as_a_one_percent_resistor():
    assert findings(stage(resistors(decade(eseries.E96, 1e4), "1%")), RULE) == []


def test_every_e24_value_passes_as_a_five_percent_resistor():
    assert findings(stage(resistors(decade(eseries.E24, 1e4), "5%")), RULE) == []


def test_e24_values_pass_as_one_percent_resistors():
    # 1 % parts are stocked in the E24 values too (common practice).
    assert findings(stage(resistors(decade(eseries.E24, 1e3), "1%")), RULE) == []


def test_e96_values_outside_e24_fail_as_five_percent_resistors():
    e24 = set(round(v, 6) for v in decade(eseries.E24, 1e4))
    odd = [v for v in decade(eseries.E96, 1e4) if round(v, 6) not in e24]
    found = findings(stage(resistors(odd, "5%")), RULE)
    assert len(found) == len(odd)
    for finding, value in zip(sorted(found, key=lambda f: f.measured), sorted(odd)):
        assert finding.measured == pytest.approx(value)
        nearest = eseries.find_nearest(eseries.E24, value)
        # eseries picks the nearest on a linear scale, the rule on a log scale: they agree
        # except for values near the geometric middle of two members.
        low, high = eseries.find_nearest_few(eseries.E24, value, num=2)
        if abs(math.log(value / low) - math.log(high / value)) > 0.01:
            assert finding.suggestion.value == pytest.approx(nearest)


def test_off_series_resistor_is_an_info_note_at_the_resistor():
    text = stage("(resistor R1 in gnd 8.7k)")
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.INFO
    assert finding.elements == ("R1",)
    assert finding.line == 5 == line_of(text, "(resistor R1")
    assert finding.column == 3
    assert finding.unit == "Ω"
    assert finding.measured == pytest.approx(8.7e3)
    # No tolerance: taken as E24; eseries' nearest E24 value to 8.7 k is 9.1 k.
    assert finding.suggestion.value == pytest.approx(eseries.find_nearest(eseries.E24, 8.7e3))
    assert finding.suggestion.element == "R1"


def test_capacitor_without_tolerance_is_held_to_e12():
    # 5.1 nF is in E24 but not E12; eseries' nearest E12 value is 4.7 nF.
    finding = only(stage("(capacitor C1 in gnd 5.1n)"), RULE)
    assert finding.unit == "F"
    expected = eseries.find_nearest(eseries.E12, 5.1e-9)
    assert expected == pytest.approx(4.7e-9)
    assert finding.suggestion.value == pytest.approx(expected)


def test_capacitor_with_five_percent_tolerance_may_take_e24():
    assert findings(stage("(capacitor C1 in gnd 5.1n (tolerance 5%))"), RULE) == []


def test_one_percent_resistor_takes_the_nearest_of_e96_and_e24():
    # 4.8 k: E96 neighbours 4.75 k and 4.87 k, E24 neighbours 4.7 k and 5.1 k (eseries).
    finding = only(stage("(resistor R1 in gnd 4.8k (tolerance 1%))"), RULE)
    candidates = [eseries.find_nearest(eseries.E96, 4.8e3),
                  eseries.find_nearest(eseries.E24, 4.8e3)]
    expected = min(candidates, key=lambda v: abs(v - 4.8e3))
    assert expected == pytest.approx(4.75e3)
    assert finding.suggestion.value == pytest.approx(expected)


def test_feedback_resistor_suggestion_states_the_gain_it_gives():
    # R2 = 48 k (1 %): nearest 47.5 k (E96, eseries), gain -47.5k/10k = -4.75.
    finding = only(inverting("48k"), RULE)
    assert finding.suggestion.value == pytest.approx(eseries.find_nearest(eseries.E96, 48e3))
    assert "gain is then -4.75 (now -4.8)" in finding.suggestion.text


def test_applying_the_suggested_value_clears_the_finding():
    finding = only(inverting("48k"), RULE)
    assert findings(inverting(repr(finding.suggestion.value)), RULE) == []


def test_resistor_that_does_not_set_the_gain_gets_no_gain_statement():
    # From an ideal source a resistor across the follower's input moves no gain; behind
    # the source's impedance it would (a divider), and the gain is read from the source.
    text = stage("(resistor R1 in gnd 8.7k)").replace(" (impedance 100)", "")
    finding = only(text, RULE)
    assert "gain" not in finding.suggestion.text


def test_resistor_across_a_source_with_impedance_moves_the_gain_from_the_source():
    # 100 ohm into 8.7k || op-amp input: |G| = 8.7k/(8.7k + 100) = 0.9886; with 9.1k,
    # 0.9891 (voltage divider: common practice)
    finding = only(stage("(resistor R1 in gnd 8.7k)"), RULE)
    assert "0.9891 (now 0.9886)" in finding.suggestion.text
