"""One way to compare a solved figure with a limit.

A figure that the solver computes lands on its limit only up to rounding: an inverting
stage of 1 kΩ and 4 kΩ has a noise gain of 5 on paper and 4.999999999999999 solved. A
bare ``<`` would fail that stage at its own limit. Every threshold comparison in the
rules goes through these helpers instead: a figure counts as beyond its limit only when
it is beyond by more than ``RELATIVE_TOLERANCE`` of the larger magnitude of the two
(far below any engineering tolerance, far above the solver's rounding, which is about
1e-13 relative on these small systems).
"""

from __future__ import annotations

import math

RELATIVE_TOLERANCE = 1e-9


def _slack(measured: float, limit: float) -> float:
    return RELATIVE_TOLERANCE * max(abs(measured), abs(limit))


def below(measured: float, minimum: float) -> bool:
    """True when ``measured`` falls short of ``minimum`` by more than rounding."""
    if math.isnan(measured) or math.isnan(minimum):
        return False
    if math.isinf(measured) or math.isinf(minimum):
        return measured < minimum
    return measured < minimum - _slack(measured, minimum)


def above(measured: float, maximum: float) -> bool:
    """True when ``measured`` exceeds ``maximum`` by more than rounding."""
    if math.isnan(measured) or math.isnan(maximum):
        return False
    if math.isinf(measured) or math.isinf(maximum):
        return measured > maximum
    return measured > maximum + _slack(measured, maximum)


def reaches(measured: float, minimum: float) -> bool:
    """``measured`` meets a minimum (it is not below it beyond rounding)."""
    return not below(measured, minimum)


def within(measured: float, maximum: float) -> bool:
    """``measured`` meets a maximum (it is not above it beyond rounding)."""
    return not above(measured, maximum)
