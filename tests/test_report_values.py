"""Values in the human reports read in engineering notation (project's own layout; SI
prefixes as in the SI Brochure, 9th edition, 2019, section 3)."""

from __future__ import annotations

from checker.report.values import measure, measured_line, stage_gain


def test_a_slow_drift_reads_in_volts_per_second_and_a_slew_in_volts_per_microsecond():
    assert measure(0.1, "V/s") == "100 mV/s"  # 1e-07 V/µs before
    assert measure(455.0, "V/s") == "455 V/s"
    assert measure(2.5e6, "V/s") == "2.5 V/µs"


def test_no_limit_shows_no_dash():
    assert measured_line(1.38e5, None, "Hz") == "measured 138 kHz"
    assert measured_line(23.8, 45.0, "°") == "measured 23.8°, limit 45.0°"
    assert measured_line(None, None, "V") is None


def test_gains_are_plain_and_a_transimpedance_is_in_ohms():
    assert measure(-18412.0, "V/V") == "-18410"
    assert stage_gain(-1e7, "Ω") == "-10 MΩ"
    assert stage_gain(-9.8031, "V/V") == "-9.803"
