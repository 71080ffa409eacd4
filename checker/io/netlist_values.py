"""Numbers in the trade's plain-text netlists, in that convention's own meaning.

The simulator-style netlist reads a number, then an optional scale factor, and ignores
any letters after either (SPICE3 user's manual, University of California, Berkeley,
section 2.1 "General structure and conventions"): ``T`` 1e12, ``G`` 1e9, ``MEG`` 1e6,
``K`` 1e3, ``MIL`` 25.4e-6, ``M`` 1e-3, ``U`` 1e-6, ``N`` 1e-9, ``P`` 1e-12, ``F`` 1e-15,
case-insensitive. So ``10``, ``10V`` and ``10Hz`` are all ten, ``1M`` and ``1MOhm`` are
one milli-unit, ``1MEG`` is a million and ``1F`` is a femto-unit.

This is not the stage format's convention (checker/units.py, where ``M`` is mega), and
netlist values never pass through that parser.
"""

from __future__ import annotations

import re

# Longest first, so MEG and MIL win over M.
SCALE_FACTORS: tuple[tuple[str, float], ...] = (
    ("meg", 1e6), ("mil", 25.4e-6),
    ("t", 1e12), ("g", 1e9), ("k", 1e3), ("m", 1e-3), ("u", 1e-6), ("n", 1e-9),
    ("p", 1e-12), ("f", 1e-15),
    # Not in the manual's list, but some exporters write the micro sign; read as u.
    ("\u00b5", 1e-6), ("\u03bc", 1e-6),
)
# The decimal exponent of each power-of-ten factor, so 4.7k reads as float("4.7e3")
# (exactly 4700.0) rather than 4.7 * 1000.0 (4700.000000000001).
_EXPONENTS = {"meg": 6, "t": 12, "g": 9, "k": 3, "m": -3, "u": -6, "n": -9, "p": -12,
              "f": -15, "\u00b5": -6, "\u03bc": -6}
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_LETTERS = re.compile(r"[A-Za-z\u00b5\u03bc]*")


class NetlistValueError(ValueError):
    """A netlist value that does not read as a number in the netlist convention."""


def parse_netlist_number(text: str) -> float:
    """The value of one netlist number field (``4.7k``, ``1meg``, ``10uF``, ``2.2e-9``)."""
    if text.startswith(("{", "'")) or text.endswith(("}", "'")):
        raise NetlistValueError(f"{text!r} is a parameter expression; ampcheck does not"
                                " evaluate them: write the value as a number")
    match = _NUMBER.match(text)
    if match is None:
        raise NetlistValueError(f"{text!r} is not a number (expected e.g. 10k, 4.7n, 1meg"
                                " or 2.2e-6)")
    rest = text[match.end():]
    letters_match = _LETTERS.match(rest)
    assert letters_match is not None  # the pattern ends in *, so it matches any text
    letters = letters_match.group()
    if letters != rest:
        tail = rest[len(letters):]
        hint = ""
        if tail[:1].isdigit() and letters:
            hint = (f"; the netlist convention has no codes like 4k7: write"
                    f" {match.group()}.{tail}{letters}")
        raise NetlistValueError(f"{text!r}: unexpected {tail!r} after the number{hint}")
    lowered = letters.lower()
    for prefix, factor in SCALE_FACTORS:
        if lowered.startswith(prefix):
            if prefix in _EXPONENTS and "e" not in match.group().lower():
                return float(f"{match.group()}e{_EXPONENTS[prefix]}")
            return float(match.group()) * factor
    return float(match.group())


def scale_word(text: str) -> str | None:
    """The scale factor a number field uses, as the convention spells it, or None."""
    match = _NUMBER.match(text)
    if match is None:
        return None
    lowered = text[match.end():].lower()
    for prefix, _factor in SCALE_FACTORS:
        if lowered.startswith(prefix):
            return prefix
    return None
