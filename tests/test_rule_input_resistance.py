"""The input-resistance rule: what each voltage source sees looking into the stage.

Expected values, derived by hand:

* the input resistance of an inverting stage is R1 plus the feedback resistor divided
  by (1 + A0): Zin = R1 + R2/(1 + A0) at DC (Sedra and Smith, Microelectronic Circuits, 7th ed.,
  op-amp chapter), here with an inline op-amp of A0 = 100 000;
* the signal lost to loading is the voltage divider of the source impedance Rs and Zin,
  loss = 20 log10((Rs + Zin)/Zin) dB (common practice);
* the ten-times rule: Zin must reach 10 Rs (common practice).
"""

from __future__ import annotations

import pytest
from rule_helpers import db, findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import E96

RULE = "input-resistance"
A0 = 1e5
OPAMP = params(open_loop_gain=A0, gbw=1e6)


def inverting(r1: float, r2: float, impedance: str = "(impedance 10k)",
              require: str = "") -> str:
    """Inverting gain -R2/R1 about a 2.5 V reference; the source is on line 7."""
    return f"""
        (version 1)
        (stage probe-gain
          (ground gnd) (supply vcc 5V) (supply ref 2.5V)
          (opamp U1 {OPAMP} (in+ ref) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 in fb {r1!r} (tolerance 1%))
          (resistor R2 fb out {r2!r} (tolerance 1%))
          (source in (label "soil probe") (range 2.4V 2.6V) (band 0Hz 100Hz) {impedance})
          (load out (resistance 10k))
          {require})
        """


def inverting_zin(r1: float, r2: float) -> float:
    """Zin = R1 + R2/(1 + A0) (Sedra and Smith)."""
    return r1 + r2 / (1 + A0)


def test_input_resistance_of_ten_times_the_source_passes():
    # 100 kOhm (plus 47 mOhm) against 10 x 10 kOhm: the limit is inclusive.
    assert inverting_zin(100e3, 470e3) >= 10 * 10e3
    assert findings(inverting(100e3, 470e3), RULE) == []


def test_one_kilohm_input_on_a_ten_kilohm_source_is_a_warning():
    text = inverting(1e3, 4.7e3)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("soil probe",)
    assert finding.line == 7 == line_of(text, "(source in")
    assert finding.column == 3
    assert finding.unit == "Ω"
    assert finding.limit == pytest.approx(10 * 10e3)
    assert finding.measured == pytest.approx(inverting_zin(1e3, 4.7e3), rel=1e-6)


def test_loss_in_db_is_the_voltage_divider():
    finding = only(inverting(1e3, 4.7e3), RULE)
    zin = inverting_zin(1e3, 4.7e3)
    expected = db((10e3 + zin) / zin)  # 20 log10((Rs + Zin)/Zin), about 20.83 dB
    assert finding.details["loss_db"] == pytest.approx(expected, abs=0.01)
    assert finding.details["loss_percent"] == pytest.approx(
        100 * 10e3 / (10e3 + zin), abs=0.01)  # Rs/(Rs + Zin) of the signal, 90.9 %
    assert f"{expected:.2f} dB" in finding.message


def test_requirement_not_met_is_an_error():
    text = inverting(10e3, 47e3, impedance="", require="(require (input-resistance 50k))")
    finding = only(text, RULE)
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("soil probe",)
    assert finding.line == line_of(text, "(source in")
    assert finding.limit == pytest.approx(50e3)
    assert finding.measured == pytest.approx(inverting_zin(10e3, 47e3), rel=1e-6)


def test_ideal_source_without_requirement_is_not_checked():
    assert findings(inverting(1e3, 4.7e3, impedance=""), RULE) == []


def test_suggested_input_resistor_is_the_next_e96_value_reaching_the_limit():
    finding = only(inverting(1e3, 4.7e3), RULE)
    value = finding.suggestion.value
    assert finding.suggestion.element == "R1"
    assert finding.suggestion.unit == "Ω"
    # R1 is 1 %, so E96; at least 100 kOhm and at most one E96 step above it (102 kOhm).
    assert any(value == pytest.approx(m * 1e5) for m in E96)
    assert 100e3 <= value <= 102e3 * (1 + 1e-9)


def test_suggested_input_resistor_with_feedback_scaled_clears_the_finding():
    r1, r2 = 1e3, 4.7e3
    finding = only(inverting(r1, r2), RULE)
    new_r1 = finding.suggestion.value
    new_r2 = r2 * new_r1 / r1  # the same gain, -4.7
    assert findings(inverting(new_r1, new_r2), RULE) == []


def test_fix_for_a_requirement_clears_the_error():
    require = "(require (input-resistance 50k))"
    r1, r2 = 10e3, 47e3
    finding = only(inverting(r1, r2, impedance="", require=require), RULE)
    new_r1 = finding.suggestion.value
    fixed = inverting(new_r1, r2 * new_r1 / r1, impedance="", require=require)
    assert findings(fixed, RULE) == []


def test_current_source_is_not_checked():
    # A photodiode into a transimpedance stage sees only Rf/(1 + A0) = 100 Ohm at the
    # virtual ground, far below the 1 GOhm stated: input resistance means nothing to a
    # current source, so the rule must stay silent.
    text = f"""
        (version 1)
        (stage photo-tia
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {OPAMP} (in+ gnd) (in- in) (out out) (v+ vcc) (v- vee))
          (resistor R1 in out 10M)
          (capacitor C1 in out 1p)
          (source in (kind current) (range 0nA 400nA) (band 0Hz 1kHz) (impedance 200M))
          (load out (resistance 10k))
          (require (input-resistance 1G)))
        """
    assert findings(text, RULE) == []
