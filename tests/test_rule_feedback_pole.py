"""The feedback-pole rule: the feedback resistance and the op-amp's input capacitance.

Every expected phase margin here is computed independently with python-control
(``stability_margins``) on the loop transfer function written out by hand for the
netlist: the single-pole op-amp A(s) = A0 / (1 + s/w1), w1 = 2 pi GBW / A0 (Sedra and
Smith, Microelectronic Circuits, 7th ed., op-amp chapter), times the feedback factor beta(s) of
the stage. The op-amps are given inline with no output resistance and no input
resistance, so beta(s) is the feedback network with the input capacitance alone:

* inverting stage, in+ grounded, ideal source at ``in`` (an AC ground for the loop):
  Ccm and Cdiff both sit from the inverting input to AC ground, Cin = Ccm + Cdiff, and
  beta(s) = Rg/(Rg + Rf) / (1 + s (Rf||Rg) Cin): a pole at fp = 1/(2 pi (Rf||Rg) Cin)
  (R. Mancini (ed.), Op Amps for Everyone, 2nd ed., stability chapter);
* transimpedance stage, current source with shunt Rsh and capacitance Cs at in-:
  beta(s) = Zin/(Zin + Rf) with Zin = Rsh || 1/(s (Cs + Cin)).

The neutralising feedback capacitor is Cf = Rg*Cin/Rf (same source), rounded up to E12.
"""

from __future__ import annotations

import control
import pytest
from rule_helpers import TWO_PI, findings, line_of, only, parallel, params

from checker.findings import Severity
from checker.preferred import at_least

RULE = "feedback-pole"
PHASE_TOLERANCE_DEG = 0.5

# A 10 MHz CMOS-class op-amp: A0 = 100 000, Ccm = 5 pF, Cdiff = 3 pF.
A0, GBW = 1e5, 10e6
CCM, CDIFF = 5e-12, 3e-12
CIN = CCM + CDIFF
OPAMP = params(open_loop_gain=A0, gbw=GBW, input_capacitance_cm=CCM,
               input_capacitance_diff=CDIFF)


def inverting(rg: float, rf: float, extra: str = "", require: str = "") -> str:
    """An inverting stage, Rg = R1 (in to fb) and Rf = R2 (fb to out, line 6), on +-15 V."""
    return f"""
        (version 1)
        (stage inverting-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb {rg!r})
          (resistor R2 fb out {rf!r})
          {extra}
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k))
          {require})
        """


def opamp_tf():
    """A(s) = A0 / (1 + s/w1), w1 = 2 pi GBW / A0."""
    return control.tf([A0], [A0 / (TWO_PI * GBW), 1])


def inverting_margin_deg(rg: float, rf: float) -> float:
    """python-control's phase margin of A(s) * Rg/(Rg + Rf) / (1 + s (Rf||Rg) Cin)."""
    beta = control.tf([rg / (rg + rf)], [parallel(rg, rf) * CIN, 1])
    return float(control.stability_margins(opamp_tf() * beta)[1])


# -- inverting stages -------------------------------------------------------------------

def test_moderate_resistors_pass():
    # Rf||Rg = 9.1 kOhm: fp = 2.2 MHz, far above the 0.9 MHz crossover (about 69 deg).
    assert inverting_margin_deg(10e3, 100e3) > 60
    assert findings(inverting(10e3, 100e3), RULE) == []


def test_megohm_feedback_is_an_error_below_30_degrees():
    text = inverting(100e3, 1e6)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1", "R2")
    assert finding.line == 6 == line_of(text, "(resistor R2")
    assert finding.column == 3
    assert finding.unit == "°"
    assert finding.limit == pytest.approx(45.0)
    expected = inverting_margin_deg(100e3, 1e6)  # about 27.5 deg
    assert expected < 30
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_feedback_pole_frequency_is_one_over_two_pi_rc():
    finding = only(inverting(100e3, 1e6), RULE)
    # fp = 1/(2 pi (Rf||Rg) Cin), Mancini (ed.), Op Amps for Everyone, 2nd ed.: about 219 kHz.
    expected = 1 / (TWO_PI * parallel(100e3, 1e6) * CIN)
    assert finding.details["feedback_pole_hz"] == pytest.approx(expected, rel=1e-3)


def test_margin_between_30_and_45_degrees_is_a_warning():
    text = inverting(47e3, 470e3)
    finding = only(text, RULE)
    expected = inverting_margin_deg(47e3, 470e3)  # about 39.1 deg
    assert 30 < expected < 45
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1", "R2")
    assert finding.line == line_of(text, "(resistor R2")
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_suggested_cf_is_rg_cin_over_rf_rounded_up_to_e12():
    finding = only(inverting(100e3, 1e6), RULE)
    neutral = 100e3 * CIN / 1e6  # Cf = Rg*Cin/Rf = 0.8 pF (Mancini (ed.))
    expected = at_least(neutral, "E12")
    assert expected == pytest.approx(0.82e-12)  # the next E12 value up from 0.8 pF
    assert finding.suggestion.value == pytest.approx(expected, rel=1e-9)
    assert finding.suggestion.unit == "F"
    assert finding.suggestion.element == "C1"


def test_suggested_cf_across_the_feedback_resistor_clears_the_finding():
    finding = only(inverting(100e3, 1e6), RULE)
    cf = finding.suggestion.value
    fixed = inverting(100e3, 1e6, extra=f"(capacitor C1 fb out {cf!r})")
    assert findings(fixed, RULE) == []


def test_suggested_cf_restores_the_margin_by_python_control():
    finding = only(inverting(100e3, 1e6), RULE)
    cf = finding.suggestion.value
    rg, rf = 100e3, 1e6
    # With Cf across Rf: beta = (1/Rf + s Cf) / (1/Rg + 1/Rf + s (Cin + Cf)).
    beta = control.tf([cf, 1 / rf], [CIN + cf, 1 / rg + 1 / rf])
    margin = float(control.stability_margins(opamp_tf() * beta)[1])
    assert margin >= 45


def test_warning_stage_fixed_by_its_suggested_cf():
    finding = only(inverting(47e3, 470e3), RULE)
    cf = finding.suggestion.value
    fixed = inverting(47e3, 470e3, extra=f"(capacitor C1 fb out {cf!r})")
    assert findings(fixed, RULE) == []


def test_phase_margin_requirement_raises_the_limit():
    # 22k / 220k: about 53.7 deg, which passes the default 45 deg ...
    expected = inverting_margin_deg(22e3, 220e3)
    assert 45 < expected < 60
    assert findings(inverting(22e3, 220e3), RULE) == []
    # ... but not a stated requirement of 60 deg.
    text = inverting(22e3, 220e3, require="(require (phase-margin 60deg))")
    finding = only(text, RULE)
    assert finding.severity is Severity.WARNING
    assert finding.limit == pytest.approx(60.0)
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_fix_for_a_raised_requirement_reaches_that_requirement():
    require = "(require (phase-margin 60deg))"
    finding = only(inverting(22e3, 220e3, require=require), RULE)
    cf = finding.suggestion.value
    fixed = inverting(22e3, 220e3, extra=f"(capacitor C1 fb out {cf!r})", require=require)
    assert findings(fixed, RULE) == []


def test_part_without_input_capacitance_cannot_be_checked():
    opamp = params(open_loop_gain=A0, gbw=GBW)
    text = f"""
        (version 1)
        (stage no-capacitance
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 100k)
          (resistor R2 fb out 1M)
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k)))
        """
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check the feedback pole of U1")
    assert "input capacitance" in finding.message
    assert finding.elements == ("U1",)
    assert finding.line == 4 == line_of(text, "(opamp U1")
    assert finding.details.get("unchecked") is True


# -- a transimpedance stage -------------------------------------------------------------
# A photodiode as a current source: 200 MOhm shunt, 100 pF, into a 10 MOhm feedback
# resistor with no feedback capacitor; a 4 MHz JFET-class op-amp.
TIA_A0, TIA_GBW = 2e5, 4e6
RF, RSH, CS = 10e6, 200e6, 100e-12
TIA_OPAMP = params(open_loop_gain=TIA_A0, gbw=TIA_GBW, input_capacitance_cm=CCM,
                   input_capacitance_diff=CDIFF)


def transimpedance(extra: str = "") -> str:
    return f"""
        (version 1)
        (stage photo-tia
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {TIA_OPAMP} (in+ gnd) (in- in) (out out) (v+ vcc) (v- vee))
          (resistor R1 in out 10M)
          {extra}
          (source in (kind current) (range 0nA 400nA) (band 0Hz 1kHz)
            (impedance 200M) (capacitance 100p))
          (load out (resistance 10k)))
        """


def test_transimpedance_stage_without_cf_is_flagged():
    text = transimpedance()
    finding = only(text, RULE)
    # beta = Zin/(Zin + Rf), Zin = Rsh/(1 + s Rsh C): beta = Rsh/(Rsh + Rf + s Rf Rsh C)
    c_total = CS + CIN
    opamp = control.tf([TIA_A0], [TIA_A0 / (TWO_PI * TIA_GBW), 1])
    beta = control.tf([RSH], [RF * RSH * c_total, RSH + RF])
    expected = float(control.stability_margins(opamp * beta)[1])  # under 1 deg
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1", "R1")
    assert finding.line == 5 == line_of(text, "(resistor R1")
    assert finding.details["topology"] == "transimpedance"
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_transimpedance_fails_on_the_sensor_capacitance_when_the_part_gives_none():
    # The part states no input capacitance, but the photodiode's 100 pF alone already
    # leaves under 1 deg; an unknown part capacitance could only make it worse, so this
    # is a failure, not a "could not check".
    opamp = params(open_loop_gain=TIA_A0, gbw=TIA_GBW)
    text = transimpedance().replace(TIA_OPAMP, opamp)
    finding = only(text, RULE)
    tia_opamp = control.tf([TIA_A0], [TIA_A0 / (TWO_PI * TIA_GBW), 1])
    beta = control.tf([RSH], [RF * RSH * CS, RSH + RF])
    expected = float(control.stability_margins(tia_opamp * beta)[1])
    assert finding.severity is Severity.ERROR
    assert finding.elements == ("U1", "R1")
    assert finding.measured == pytest.approx(expected, abs=PHASE_TOLERANCE_DEG)


def test_transimpedance_suggested_cf_clears_the_finding():
    finding = only(transimpedance(), RULE)
    cf = finding.suggestion.value
    assert cf is not None and cf > 0
    assert findings(transimpedance(extra=f"(capacitor C1 in out {cf!r})"), RULE) == []


def test_neutralising_capacitor_uses_rg_itself_not_a_resistance_with_the_output_in_it():
    # Cf = Rg*Cin/Rf (R. Mancini (ed.), Op Amps for Everyone, 2nd ed., stability chapter, the
    # feedback-pole compensation), with Rg = 100 kOhm, Rf = 1 MOhm, Cin = 8 pF: 0.8 pF,
    # 820 fF in E12 (IEC 60063). A part with 1 kOhm of output resistance into 1 kOhm of
    # load must not change it: the path through Rf and the output stage is no part of Rg.
    opamp = params(open_loop_gain=A0, gbw=GBW, input_capacitance_cm=CCM,
                   input_capacitance_diff=CDIFF, output_resistance=1e3)
    text = inverting(100e3, 1e6).replace(OPAMP, opamp).replace(
        "(resistance 10k)", "(resistance 1k)")
    finding = only(text, RULE)
    neutral = 100e3 * CIN / 1e6
    assert "Rg*Cin/Rf = 800 fF" in finding.suggestion.text
    assert finding.suggestion.value == pytest.approx(at_least(neutral, "E12"))
    assert finding.suggestion.value == pytest.approx(820e-15)
