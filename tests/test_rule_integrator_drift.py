"""The integrator-drift rule: a capacitor from out to in- with no DC path across it.

Expected values, derived by hand:

* an inverting integrator's output drifts at Vos/(Rin*C) + Ib/C: the offset voltage
  across Rin and the bias current both charge C (Sedra and Smith, Microelectronic
  Circuits, 7th ed., op-amp chapter: the Miller integrator and its DC problem; R. Mancini (ed.),
  Op Amps for Everyone, 2nd ed., integrator section);
* a shunt resistor Rsh across C puts the integrator's corner at 1/(2 pi Rsh C) (first-
  order RC, common practice), a decade below the band (common practice), rounded up to
  E24 (IEC 60063);
* with Rsh the stage is an inverting amplifier of DC gain Rsh/Rin; its worst-case DC
  output is |Vin| Rsh/Rin + Vos (1 + Rsh/Rin) + Ib Rsh (Eggleston, Basic Electronics
  for Scientists and Engineers, section 6.4, DC error terms of the op-amp).
"""

from __future__ import annotations

import math

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import E24

RULE = "integrator-drift"
VOS, IB = 2e-3, 80e-9
RIN, C = 100e3, 100e-9
HEADROOM = 1.5
OPAMP = params(open_loop_gain=1e5, gbw=1e6, offset_voltage=VOS, bias_current=IB,
               output_headroom_high=HEADROOM, output_headroom_low=HEADROOM)


def integrator(shunt: str = "", source: str = "(amplitude 100mV) (band 10Hz 1kHz)",
               opamp: str = OPAMP) -> str:
    """An inverting integrator on +-12 V; C1 is on line 5."""
    return f"""
        (version 1)
        (stage flow-integrator
          (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 {opamp} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 fb out {C!r})
          (resistor R1 in fb {RIN!r})
          {shunt}
          (source in {source})
          (load out (resistance 10k)))
        """


def test_integrator_with_a_shunt_resistor_passes():
    assert findings(integrator("(resistor R2 fb out 1.6M)"), RULE) == []


def test_pure_integrator_drifts_at_offset_over_rc_plus_bias_over_c():
    text = integrator()
    finding = only(text, RULE)
    expected = VOS / (RIN * C) + IB / C  # 0.2 V/s + 0.8 V/s (Sedra and Smith)
    assert expected == pytest.approx(1.0)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("U1", "C1")
    assert finding.line == 5 == line_of(text, "(capacitor C1")
    assert finding.unit == "V/s"
    assert finding.measured == pytest.approx(expected, rel=1e-6)
    assert finding.details["seconds_to_half_span"] == pytest.approx(12.0 / expected)


def test_shunt_resistor_puts_the_corner_a_decade_below_the_band():
    finding = only(integrator(), RULE)
    least = 1 / (2 * math.pi * 1.0 * C)  # 1 Hz, a decade below 10 Hz: 1.59 MOhm
    assert least == pytest.approx(1.592e6, rel=1e-3)
    assert finding.suggestion.value == pytest.approx(1.6e6)  # next E24 value up
    assert 1.6 in E24
    assert finding.suggestion.element == "R2"


def test_the_suggested_shunt_clears_the_finding():
    finding = only(integrator(), RULE)
    shunt = f"(resistor {finding.suggestion.element} fb out {finding.suggestion.value!r})"
    assert findings(integrator(shunt), RULE) == []


def test_shunt_is_lowered_until_the_dc_output_fits_the_swing():
    # A DC input of up to 0.1 V: the shunt may be at most the R that keeps
    # 0.1 R/Rin + Vos (1 + R/Rin) + Ib R within 12 V - 1.5 V (Eggleston, section 6.4):
    # R (0.1/Rin + Vos/Rin + Ib) <= 10.5 - Vos, so R <= 9.54 MOhm; 9.1 MOhm in E24.
    source = "(range -0.1V 0.1V) (band 0Hz 100Hz)"
    finding = only(integrator(source=source), RULE)
    largest = (12.0 - HEADROOM - VOS) / (0.1 / RIN + VOS / RIN + IB)
    assert largest == pytest.approx(9.54e6, rel=1e-3)
    assert finding.suggestion.value == pytest.approx(9.1e6)
    shunt = f"(resistor R2 fb out {finding.suggestion.value!r})"
    assert findings(integrator(shunt, source=source), RULE) == []


def test_part_without_offset_or_bias_cannot_report_a_rate():
    found = findings(integrator(opamp=params(open_loop_gain=1e5, gbw=1e6)), RULE)
    info = [f for f in found if f.severity is Severity.INFO]
    warning = [f for f in found if f.severity is Severity.WARNING]
    assert len(info) == 1 and info[0].message.startswith("could not check the drift rate")
    assert len(warning) == 1 and warning[0].measured is None


def test_integrator_with_a_floating_inverting_input_is_left_to_floating_input():
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
    assert findings(text, RULE) == []
