"""Netlist numbers in the simulator convention, not ampcheck's.

Expected values: SPICE3 user's manual (University of California, Berkeley), section 2.1
"General structure and conventions": a number may be followed by one of the scale
factors T = 1e12, G = 1e9, MEG = 1e6, K = 1e3, MIL = 25.4e-6, M = 1e-3, U = 1e-6,
N = 1e-9, P = 1e-12, F = 1e-15; letters immediately following a number that are not
scale factors are ignored, and letters immediately following a scale factor are
ignored ("10, 10V, 10Volts and 10Hz all represent the same number, and M, MA, MSec and
MMhos all represent the same scale factor").
"""

import pytest

from checker.io.netlist_values import NetlistValueError, parse_netlist_number
from checker.units import parse_value


@pytest.mark.parametrize("text, expected", [
    ("1T", 1e12), ("1G", 1e9), ("1MEG", 1e6), ("1K", 1e3), ("1MIL", 25.4e-6),
    ("1M", 1e-3), ("1U", 1e-6), ("1N", 1e-9), ("1P", 1e-12), ("1F", 1e-15),
])
def test_each_scale_factor_of_the_manual(text, expected):
    # SPICE3 user's manual, section 2.1: the scale factor table
    assert parse_netlist_number(text) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("text", ["1meg", "1Meg", "1mEg", "1k", "1K"])
def test_scale_factors_are_case_insensitive(text):
    # SPICE3 user's manual, section 2.1 (names and scale factors are case-insensitive)
    assert parse_netlist_number(text) in (1e6, 1e3)


def test_m_is_milli_and_meg_is_mega_unlike_the_stage_format():
    # SPICE3 user's manual, section 2.1: M = 1e-3, MEG = 1e6; the stage format's M is mega
    # (docs/format.md, "m is milli and M is mega, always")
    assert parse_netlist_number("1M") == 1e-3
    assert parse_netlist_number("1MEG") == 1e6
    assert parse_value("1M", "resistance") == 1e6


@pytest.mark.parametrize("text", ["10", "10V", "10Volts", "10Hz"])
def test_letters_that_are_not_scale_factors_are_ignored(text):
    # SPICE3 user's manual, section 2.1: "10, 10V, 10Volts, and 10Hz all represent the
    # same number"
    assert parse_netlist_number(text) == 10.0


@pytest.mark.parametrize("text", ["1M", "1MA", "1MSec", "1MMhos", "1MOhm"])
def test_letters_after_a_scale_factor_are_ignored(text):
    # SPICE3 user's manual, section 2.1: "M, MA, MSec, and MMhos all represent the same
    # scale factor" (so 1MOhm is a milliohm, the trade's well-known trap)
    assert parse_netlist_number(text) == 1e-3


def test_f_after_a_number_is_femto_even_on_a_capacitor():
    # SPICE3 user's manual, section 2.1: F = 1e-15, so "1F" is one femtofarad while
    # "1uF" is a microfarad (the F after the scale factor is ignored)
    assert parse_netlist_number("1F") == 1e-15
    assert parse_netlist_number("1uF") == 1e-6


@pytest.mark.parametrize("text, expected", [
    ("12", 12.0), ("-44", -44.0), ("3.14159", 3.14159), ("1e-14", 1e-14),
    ("2.65e3", 2650.0), (".5", 0.5), ("+5", 5.0),
])
def test_integer_floating_and_exponent_fields(text, expected):
    # SPICE3 user's manual, section 2.1: integer (12, -44), floating point (3.14159) and
    # exponent (1e-14, 2.65e3) fields
    assert parse_netlist_number(text) == expected


def test_a_scaled_decimal_is_the_decimal_number_exactly():
    # 4.7k is the decimal 4700: read as 4.7e3, not 4.7 * 1000.0 (4700.000000000001)
    assert parse_netlist_number("4.7k") == 4700.0
    assert parse_netlist_number("22n") == float("22e-9")


@pytest.mark.parametrize("text, words", [
    ("4k7", "no codes like 4k7: write 4.7k"),
    ("{RVAL}", "parameter expression"),
    ("abc", "not a number"),
    ("10k%", "unexpected '%'"),
])
def test_what_the_convention_does_not_define_is_refused_with_a_reason(text, words):
    with pytest.raises(NetlistValueError) as error:
        parse_netlist_number(text)
    assert words in str(error.value)
