"""The unit a machine output (JSON, CSV, SARIF) names beside a value.

Those outputs carry the plain SI float, so a fraction (held inside with the display unit
"%", which the human reports show as 2.01 %) is named ``ratio`` there: 0.0201 beside
"%" would read as a hundredth of a percent. One mapping, shared by every machine writer.
"""

from __future__ import annotations

from checker.units import FRACTION

RATIO_UNIT = "ratio"
MACHINE_UNITS: dict[str, str] = {FRACTION.symbol: RATIO_UNIT}


def machine_unit(unit: str | None) -> str | None:
    """The unit as a machine output names it: "%" -> "ratio"; any other unchanged."""
    return None if unit is None else MACHINE_UNITS.get(unit, unit)
