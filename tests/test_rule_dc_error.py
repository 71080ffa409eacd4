"""The dc-error rule: the output's worst-case DC error from offset voltage and bias currents.

Expected values, derived by hand:

* an inverting or non-inverting stage's output error is Vo = NG*Vos + Rf*Ib with the
  non-inverting input on ground, and Vo = NG*Vos + Rf*Ios with the bias-balancing
  resistor Rf||Rg on the non-inverting input, NG = 1 + Rf/Rg (Eggleston, Basic
  Electronics for Scientists and Engineers, Cambridge University Press 2011, section
  6.4);
* the two input currents are Ib + Ios/2 and Ib - Ios/2 (Ib is their mean and Ios their
  difference, the definitions of bias and offset current); the worst case takes the
  larger one into the inverting input, so without balancing Vo = NG*Vos +
  Rf*(Ib + Ios/2) (common practice);
* the op-amps are inline with A0 = 10^7, so the closed-loop figures stay within about
  NG/A0 = 1.1e-6 of the ideal ones: tolerances below are rel=1e-5.
"""

from __future__ import annotations

import eseries
import pytest
from rule_helpers import findings, line_of, only, params, parallel

from checker.findings import Severity

RULE = "dc-error"
A0 = 1e7
RG, RF = 10e3, 100e3
NG = 1 + RF / RG  # 11 (Eggleston 6.4)
VOS, IB, IOS = 0.5e-3, 500e-9, 50e-9  # a bipolar input: Ios = Ib/10


def part(vos=VOS, ib=IB, ios=IOS, **extra) -> str:
    values = dict(open_loop_gain=A0, gbw=1e6, offset_voltage=vos, bias_current=ib,
                  offset_current=ios)
    values.update(extra)
    values = {k: v for k, v in values.items() if v is not None}
    return params(**values)


def inverting(opamp: str | None = None, rf: float = RF, require: str = "(dc-error 20mV)",
              balance: str = "") -> str:
    """Inverting gain -Rf/Rg on +-15 V; U1 on line 4. ``balance`` is a resistor from a
    new net pos to ground; U1's in+ moves to pos when it is given."""
    opamp = opamp or part()
    in_pos = "pos" if balance else "gnd"
    return f"""
        (version 1)
        (stage probe-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ {in_pos}) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb {RG!r} (tolerance 1%))
          (resistor R2 fb out {rf!r} (tolerance 1%))
          {balance}
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require {require}))
        """


def test_without_balancing_the_error_is_ng_vos_plus_rf_ib():
    # Ios = 0: the two pins draw exactly Ib, Vo = NG*Vos + Rf*Ib (Eggleston 6.4).
    expected = NG * VOS + RF * IB  # 5.5 mV + 50 mV = 55.5 mV
    finding = only(inverting(part(ios=0.0)), RULE)
    assert finding.measured == pytest.approx(expected, rel=1e-5)


def test_worst_case_takes_the_larger_pin_current_into_the_inverting_input():
    expected = NG * VOS + RF * (IB + IOS / 2)  # 5.5 mV + 52.5 mV = 58 mV (common practice)
    finding = only(inverting(), RULE)
    assert finding.measured == pytest.approx(expected, rel=1e-5)


def test_error_over_the_requirement_is_an_error_at_the_opamp():
    text = inverting()
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.column == 3
    assert finding.unit == "V"
    assert finding.limit == pytest.approx(20e-3)


def test_message_splits_offset_voltage_and_bias_terms():
    finding = only(inverting(), RULE)
    assert finding.details["U1_noise_gain"] == pytest.approx(NG, rel=1e-5)
    assert finding.details["U1_offset_voltage_term_v"] == pytest.approx(NG * VOS, rel=1e-5)
    # Both pins' mean current through the unbalanced inputs: Ib*Rf (Eggleston 6.4).
    assert finding.details["U1_bias_current_term_v"] == pytest.approx(RF * IB, rel=1e-5)
    assert "noise gain 11" in finding.message


def test_with_the_balancing_resistor_the_error_is_ng_vos_plus_rf_ios():
    rb = parallel(RF, RG)  # exactly Rf||Rg = 9.0909 kOhm
    text = inverting(require="(dc-error 5mV)", balance=f"(resistor R3 pos gnd {rb!r})")
    expected = NG * VOS + RF * IOS  # 5.5 mV + 5 mV = 10.5 mV (Eggleston 6.4)
    finding = only(text, RULE)
    assert finding.measured == pytest.approx(expected, rel=1e-5)


def test_error_within_the_requirement_passes():
    # 58 mV worst case (see above) against 100 mV.
    assert findings(inverting(require="(dc-error 100mV)"), RULE) == []


def test_suggested_balancing_resistor_is_rf_parallel_rg_in_e96():
    finding = only(inverting(), RULE)
    # The feedback resistors are 1 %, so E96; Rf||Rg = 9.0909 k -> 9.09 k (eseries).
    expected = eseries.find_nearest(eseries.E96, parallel(RF, RG))
    assert expected == pytest.approx(9090.0)
    assert finding.suggestion.value == pytest.approx(expected)
    assert finding.suggestion.unit == "Ω"
    assert finding.suggestion.element == "R3"


def test_suggested_balancing_resistor_states_the_solved_error_that_remains():
    finding = only(inverting(), RULE)
    rb = 9090.0
    # Vo = NG*Vos + Ib*|Rf - NG*Rb| + (Ios/2)*(Rf + NG*Rb): the pin currents through their
    # resistances (Eggleston 6.4 before the Rb = Rf||Rg simplification), 10.505 mV.
    remaining = NG * VOS + IB * abs(RF - NG * rb) + IOS / 2 * (RF + NG * rb)
    assert f"{remaining * 1e3:.3g} mV" in finding.suggestion.text


def test_applying_the_balancing_resistor_clears_the_finding():
    finding = only(inverting(), RULE)
    fixed = inverting(balance=f"(resistor R3 pos gnd {finding.suggestion.value!r})")
    assert findings(fixed, RULE) == []


def test_cmos_input_gets_no_balancing_resistor_but_the_offset_it_needs():
    # 1 pA of bias current: the error is all offset voltage, 3 mV x 11 = 33 mV > 20 mV.
    cmos = part(vos=3e-3, ib=1e-12, ios=0.5e-12)
    finding = only(inverting(cmos), RULE)
    assert finding.measured == pytest.approx(NG * 3e-3 + RF * 1.25e-12, rel=1e-5)
    assert "would not help" in finding.suggestion.text
    assert finding.suggestion.unit == "V"
    assert finding.suggestion.element == "U1"
    # The offset voltage that fits: (20 mV - Rf*(Ib + Ios/2))/NG = 1.818 mV (common practice).
    assert finding.suggestion.value == pytest.approx((20e-3 - RF * 1.25e-12) / NG, rel=1e-5)


def test_bias_cancelled_part_gets_no_balancing_resistor():
    # Ios = 0.8 Ib: balancing would leave Rf*Ios = 40 mV, no better than Rf*Ib.
    finding = only(inverting(part(ib=500e-9, ios=400e-9)), RULE)
    assert "bias-cancelled" in finding.suggestion.text
    assert finding.suggestion.value is None


def test_without_requirement_a_large_error_is_an_info_note():
    # Rf = 1 MOhm: NG = 101, 101 x 0.5 mV + 1 M x 525 nA = 575.5 mV; usable swing
    # 15 - 1.5 - (-15 + 1.5) = 27 V, 1 % of it 270 mV (common practice).
    opamp = part(output_headroom_high="1.5V", output_headroom_low="1.5V")
    text = inverting(opamp, rf=1e6, require="")
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.limit == pytest.approx(0.27)
    # NG/A0 = 1e-5 here, so rel=1e-4.
    assert finding.measured == pytest.approx(101 * VOS + 1e6 * (IB + IOS / 2), rel=1e-4)


def test_without_requirement_a_small_error_is_silent():
    # 58 mV against 1 % of 30 V (no headroom stated: the rails) = 300 mV.
    assert findings(inverting(require=""), RULE) == []


def test_missing_bias_current_is_reported_unchecked():
    text = inverting(part(ib=None, ios=None), require="(dc-error 100mV)")
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.details.get("unchecked") is True
    assert "bias current" in finding.message and "offset current" in finding.message


def test_open_loop_comparator_is_left_to_other_rules():
    text = f"""
        (version 1)
        (stage trip
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {part()} (in+ in) (in- gnd) (out out) (v+ vcc) (v- vee))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (dc-error 1mV)))
        """
    assert findings(text, RULE) == []


def test_follower_from_a_high_impedance_source_points_the_balance_at_the_feedback():
    # A follower's in+ sees the 1 MOhm source, its in- nothing: 1 M x 525 nA + 0.5 mV.
    text = f"""
        (version 1)
        (stage buffer
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {part()} (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz) (impedance 1M))
          (require (dc-error 100mV)))
        """
    finding = only(text, RULE)
    assert finding.measured == pytest.approx(VOS + 1e6 * (IB + IOS / 2), rel=1e-5)
    assert "feedback path" in finding.suggestion.text


def test_balancing_resistor_stays_rf_parallel_rg_with_input_resistance_between_the_inputs():
    # With equal resistances at both inputs and equal pin currents, both inputs sit at
    # -Ib*(Rf||Rg): no current flows in the part's input resistance, so the balancing
    # value is Rf||Rg whatever that resistance (Eggleston 6.4 and superposition). A
    # 200 kOhm input resistance would pull a one-step estimate to Rf||Rg||Rin = 8.7 k.
    text = inverting(part(input_resistance=200e3))
    finding = only(text, RULE)
    expected = eseries.find_nearest(eseries.E96, parallel(RF, RG))  # 9.09 k
    assert finding.suggestion.value == pytest.approx(expected)
    assert "at 9.09 kΩ" in finding.suggestion.text


def test_input_with_no_dc_path_is_left_to_other_rules():
    # C1 alone feeds in+: its bias current has nowhere to go, the error is unbounded
    # (the solve ties the net with a tiny conductance, so any number would be an artefact).
    text = f"""
        (version 1)
        (stage coupled
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {part()} (in+ pos) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in pos 100n)
          (resistor R1 fb gnd 10k (tolerance 1%))
          (resistor R2 fb out 100k (tolerance 1%))
          (source in (amplitude 0.1V) (band 100Hz 10kHz))
          (load out (resistance 10k))
          (require (dc-error 1mV)))
        """
    assert findings(text, RULE) == []
