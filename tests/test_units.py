"""The value parser (checker.units.parse_value) and the engineering formatter format_si.

Expected numbers come from three definitions, named at each use:
* IEC 60062, the RKM code: the multiplier letter stands in for the decimal point
  (R = 1, k = 1e3, M = 1e6 for resistors; p, n, u/µ for capacitors);
* the SI prefix definitions (p = 1e-12, n = 1e-9, µ = 1e-6, m = 1e-3, k = 1e3,
  M = 1e6, G = 1e9);
* the decibel for voltage ratios: gain in dB = 20 * log10(ratio).
"""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from checker.units import UnitError, format_si, parse_value


def approx(value):
    return pytest.approx(value, rel=1e-12)


# -- RKM codes (IEC 60062) ---------------------------------------------------------------

@pytest.mark.parametrize("text, kind, expected", [
    ("4k7", "resistance", 4.7e3),    # IEC 60062 RKM code: 4k7 = 4.7 kΩ
    ("2R2", "resistance", 2.2),      # IEC 60062 RKM code: 2R2 = 2.2 Ω
    ("R47", "resistance", 0.47),     # IEC 60062 RKM code: R47 = 0.47 Ω
    ("1M5", "resistance", 1.5e6),    # IEC 60062 RKM code: 1M5 = 1.5 MΩ
    ("4n7", "capacitance", 4.7e-9),  # IEC 60062 RKM code: 4n7 = 4.7 nF
    ("6p8", "capacitance", 6.8e-12), # IEC 60062 RKM code: 6p8 = 6.8 pF
])
def test_iec_60062_rkm_code_reads_as_its_value(text, kind, expected):
    assert parse_value(text, kind) == approx(expected)


def test_iec_60062_rkm_code_may_carry_the_unit_symbol():
    # IEC 60062 RKM code 4k7 = 4.7 kΩ; the trailing Ω only names the unit.
    assert parse_value("4k7Ω", "resistance") == approx(4.7e3)


def test_rkm_letter_r_is_refused_for_a_capacitance():
    # In IEC 60062 the letter R marks ohms; it has no meaning for farads.
    with pytest.raises(UnitError, match="marks ohms"):
        parse_value("2R2", "capacitance")


@pytest.mark.parametrize("text, kind", [("4k7k", "resistance"), ("4n7 nF", "capacitance")])
def test_rkm_code_followed_by_a_second_prefix_is_refused(text, kind):
    # The RKM letter already is the multiplier; a second prefix would silently multiply
    # the value by 1e3 or 1e-9 again.
    with pytest.raises(UnitError, match="RKM code"):
        parse_value(text, kind)


# -- SI prefixes -------------------------------------------------------------------------

@pytest.mark.parametrize("prefix, factor", [
    ("p", 1e-12),  # SI prefix definition: pico
    ("n", 1e-9),   # SI prefix definition: nano
    ("u", 1e-6),   # SI prefix definition: micro, ASCII spelling
    ("µ", 1e-6),   # SI prefix definition: micro, MICRO SIGN U+00B5
    ("μ", 1e-6),   # SI prefix definition: micro, GREEK SMALL LETTER MU U+03BC
    ("m", 1e-3),   # SI prefix definition: milli
    ("k", 1e3),    # SI prefix definition: kilo
    ("M", 1e6),    # SI prefix definition: mega
    ("G", 1e9),    # SI prefix definition: giga
])
def test_si_prefix_scales_a_bare_number(prefix, factor):
    assert parse_value(f"3{prefix}", "voltage") == approx(3 * factor)


@pytest.mark.parametrize("prefix, factor", [
    ("p", 1e-12), ("n", 1e-9), ("u", 1e-6), ("µ", 1e-6), ("μ", 1e-6),
    ("m", 1e-3), ("k", 1e3), ("M", 1e6), ("G", 1e9),
])  # SI prefix definitions, as above
def test_si_prefix_scales_a_number_with_its_unit(prefix, factor):
    assert parse_value(f"3{prefix}V", "voltage") == approx(3 * factor)


def test_lower_case_m_is_milli():
    # SI prefix definition: m = milli = 1e-3, whatever the quantity.
    assert parse_value("10m", "resistance") == approx(10e-3)


def test_upper_case_m_is_mega():
    # SI prefix definition: M = mega = 1e6.
    assert parse_value("10M", "resistance") == approx(10e6)


def test_millihertz_and_megahertz_differ_by_the_case_of_m():
    # SI prefix definitions: 1 mHz = 1e-3 Hz, 1 MHz = 1e6 Hz.
    assert parse_value("1mHz", "frequency") == approx(1e-3)
    assert parse_value("1MHz", "frequency") == approx(1e6)


# -- plain numbers and unit symbols ------------------------------------------------------

@pytest.mark.parametrize("value, expected", [
    (10, 10.0), (-3.3, -3.3), ("1e5", 1e5), ("2.2e-6", 2.2e-6), (" 10 ", 10.0),
])  # plain decimal and scientific notation: the number is its own value
def test_plain_number_is_taken_as_si(value, expected):
    assert parse_value(value, "voltage") == approx(expected)


@pytest.mark.parametrize("text, kind, expected", [
    ("10Ω", "resistance", 10.0),            # unit symbol only
    ("10 kΩ", "resistance", 10e3),          # SI prefix definition: k = 1e3
    ("10kohm", "resistance", 10e3),         # SI prefix definition: k = 1e3
    ("22 ohm", "resistance", 22.0),         # unit word only
    ("100nF", "capacitance", 100e-9),       # SI prefix definition: n = 1e-9
    ("10uH", "inductance", 10e-6),          # SI prefix definition: u = 1e-6
    ("3.3V", "voltage", 3.3),               # unit symbol only
    ("2nA", "current", 2e-9),               # SI prefix definition: n = 1e-9
    ("1kHz", "frequency", 1e3),             # SI prefix definition: k = 1e3
    ("0.5V/us", "slew-rate", 0.5e6),        # 1 V/µs = 1e6 V/s (SI prefix definition)
    ("10nV/rtHz", "voltage-noise", 10e-9),  # SI prefix definition: n = 1e-9
    ("1pA/rtHz", "current-noise", 1e-12),   # SI prefix definition: p = 1e-12
    ("1%", "percentage", 0.01),             # percent: 1 % = 1/100
    ("0.1 %", "percentage", 0.001),         # percent: 0.1 % = 1/1000
])
def test_unit_symbol_is_read(text, kind, expected):
    assert parse_value(text, kind) == approx(expected)


@pytest.mark.parametrize("text, ratio", [
    ("20dB", 10.0),    # decibel: 10 ** (20 / 20) = 10
    ("100dB", 1e5),    # decibel: 10 ** (100 / 20) = 1e5
    ("0dB", 1.0),      # decibel: 10 ** 0 = 1
    ("-20dB", 0.1),    # decibel: 10 ** (-20 / 20) = 0.1
])
def test_decibels_become_a_voltage_ratio(text, ratio):
    assert parse_value(text, "gain") == approx(ratio)


# -- errors ------------------------------------------------------------------------------

def test_capacitance_written_where_a_resistance_belongs_is_refused():
    with pytest.raises(UnitError, match="'10F' is a capacitance, but this place takes a"
                                        " resistance"):
        parse_value("10F", "resistance")


def test_voltage_written_where_a_current_belongs_is_refused():
    with pytest.raises(UnitError, match="is a voltage, but this place takes a current"):
        parse_value("5 V", "current")


def test_unknown_unit_is_refused_with_an_example():
    with pytest.raises(UnitError, match=r"unknown unit or prefix 'Q'.*e\.g\. 10k"):
        parse_value("10Q", "resistance")


@pytest.mark.parametrize("value", [float("nan"), float("inf"), float("-inf"), "1e400"])
def test_non_finite_number_is_refused(value):
    with pytest.raises(UnitError, match="not a finite number"):
        parse_value(value, "resistance")


@pytest.mark.parametrize("text", ["nan", "NaN", "inf", "-inf", "Infinity"])
def test_non_finite_word_is_refused(text):
    with pytest.raises(UnitError, match="is not a resistance value"):
        parse_value(text, "resistance")


@pytest.mark.parametrize("text", ["abc", "", "k", "10kk", "10 k 10", "1..2", "--5"])
def test_garbage_text_is_refused(text):
    with pytest.raises(UnitError):
        parse_value(text, "resistance")


@pytest.mark.parametrize("value", [True, None, [10], {"value": 10}])
def test_value_that_is_neither_number_nor_text_is_refused(value):
    with pytest.raises(UnitError, match="expected a resistance value"):
        parse_value(value, "resistance")


@pytest.mark.parametrize("value", [1, "1"])
def test_tolerance_without_a_percent_sign_is_refused(value):
    # Without the sign, "1" would silently mean 100 %.
    with pytest.raises(UnitError, match="needs a percent sign"):
        parse_value(value, "percentage")


def test_unit_error_is_a_value_error():
    assert issubclass(UnitError, ValueError)


# -- format_si ---------------------------------------------------------------------------

@pytest.mark.parametrize("value, unit, text", [
    (4700.0, "Ω", "4.7 kΩ"),       # SI prefix definition: k = 1e3
    (4.7e-9, "F", "4.7 nF"),       # SI prefix definition: n = 1e-9
    (1e6, "Hz", "1 MHz"),          # SI prefix definition: M = 1e6
    (1e-3, "V", "1 mV"),           # SI prefix definition: m = 1e-3
    (-2.2e-6, "A", "-2.2 µA"),     # SI prefix definition: µ = 1e-6
    (6.8e-12, "F", "6.8 pF"),      # SI prefix definition: p = 1e-12
    (2.5e9, "Hz", "2.5 GHz"),      # SI prefix definition: G = 1e9
    (47.0, "Ω", "47 Ω"),           # no prefix between 1 and 1000
])
def test_format_si_picks_the_engineering_prefix(value, unit, text):
    assert format_si(value, unit) == text


def test_format_si_moves_to_the_next_prefix_when_rounding_reaches_1000():
    # 999.96 rounds to 1000 at three digits, which is written 1 k (SI prefix definition).
    assert format_si(999.96, "Ω") == "1 kΩ"


def test_format_si_writes_zero_without_a_prefix():
    assert format_si(0.0, "V") == "0 V"


def test_format_si_writes_a_missing_value_as_not_available():
    assert format_si(None, "V") == "n/a"


def test_format_si_writes_a_fraction_as_percent():
    # percent: 0.01 = 1 %
    assert format_si(0.01, "%") == "1 %"


def test_format_si_keeps_a_ratio_unprefixed_and_plain():
    # a gain keeps no prefix and no exponent: 1e5 V/V written out (project's own layout)
    assert format_si(1e5, "V/V") == "100000 V/V"
    assert format_si(99990.0, "", digits=4) == "99990"


def test_format_gain_is_a_plain_number():
    # project's own layout: 4 significant digits, no exponent between 1e-4 and 1e12
    from checker.units import format_gain
    assert format_gain(-9.8031) == "-9.803"
    assert format_gain(-18412.7) == "-18410"
    assert format_gain(1090.4, digits=3) == "1090"
    assert format_gain(1e7) == "10000000"
    assert format_gain(2.5e-5) == "2.5e-05"  # below 1e-4 the exponent is clearer


def test_format_si_honours_the_number_of_digits():
    # 4712 Ω rounded to 2 and to 4 significant digits, SI prefix definition: k = 1e3
    assert format_si(4712.0, "Ω", digits=2) == "4.7 kΩ"
    assert format_si(4712.0, "Ω", digits=4) == "4.712 kΩ"


def test_format_si_writes_infinity_as_is():
    assert format_si(math.inf, "Hz") == "inf Hz"


@given(st.floats(min_value=1e-12, max_value=1e12))
def test_format_si_output_reads_back_as_the_same_value(value):
    # 15 significant digits survive the round trip well inside rel=1e-12.
    text = format_si(value, "Ω", digits=15)
    assert parse_value(text, "resistance") == approx(value)
