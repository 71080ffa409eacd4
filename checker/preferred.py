"""Preferred numbers (IEC 60063): the E12, E24 and E96 series and snapping to them."""

from __future__ import annotations

import bisect
import math
from functools import lru_cache

# IEC 60063 lists E12 and E24 explicitly; they depart from round(10^(i/n), 1) at several
# values (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2), so they are written out.
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
# E96 follows round(10^(i/96), 2) exactly (IEC 60063).
E96 = tuple(round(10 ** (i / 96), 2) for i in range(96))

SERIES = {"E12": E12, "E24": E24, "E96": E96}


def series_for_tolerance(tolerance: float | None) -> str:
    """The series a part's tolerance implies: E96 for 1 % or better, E24 for up to 5 %,
    E12 above (common practice)."""
    if tolerance is None:
        return "E24"
    if tolerance <= 0.01 + 1e-12:
        return "E96"
    if tolerance <= 0.05 + 1e-12:
        return "E24"
    return "E12"


def _candidates(value: float, series: str) -> list[float]:
    """The members of ``series`` around ``value``: the two neighbours in its decade and
    the nearest ones across the decade boundaries (a handful, found by bisection)."""
    decade = math.floor(math.log10(value))
    mantissas = SERIES[series]
    scale = 10.0 ** decade
    i = bisect.bisect_left(mantissas, value / scale)
    values = [m * scale for m in mantissas[max(i - 1, 0):i + 1]]
    values.append(mantissas[-1] * scale / 10)  # the last member of the decade below
    values.append(mantissas[0] * scale * 10)  # the first member of the decade above
    values.append(mantissas[0] * scale)
    values.append(mantissas[-1] * scale)
    return values


def _clean(value: float) -> float:
    return float(f"{value:.6g}")


@lru_cache(maxsize=8192)
def nearest(value: float, series: str = "E24") -> float:
    """The member of ``series`` nearest to ``value`` on a log scale."""
    return _clean(min(_candidates(value, series), key=lambda v: abs(math.log(v / value))))


@lru_cache(maxsize=8192)
def at_least(value: float, series: str = "E12") -> float:
    """The smallest member of ``series`` that is not below ``value``."""
    return _clean(min(v for v in _candidates(value, series) if v >= value * (1 - 1e-9)))


def ladder(start: float, stop: float, series: str = "E12") -> list[float]:
    """Members of ``series`` from ``start`` up to ``stop`` inclusive, ascending."""
    values: list[float] = []
    start = max(start, 1e-15)  # a preferred value is positive
    if stop < start:
        return values
    decade = math.floor(math.log10(start))
    while 10.0 ** decade <= stop * 10:
        for m in SERIES[series]:
            v = _clean(m * 10.0 ** decade)
            if start * (1 - 1e-9) <= v <= stop * (1 + 1e-9):
                values.append(v)
        decade += 1
    return values


def smallest_passing(values: list[float], passes, start: int | None = None) -> float | None:
    """The smallest of ascending ``values`` for which ``passes(value)`` is true; None if
    none does. Assumes once a value passes, every larger one does.

    Without ``start``: bisection over the whole list. With ``start`` (the index of an
    estimate): an exponential search outward from it brackets the answer, then
    bisection inside the bracket, so a good estimate costs two or three calls instead
    of log2(len) + 1 (J. L. Bentley and A. C. Yao, "An almost optimal algorithm for
    unbounded searching", 1976). Both give the same answer."""
    if not values:
        return None
    if start is None:
        if not passes(values[-1]):
            return None
        low, high = -1, len(values) - 1
    else:
        bracket = _bracket(values, passes, min(max(start, 0), len(values) - 1))
        if bracket is None:
            return None
        low, high = bracket
    # invariant: values[high] passes; values[low] fails (or low is -1, before the list)
    while high - low > 1:
        middle = (low + high) // 2
        if passes(values[middle]):
            high = middle
        else:
            low = middle
    return values[high]


def _bracket(values: list[float], passes, i: int) -> tuple[int, int] | None:
    """(failing index or -1, passing index) around the answer, by doubling steps from
    index ``i``; None when even the last value fails."""
    step = 1
    if passes(values[i]):
        high = i
        while high - step >= 0:
            if not passes(values[high - step]):
                return high - step, high
            high -= step
            step *= 2
        return -1, high
    low = i
    while low + step < len(values):
        if passes(values[low + step]):
            return low, low + step
        low += step
        step *= 2
    if low == len(values) - 1 or not passes(values[-1]):
        return None
    return low, len(values) - 1
