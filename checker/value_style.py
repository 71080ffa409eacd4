"""A value written the way a file already writes its values.

A fix that sets R2 to 44.2 kΩ is written ``44k2`` in a file that uses RKM codes
(IEC 60062: the prefix letter stands for the decimal point), ``44.2k`` in one that uses
engineering notation, ``44.2kOhm`` where the file spells the unit, and as a plain number
in JSON where the file writes plain numbers. The style is read from one example text.
"""

from __future__ import annotations

import math
import re
from checker.record import record

_FORMAT_PREFIXES = ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""),
                    (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"))
_UNITS = ("Ohms", "ohms", "Ohm", "ohm", "Ω", "F", "H", "W", "V")
_RKM = re.compile(r"^[+-]?\d*[RrfpnuµμmkKMGT]\d+")
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)(e[+-]?\d+)?", re.IGNORECASE)


@record(frozen=True)
class Style:
    rkm: bool = False
    unit: str = ""  # the unit symbol the file writes after the prefix, if any
    space: str = ""  # between the number and the prefix or unit
    micro: str = "u"
    number: bool = False  # a plain JSON number, not a string

    @classmethod
    def of(cls, example, same_kind: bool = True) -> Style:
        """The style of ``example`` (a text or a JSON number); the unit is kept only
        when ``same_kind`` (a capacitor does not take a resistor's ohms)."""
        if isinstance(example, (int, float)) and not isinstance(example, bool):
            return cls(number=True)
        if not isinstance(example, str):
            return cls()
        text = example.strip()
        unit = next((u for u in _UNITS if text.endswith(u) and u != text), "")
        if unit == "V" and not same_kind:
            unit = ""
        number = _NUMBER.match(text)
        rest = text[number.end():] if number else ""
        return cls(rkm=bool(_RKM.match(text)) and "." not in text,
                   unit=unit if same_kind else "",
                   space=" " if rest.startswith(" ") else "",
                   micro="µ" if ("µ" in text or "μ" in text) else "u")


def format_value(value: float, style: Style, ohms: bool = False, unit: str = "") -> object:
    """``value`` (SI) as ``style`` writes it: ``unit`` is the one to write when the
    style spells units; ``ohms`` allows the RKM letter R (2R2)."""
    if style.number:
        return int(value) if float(value).is_integer() else float(f"{value:.6g}")
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    magnitude = abs(value)
    factor, prefix = next(((f, p) for f, p in _FORMAT_PREFIXES if magnitude >= f * 0.9995),
                          _FORMAT_PREFIXES[-1])
    if prefix == "u":
        prefix = style.micro
    mantissa = f"{value / factor:.4g}"
    if "e" in mantissa:
        mantissa = f"{value / factor:.0f}"
    written_unit = (style.unit or unit) if style.unit else ""
    if style.rkm and "." in mantissa:
        letter = prefix or ("R" if ohms else "")
        if letter:
            whole, fraction = mantissa.split(".")
            return f"{whole}{letter}{fraction}{written_unit if prefix else ''}"
    return f"{mantissa}{style.space}{prefix}{written_unit}"


def format_fraction(fraction: float) -> str:
    """A tolerance as the format writes it: 0.005 -> '0.5%'."""
    return f"{fraction * 100:.4g}%"
