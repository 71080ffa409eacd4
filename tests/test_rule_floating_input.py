"""The floating-input rule: op-amp inputs with no DC path to a defined potential.

Expected values, derived by hand:

* a coupling capacitor C and a bias resistor R form a high-pass corner
  f = 1/(2 pi (R + Rs) C) (first-order RC high-pass, common practice); a corner a decade
  below the band's 10 Hz edge with C = 100 nF needs R >= 1/(2 pi 1 Hz 100 nF) = 1.59 MOhm,
  1.6 MOhm as the next E24 value (IEC 60063);
* two equal resistors of 2R from the rails bias their junction at mid-supply with a
  Thevenin resistance R (voltage divider, common practice).
"""

from __future__ import annotations

import math

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import E24

RULE = "floating-input"
OPAMP = params(open_loop_gain=1e5, gbw=1e6, bias_current=1e-12)


def coupled(supplies: str, bias: str = "", rails: tuple[str, str] = ("vcc", "vee"),
            coupling: str = "100n", impedance: str = "1k") -> str:
    """An AC-coupled follower; U1 is on line 4."""
    return f"""
        (version 1)
        (stage hydrophone-buffer
          (ground gnd) {supplies}
          (opamp U1 {OPAMP} (in+ pos) (in- out) (out out) (v+ {rails[0]}) (v- {rails[1]}))
          (capacitor C1 in pos {coupling})
          {bias}
          (source in (amplitude 100mV) (band 10Hz 10kHz) (impedance {impedance}))
          (load out (resistance 10k)))
        """


SPLIT = "(supply vcc 12V) (supply vee -12V)"


def test_biased_input_passes():
    assert findings(coupled(SPLIT, "(resistor R1 pos gnd 1.6M)"), RULE) == []


def test_coupling_capacitor_with_nothing_behind_it_is_an_error_at_the_opamp():
    text = coupled(SPLIT)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.column == 3
    assert finding.measured is None
    assert finding.details["pin"] == "in+" and finding.details["net"] == "pos"


def test_bias_resistor_puts_the_corner_a_decade_below_the_band():
    finding = only(coupled(SPLIT), RULE)
    least = 1 / (2 * math.pi * 1.0 * 100e-9)  # corner at 10 Hz / 10: 1.59 MOhm
    assert least == pytest.approx(1.59e6, rel=1e-3)
    assert finding.suggestion.value == pytest.approx(1.6e6)  # next E24 value up
    assert 1.6 in E24
    corner = 1 / (2 * math.pi * (finding.suggestion.value + 1e3) * 100e-9)
    assert corner <= 1.0


def test_bias_resistor_goes_to_ground_on_a_split_supply():
    finding = only(coupled(SPLIT), RULE)
    assert finding.details["bias"] == {"R1": {"nets": ["pos", "gnd"], "ohms": 1.6e6}}


def test_applying_the_suggested_bias_resistor_clears_the_finding():
    finding = only(coupled(SPLIT), RULE)
    (ref, bias), = finding.details["bias"].items()
    added = f"(resistor {ref} {bias['nets'][0]} {bias['nets'][1]} {bias['ohms']!r})"
    assert findings(coupled(SPLIT, added), RULE) == []


def test_source_impedance_sets_the_value_when_it_is_the_larger():
    # 10 x 1 MOhm = 10 MOhm beats the 1.59 MOhm of the corner (ten-times rule, common
    # practice); 10 MOhm is in E24.
    finding = only(coupled(SPLIT, impedance="1M"), RULE)
    assert finding.suggestion.value == pytest.approx(10e6)


def test_single_supply_without_a_mid_rail_gets_a_divider_of_twice_the_value():
    text = coupled("(supply vcc 5V)", rails=("vcc", "gnd"))
    finding = only(text, RULE)
    # Thevenin 1.6 MOhm at mid-supply: 2 x 1.6 MOhm = 3.2 MOhm, not in E24; 3.3 MOhm next.
    assert set(finding.details["bias"]) == {"R1", "R2"}
    nets = sorted(tuple(b["nets"]) for b in finding.details["bias"].values())
    assert nets == [("pos", "gnd"), ("pos", "vcc")]
    assert all(b["ohms"] == pytest.approx(3.3e6) for b in finding.details["bias"].values())
    added = " ".join(f"(resistor {ref} {b['nets'][0]} {b['nets'][1]} {b['ohms']!r})"
                     for ref, b in finding.details["bias"].items())
    assert findings(coupled("(supply vcc 5V)", added, rails=("vcc", "gnd")), RULE) == []


def test_single_supply_with_a_mid_rail_is_biased_to_it():
    text = coupled("(supply vcc 5V) (supply ref 2.5V)", rails=("vcc", "gnd"))
    finding = only(text, RULE)
    assert finding.details["bias"] == {"R1": {"nets": ["pos", "ref"], "ohms": 1.6e6}}


def test_inverting_input_with_only_capacitors_is_flagged_too():
    # A capacitor-only feedback with a capacitor-coupled input: in- floats at DC.
    text = f"""
        (version 1)
        (stage charge-amp
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in fb 1n)
          (capacitor C2 fb out 100p)
          (source in (amplitude 100mV) (band 10Hz 10kHz) (impedance 1k))
          (load out (resistance 10k)))
        """
    finding = only(text, RULE)
    assert finding.details["pin"] == "in-"
    assert finding.elements == ("U1",)
    assert finding.line == line_of(text, "(opamp U1")


def test_charge_amplifier_gets_a_resistor_across_its_feedback_capacitor():
    text = f"""
        (version 1)
        (stage charge-amp
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in fb 1n)
          (capacitor C2 fb out 100p)
          {{bias}}
          (source in (amplitude 100mV) (band 10Hz 10kHz) (impedance 1k))
          (load out (resistance 10k)))
        """
    finding = only(text.format(bias=""), RULE)
    # Corner a decade below 10 Hz with 100 pF: 1/(2 pi 1 Hz 100 pF) = 1.59 GOhm; 1.6 GOhm
    # is the next E24 value (first-order RC corner, common practice).
    assert 1 / (2 * math.pi * 1.0 * 100e-12) == pytest.approx(1.59e9, rel=1e-3)
    assert finding.details["bias"] == {"R1": {"nets": ["fb", "out"], "ohms": 1.6e9}}
    assert findings(text.format(bias="(resistor R1 fb out 1.6G)"), RULE) == []
