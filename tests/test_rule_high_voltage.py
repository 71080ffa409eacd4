"""The high-voltage rule: a caution beyond extra-low-voltage limits.

Limits: 60 V DC and 42.4 V peak (30 V rms) AC, the ES1 limits of IEC 62368-1 (and the
SELV limits of IEC 60950-1). The supply span counts the ground net as 0 V.
"""

from __future__ import annotations

import math

import pytest
from rule_helpers import findings, line_of, only, params

from checker.findings import Severity

RULE = "high-voltage"
DC_LIMIT_V = 60.0  # IEC 62368-1 ES1, DC
AC_PEAK_LIMIT_V = 42.4  # IEC 62368-1 ES1, 30 V rms: 30 * sqrt(2) = 42.4 V peak

OPAMP = params(open_loop_gain=3e5, gbw=5e6)


def driver(vcc: float, vee: float) -> str:
    """A non-inverting gain-20 stage on vcc / vee; the stage is on line 2."""
    return f"""
        (version 1)
        (stage piezo-driver
          (ground gnd) (supply vcc {vcc!r}) (supply vee {vee!r})
          (opamp U1 {OPAMP} (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 2k)
          (resistor R2 fb out 38k)
          (source in (amplitude 2V) (band 38kHz 42kHz))
          (load out (resistance 10k) (capacitance 2n2)))
        """


def test_extra_low_voltage_supplies_pass():
    assert findings(driver(15.0, -15.0), RULE) == []


def test_supply_span_of_exactly_60_volts_passes():
    assert findings(driver(30.0, -30.0), RULE) == []


def test_supply_span_beyond_60_volts_is_flagged():
    text = driver(75.0, -75.0)
    finding = only(text, RULE)
    assert finding.rule == RULE
    assert finding.severity is Severity.WARNING
    assert finding.stage == "piezo-driver"
    assert finding.elements == ()
    assert finding.line == 2 == line_of(text, "(stage piezo-driver")
    assert finding.column == 1
    assert finding.unit == "V"
    assert finding.measured == pytest.approx(75.0 - (-75.0))
    assert finding.limit == pytest.approx(DC_LIMIT_V)
    assert "local electrical codes" in finding.message


def test_supply_span_counts_the_ground_net():
    # Rails at 5 V and 62 V span 57 V between themselves, but 62 V from the ground net.
    finding = only(driver(62.0, 5.0), RULE)
    assert finding.measured == pytest.approx(62.0)


def line_sense(source: str) -> str:
    """A 11:1 divider (R1, R2) into a follower on +-15 V, sensing a transformer secondary
    or a DC bus; the source is on line 7."""
    return f"""
        (version 1)
        (stage line-sense
          (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 {OPAMP} (in+ tap) (in- out) (out out) (v+ vcc) (v- vee))
          (resistor R1 in tap 100k)
          (resistor R2 tap gnd 10k)
          (source in (label "sensed line") {source})
          (load out (resistance 10k)))
        """


def test_ac_source_above_42_4_volts_peak_is_flagged():
    assert 30 * math.sqrt(2) == pytest.approx(AC_PEAK_LIMIT_V, abs=0.05)
    text = line_sense("(amplitude 45V) (band 50Hz 60Hz)")
    finding = only(text, RULE)
    assert finding.severity is Severity.WARNING
    assert finding.elements == ("sensed line",)
    assert finding.line == 7 == line_of(text, "(source in")
    assert finding.column == 3
    assert finding.measured == pytest.approx(45.0)
    assert finding.limit == pytest.approx(AC_PEAK_LIMIT_V)
    assert "AC peak" in finding.message


def test_ac_source_below_42_4_volts_peak_passes():
    assert findings(line_sense("(amplitude 40V) (band 50Hz 60Hz)"), RULE) == []


def test_ac_peak_counts_the_offset():
    # 20 V DC plus 25 V peak reaches 45 V.
    finding = only(line_sense("(amplitude 25V) (offset 20V) (band 50Hz 60Hz)"), RULE)
    assert finding.measured == pytest.approx(45.0)


def test_dc_source_under_60_volts_passes():
    # 50 V as a DC range is under 60 V DC, though it would be over the AC peak limit.
    assert findings(line_sense("(range 0V 50V) (band 0Hz 1Hz)"), RULE) == []


def test_dc_source_beyond_60_volts_is_flagged():
    finding = only(line_sense("(range -65V 0V) (band 0Hz 1Hz)"), RULE)
    assert finding.measured == pytest.approx(65.0)
    assert finding.limit == pytest.approx(DC_LIMIT_V)
    assert "DC" in finding.message
