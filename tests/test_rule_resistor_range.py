"""The resistor-range rule: feedback-network resistances too low or too high.

Expected values, derived by hand:

* limits: 1 kOhm at the least; 1 MOhm at most for a bipolar input, 10 MOhm for a FET or
  CMOS input with bias current under about 1 nA; a network resistor on the output may
  draw at most a tenth of the part's output current (all common practice);
* the current through a resistor is the voltage across it over R (Ohm's law); in an
  inverting stage the output Vout = -Vin Rf/R1 sits across Rf (the inverting input at
  virtual ground; Sedra and Smith, Microelectronic Circuits, 7th ed., op-amp chapter);
* the bias current into the inverting input makes Ib Rf at the output (Eggleston, Basic
  Electronics for Scientists and Engineers, section 6.4);
* thermal noise density sqrt(4kTR) (Johnson-Nyquist), k from scipy.constants (CODATA);
* scaling every resistor of a network by one factor keeps its ratios, and so the gain
  1 + Rf/Rg of a non-inverting stage.
"""

from __future__ import annotations

import math

import pytest
import scipy.constants
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity
from checker.preferred import E24, E96

RULE = "resistor-range"
IOUT = 25e-3
BIPOLAR = params(open_loop_gain=1e6, gbw=1e6, bias_current=80e-9, output_current=IOUT)
CMOS = params(open_loop_gain=1e6, gbw=1e6, bias_current=1e-12, output_current=IOUT)


def non_inverting(rg: str, rf: str, opamp: str = BIPOLAR, tolerance: str = "1%") -> str:
    """Non-inverting stage on +-15 V; R2 (Rf) is on line 6."""
    return f"""
        (version 1)
        (stage sensor-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {opamp} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd {rg} (tolerance {tolerance}))
          (resistor R2 fb out {rf} (tolerance {tolerance}))
          (source in (range -1V 1V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
        """


def gain(rg: float, rf: float) -> float:
    return 1 + rf / rg


def test_moderate_network_passes():
    assert findings(non_inverting("10k", "22k"), RULE) == []


def test_megohm_feedback_on_a_bipolar_input_is_too_high():
    text = non_inverting("1M", "2.2M")
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("R2", "U1")
    assert finding.line == 6 == line_of(text, "(resistor R2")
    assert finding.unit == "Ω"
    assert finding.measured == pytest.approx(2.2e6)
    assert finding.limit == pytest.approx(1e6)  # bipolar maximum (common practice)
    assert finding.details["side"] == "high" and finding.details["kind"] == "bipolar"


def test_too_high_reports_bias_error_and_thermal_noise():
    finding = only(non_inverting("1M", "2.2M"), RULE)
    # Ib Rf = 80 nA x 2.2 MOhm = 176 mV at the output (Eggleston, section 6.4).
    assert finding.details["bias_error_v"] == pytest.approx(80e-9 * 2.2e6, rel=1e-3)
    # sqrt(4kTR) at 300 K: 191 nV/rtHz for 2.2 MOhm (Johnson-Nyquist, CODATA k).
    density = math.sqrt(4 * scipy.constants.k * 300 * 2.2e6)
    assert density == pytest.approx(191e-9, rel=1e-2)
    assert finding.details["thermal_noise_v_per_rthz"] == pytest.approx(density, rel=1e-9)


def test_fet_input_allows_ten_megohms():
    # The same network on a 1 pA input is inside the 10 MOhm limit (common practice).
    assert findings(non_inverting("1M", "2.2M", opamp=CMOS), RULE) == []


def test_above_ten_megohms_on_a_fet_input_is_too_high():
    finding = only(non_inverting("10M", "22M", opamp=CMOS), RULE)
    assert finding.elements == ("R2", "U1")
    assert finding.limit == pytest.approx(10e6)
    assert finding.details["kind"] == "FET/CMOS"


def test_scaling_keeps_the_gain_and_rounds_to_e96():
    finding = only(non_inverting("1M", "2.2M"), RULE)
    values = finding.details["scaled"]
    assert set(values) == {"R1", "R2"}
    for ohms in values.values():
        mantissa = ohms / 10 ** math.floor(math.log10(ohms))
        assert round(mantissa, 2) in E96  # 1 % parts: E96 (IEC 60063)
    assert max(values.values()) <= 1e6
    assert gain(values["R1"], values["R2"]) == pytest.approx(gain(1e6, 2.2e6), rel=0.01)


def test_applying_the_scaled_network_clears_the_finding():
    finding = only(non_inverting("1M", "2.2M"), RULE)
    values = finding.details["scaled"]
    assert findings(non_inverting(repr(values["R1"]), repr(values["R2"])), RULE) == []


def test_network_under_one_kilohm_is_too_low_and_scaled_up():
    text = non_inverting("220", "470", tolerance="5%")
    found = findings(text, RULE)
    assert [f.elements for f in found] == [("R1", "U1"), ("R2", "U1")]
    assert {f.details["side"] for f in found} == {"low"}
    low = found[0]
    assert low.measured == pytest.approx(220) and low.limit == pytest.approx(1e3)
    values = low.details["scaled"]
    for ohms in values.values():
        mantissa = ohms / 10 ** math.floor(math.log10(ohms))
        assert round(mantissa, 1) in E24  # 5 % parts: E24 (IEC 60063)
    assert min(values.values()) >= 1e3
    assert gain(values["R1"], values["R2"]) == pytest.approx(gain(220, 470), rel=0.01)
    assert findings(non_inverting(repr(values["R1"]), repr(values["R2"]),
                                  tolerance="5%"), RULE) == []


def inverting(rf: str, high: float, rg: str = "1k") -> str:
    """Inverting gain -Rf/Rg on +-15 V, input 0 V to ``high``; R2 (Rf) on line 6."""
    return f"""
        (version 1)
        (stage drive-gain
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {BIPOLAR} (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb {rg} (tolerance 1%))
          (resistor R2 fb out {rf} (tolerance 1%))
          (source in (range 0V {high!r}) (band 0Hz 10Hz))
          (load out (resistance 100k)))
        """


def test_feedback_resistor_drawing_over_a_tenth_of_the_output_current_loads_it():
    # Gain -2 with Rf 2 kOhm and 5 V in: 10 V across Rf, 5 mA (Ohm's law), over the
    # 2.5 mA that is a tenth of 25 mA (common practice).
    text = inverting("2k", 5.0)
    found = findings(text, RULE)
    rf = [f for f in found if f.elements == ("R2", "U1")]
    assert len(rf) == 1
    finding = rf[0]
    assert finding.details["side"] == "low"
    assert finding.details["current_a"] == pytest.approx(10.0 / 2e3, rel=1e-3)
    # The least Rf is 10 V / 2.5 mA = 4 kOhm.
    assert finding.limit == pytest.approx(10.0 / (0.1 * IOUT), rel=1e-3)
    assert finding.line == line_of(text, "(resistor R2")


def test_scaled_network_carries_at_most_a_tenth_of_the_output_current():
    finding = next(f for f in findings(inverting("2k", 5.0), RULE)
                   if f.elements == ("R2", "U1"))
    values = finding.details["scaled"]
    # The gain -R2/R1 stays -2 within 1 %; R1's current, 5 V / R1 from the virtual
    # ground, flows on through R2 and must stay within a tenth of 25 mA.
    assert values["R2"] / values["R1"] == pytest.approx(2.0, rel=0.01)
    assert 5.0 / values["R1"] <= 0.1 * IOUT
    assert findings(inverting(repr(values["R2"]), 5.0, rg=repr(values["R1"])), RULE) == []


def test_ratio_too_wide_for_one_factor_says_so():
    # 1 kOhm to 10 MOhm: no factor puts both inside 1 kOhm to 1 MOhm.
    found = findings(non_inverting("1k", "10M"), RULE)
    finding = next(f for f in found if f.elements[0] == "R2")
    assert finding.suggestion.value is None
    assert "no single factor" in finding.suggestion.text
    assert finding.details["scaled"] == {}


def test_part_without_bias_current_cannot_be_placed_in_a_class():
    opamp = params(open_loop_gain=1e6, gbw=1e6, output_current=IOUT)
    text = non_inverting("1M", "2.2M", opamp=opamp)
    finding = only(text, RULE)
    assert finding.severity is Severity.INFO
    assert finding.message.startswith("could not check whether R2")
    assert finding.line == line_of(text, "(resistor R2")


def test_part_without_output_current_cannot_check_the_loading():
    opamp = params(open_loop_gain=1e6, gbw=1e6, bias_current=80e-9)
    finding = only(non_inverting("10k", "22k", opamp=opamp), RULE)
    assert finding.severity is Severity.INFO
    assert "gives no output current" in finding.message
