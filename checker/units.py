"""Engineering values: SI prefixes, unit symbols and RKM codes (IEC 60062).

Every value in a stage file passes through :func:`parse_value`, which returns a plain
SI float or raises :class:`UnitError` with a message meant for the user.

Accepted forms (``m`` is always milli and ``M`` always mega):

* plain numbers: ``10``, ``-3.3``, ``1e5``, ``2.2e-6``;
* a number, an optional SI prefix and an optional unit symbol, with or without a space:
  ``10k``, ``10 kOhm``, ``10kΩ``, ``100n``, ``100nF``, ``2.2u``, ``2.2µF``, ``0.5V/us``;
* RKM codes per IEC 60062, where the prefix letter stands in for the decimal point:
  ``4k7`` (4.7 k), ``2R2`` (2.2), ``R47`` (0.47), ``1M5`` (1.5 M), ``4n7`` (4.7 n);
* percentages for tolerances (``1%`` -> 0.01) and decibels for gains (``100dB`` -> 1e5).
"""

from __future__ import annotations

import math
import re
import sys
from checker.record import record

PREFIXES: dict[str, float] = {
    "f": 1e-15,
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "µ": 1e-6,  # micro sign U+00B5
    "μ": 1e-6,  # Greek small letter mu U+03BC
    "m": 1e-3,
    "": 1.0,
    "k": 1e3,
    "K": 1e3,
    "M": 1e6,
    "G": 1e9,
    "T": 1e12,
}


@record(frozen=True)
class Quantity:
    """A kind of value: its canonical SI symbol and the spellings accepted for it."""

    symbol: str
    spellings: tuple[str, ...]
    allow_prefix: bool = True


OHM = Quantity("Ω", ("Ω", "ohm", "ohms", "Ohm", "Ohms", "R"))
FARAD = Quantity("F", ("F",))
HENRY = Quantity("H", ("H",))
VOLT = Quantity("V", ("V",))
AMPERE = Quantity("A", ("A",))
HERTZ = Quantity("Hz", ("Hz",))
WATT = Quantity("W", ("W",))
SLEW = Quantity("V/s", ("V/s",))
VOLT_NOISE = Quantity("V/√Hz", ("V/√Hz", "V/rtHz", "V/sqrtHz"))
AMP_NOISE = Quantity("A/√Hz", ("A/√Hz", "A/rtHz", "A/sqrtHz"))
DEGREE = Quantity("°", ("°", "deg"), allow_prefix=False)
RATIO = Quantity("", ("",), allow_prefix=False)
FRACTION = Quantity("%", ("%",), allow_prefix=False)
GAIN = Quantity("V/V", ("V/V", "dB"))
KELVIN = Quantity("K", ("K",), allow_prefix=False)

QUANTITIES: dict[str, Quantity] = {
    "resistance": OHM,
    "capacitance": FARAD,
    "inductance": HENRY,
    "voltage": VOLT,
    "current": AMPERE,
    "frequency": HERTZ,
    "power": WATT,
    "slew-rate": SLEW,
    "voltage-noise": VOLT_NOISE,
    "current-noise": AMP_NOISE,
    "angle": DEGREE,
    "ratio": RATIO,
    "percentage": FRACTION,
    "gain": GAIN,
    "temperature": KELVIN,
}


class UnitError(ValueError):
    """A value that cannot be read as the quantity its place asks for."""


# The magnitudes a stage's values may take, by kind: (smallest non-zero, largest). Zero
# is left to the place that reads the value (a resistor must be above zero, a source's
# impedance may be 0). Anything outside cannot be a physical part or signal, and would
# only push the solver to overflow or to figures made of rounding noise. Generous on
# purpose (common practice: the widest values in use are around 1 µΩ shunts, 1 aF
# strays, 10 TΩ electrometer inputs and 200 dB open-loop gains). Documented in
# docs/format.md (values).
PLAUSIBLE: dict[str, tuple[float, float]] = {
    "resistance": (1e-6, 1e18),
    "capacitance": (1e-18, 1e4),
    "inductance": (1e-15, 1e4),
    "voltage": (1e-15, 1e6),
    "current": (1e-21, 1e4),
    "frequency": (1e-9, 1e15),
    "power": (1e-12, 1e6),
    "slew-rate": (1e-6, 1e15),
    "voltage-noise": (1e-18, 1.0),
    "current-noise": (1e-24, 1.0),
    "angle": (1e-9, 360.0),
    "ratio": (1e-15, 1e15),
    "percentage": (1e-9, 10.0),
    "gain": (1e-12, 1e12),
    "temperature": (1e-3, 1e4),
}


_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_PLAIN = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$", re.ASCII)  # ASCII digits only
# RKM (IEC 60062): digits, a multiplier letter in place of the decimal point, digits.
_RKM = re.compile(r"^\s*([+-]?)(\d*)([RrfpnuµμmkKMGT])(\d+)\s*(.*?)\s*$", re.ASCII)
_RKM_FACTORS = dict(PREFIXES, R=1.0, r=1.0)
_TIME_PREFIXES = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9}


def parse_value(value: object, kind: str) -> float:
    """Return ``value`` as an SI float for the quantity ``kind`` (a key of QUANTITIES).

    Raises UnitError for text that is not a value, a unit that does not fit the
    quantity, NaN or an infinity.
    """
    quantity = QUANTITIES[kind]
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise UnitError(f"expected {_a(kind)} value, got {value!r}")
    if isinstance(value, (int, float)):
        if kind == "percentage":
            try:
                number = float(value)
            except OverflowError:  # an integer with hundreds of digits: no fraction
                number = math.inf
            raise UnitError(_percent_hint(number, _short(value), quote='"'))
        try:
            number = float(value)
        except OverflowError:  # an integer with hundreds of digits
            raise UnitError(f"{_short(value)} is beyond the range of a number") from None
    else:
        try:
            number = _parse_text(value.strip(), quantity, kind)
        except OverflowError:  # decibels whose ratio overflows: 7000dB
            raise UnitError(f"{_short(value)} is beyond the range of a number") from None
        if number == 0.0 and underflows(value.strip()):
            raise UnitError(f"{_short(value)} is too small to be a number (below about"
                            " 1e-308 it reads as 0)")
    if not math.isfinite(number):
        beyond = " (a number beyond about 1.8e308 reads as infinity)" \
            if isinstance(value, float) and math.isinf(value) else ""
        raise UnitError(f"{_short(value)} is not a finite number{beyond}")
    if number != 0.0 and abs(number) < sys.float_info.min:
        raise UnitError(f"{_short(value)} is too small to be a number (a denormal)")
    return number


def underflows(text: str) -> bool:
    """``text`` starts with a number that is not zero as written but reads as 0.0: its
    exponent is below a double's (1e-400), so it would pass as a plain 0."""
    plain = _PLAIN.match(text)
    if not plain:
        return False
    number = plain.group(1)
    mantissa = re.split("[eE]", number)[0]
    return float(number) == 0.0 and any(digit in mantissa for digit in "123456789")


def check_plausible(number: float, kind: str, text: object = None) -> None:
    """Raise UnitError when a non-zero ``number`` of quantity ``kind`` lies outside
    :data:`PLAUSIBLE` (it cannot be a physical value)."""
    smallest, largest = PLAUSIBLE[kind]
    magnitude = abs(number)
    if magnitude == 0.0 or smallest <= magnitude <= largest:
        return
    unit = QUANTITIES[kind].symbol
    shown = _short(text) if text is not None else format_si(number, unit)
    if magnitude > largest:
        raise UnitError(f"{shown} is beyond the largest {kind} ampcheck accepts"
                        f" ({format_si(largest, unit)})")
    raise UnitError(f"{shown} is below the smallest non-zero {kind} ampcheck accepts"
                    f" ({format_si(smallest, unit)})")


def _short(value: object) -> str:
    """A value as the user wrote it (text quoted), cut short when it is very long."""
    text = str(value)
    if len(text) > 24:
        text = f"{text[:12]}...{text[-6:]} ({len(text)} characters)"
    return repr(text) if isinstance(value, str) else text


MAX_VALUE_TEXT = 64  # characters: longer text is no value, and is not echoed whole


def _parse_text(text: str, quantity: Quantity, kind: str) -> float:
    if len(text) > MAX_VALUE_TEXT:
        raise UnitError(f"{_short(text)} is too long to be {_a(kind)} value")
    rkm = _RKM.match(text)
    if rkm and quantity.allow_prefix:
        sign, whole, letter, fraction, rest = rkm.groups()
        mantissa = float(f"{whole or '0'}.{fraction}")
        factor = _RKM_FACTORS[letter]
        if letter in "Rr" and quantity is not OHM:
            raise UnitError(f"{text!r}: the RKM letter R marks ohms, not {_a(kind)}")
        if rest and rest not in quantity.spellings:
            # The RKM letter is the prefix: only a unit may follow (not 4k7k or 4n7nF).
            message = _wrong_unit(text, rest, quantity, kind)
            if " is a " not in message:
                message = (f"{text!r}: in an RKM code the letter {letter!r} is the prefix,"
                           f" so only a unit may follow, not {rest!r}")
            raise UnitError(message)
        return (-1.0 if sign == "-" else 1.0) * mantissa * factor
    plain = _PLAIN.match(text)
    if plain:
        mantissa, rest = float(plain.group(1)), plain.group(2)
        if quantity is GAIN and rest == "dB":
            return 10 ** (mantissa / 20)
        return mantissa * _suffix_factor(text, rest, quantity, kind)
    raise UnitError(f"{text!r} is not {_a(kind)} value (expected e.g. {_example(kind)})")


def _percent_hint(number: float, shown: str, quote: str) -> str:
    """The message for a tolerance without its sign. A number below 1 is most likely a
    fraction (0.01 is 1 %), so the hint gives that percentage and says what the number
    with a sign would be; 1 and above are most likely percentages already. ``quote`` is
    '"' for a JSON number (the fixed value must be a string there)."""
    if 0 < abs(number) < 1:
        percent = f"{number * 100:.6g}"
        return (f"a tolerance needs a percent sign: write {quote}{percent}%{quote} for a"
                f" fraction of {shown} ({quote}{shown}%{quote} is {number / 100:g})")
    return f"a tolerance needs a percent sign: write {quote}{shown}%{quote}"


def _suffix_factor(text: str, rest: str, quantity: Quantity, kind: str) -> float:
    """Factor for what follows the number: an optional prefix, then the unit."""
    if quantity is FRACTION and rest == "":
        raise UnitError(_percent_hint(float(text), text, quote=""))
    if rest == "":
        return 1.0
    if quantity is FRACTION:
        if rest == "%":
            return 0.01
        if rest == "ppm":
            return 1e-6
        raise UnitError(f"{text!r}: a tolerance is written as a percentage, e.g. 1%")
    if quantity is SLEW:
        for time_unit, factor in _TIME_PREFIXES.items():
            for volt_prefix, vfactor in PREFIXES.items():
                if rest == f"{volt_prefix}V/{time_unit}":
                    return vfactor / factor
    if rest in quantity.spellings:
        return 1.0
    if quantity.allow_prefix:
        return _unit_factor(text, rest, quantity, kind)
    raise UnitError(_wrong_unit(text, rest, quantity, kind))


def _unit_factor(text: str, rest: str, quantity: Quantity, kind: str) -> float:
    """Split ``rest`` into an SI prefix and one of the quantity's spellings."""
    if rest == "":
        return 1.0
    if rest in PREFIXES and quantity.allow_prefix:
        return PREFIXES[rest]
    for prefix, factor in PREFIXES.items():
        if prefix and rest.startswith(prefix) and rest[len(prefix):] in quantity.spellings:
            return factor
    if rest in quantity.spellings:
        return 1.0
    raise UnitError(_wrong_unit(text, rest, quantity, kind))


def _wrong_unit(text: str, rest: str, quantity: Quantity, kind: str) -> str:
    for other_kind, other in QUANTITIES.items():
        if other is not quantity and any(rest.endswith(s) for s in other.spellings if s):
            return (f"{text!r} is {_a(other_kind)}, but this place takes {_a(kind)}"
                    f" (e.g. {_example(kind)})")
    return f"{text!r}: unknown unit or prefix {rest!r} for {_a(kind)} (e.g. {_example(kind)})"


_EXAMPLES = {
    "resistance": "10k, 4k7, 2R2 or 10 kΩ",
    "capacitance": "100n, 4n7 or 10pF",
    "inductance": "10uH",
    "voltage": "5V or 3.3",
    "current": "10mA or 2nA",
    "frequency": "1kHz or 10M",
    "power": "0.25W or 250mW",
    "slew-rate": "0.5V/us",
    "voltage-noise": "10nV/rtHz",
    "current-noise": "1pA/rtHz",
    "angle": "45 or 45deg",
    "ratio": "10",
    "percentage": "1%",
    "gain": "-10 or 100dB",
    "temperature": "300K",
}


def _a(kind: str) -> str:
    """The kind with its indefinite article: 'an angle', 'a voltage'."""
    return f"{'an' if kind[0] in 'aeiou' else 'a'} {kind}"


def _example(kind: str) -> str:
    return _EXAMPLES.get(kind, "a number")


_FORMAT_PREFIXES = [
    (1e15, "P"), (1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""),
    (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"),
]


def format_gain(value: float, digits: int = 4) -> str:
    """A dimensionless gain or ratio as a plain number, never an exponent from 1e-4 to
    1e12: -9.8031 -> '-9.803', -18412.7 -> '-18410' (``digits`` significant)."""
    magnitude = abs(value)
    if not math.isfinite(value) or magnitude == 0 or magnitude >= 1e12 or magnitude < 1e-4:
        return f"{value:.{digits}g}"
    if magnitude >= 10 ** digits:  # more integer digits than asked: round, print whole
        return f"{float(f'{value:.{max(digits - 1, 0)}e}'):.0f}"
    return f"{value:.{digits}g}"


def format_si(value: float | None, unit: str = "", digits: int = 3) -> str:
    """Format an SI float in engineering notation: 4700 -> '4.7 kΩ' (unit 'Ω')."""
    if value is None:
        return "n/a"
    if not math.isfinite(value):
        return f"{value} {unit}".strip()
    if unit in ("", "%", "°", "dB", "V/V"):
        if unit == "%":
            return f"{value * 100:.{digits}g} %"
        if unit in ("", "V/V"):
            return f"{format_gain(value, digits)}{' ' + unit if unit else ''}"
        return f"{value:.{digits}g} {unit}"
    magnitude = abs(value)
    if magnitude == 0:
        return f"0 {unit}"
    if magnitude >= 999.5e15 or magnitude < 0.9995e-15:  # beyond the prefixes: plain exponent
        return f"{value:.{digits}g} {unit}"
    for factor, prefix in _FORMAT_PREFIXES:  # noqa: B007 (read after the loop)
        if magnitude >= factor * 0.9995:
            break
    scaled = value / factor
    text = f"{scaled:.{digits}g}"
    if "e" in text:  # rounding pushed it over 1000: use the next prefix up
        text = f"{scaled:.0f}"
    return f"{text} {prefix}{unit}"
