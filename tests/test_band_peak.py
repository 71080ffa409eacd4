"""The largest in-band value of a response, found between grid points (grid.band_peak).

The responses here are written down, not solved: the second-order band-pass
H(f) = 1 / (1 + jQ(f/f0 - f0/f)), whose magnitude peaks at exactly 1 at f0 and is
1/sqrt(2) at f0 (1 +- 1/(2Q)) for a large Q (the standard second-order band-pass:
common practice).
"""

from __future__ import annotations

import numpy as np
import pytest

from checker.analysis.grid import band_peak

F0 = 1591.5  # Hz, between the points of the grid below


def band_pass(q: float):
    def value_at(frequencies: np.ndarray) -> np.ndarray:
        x = np.asarray(frequencies) / F0
        return 1.0 / (1.0 + 1j * q * (x - 1.0 / x))
    return value_at


def peak_of(q: float, calls: list | None = None) -> tuple[float, float]:
    grid = np.geomspace(1.0, 1e6, 61)  # 10 points per decade, as coarse as a wide grid
    value_at = band_pass(q)

    def counted(frequencies):
        if calls is not None:
            calls.append(frequencies.size)
        return value_at(frequencies)

    band = (grid >= 100.0) & (grid <= 10e3)
    merged_f, merged_v, at = band_peak(grid, value_at(grid), band, counted)
    return float(abs(merged_v[at])), float(merged_f[at])


@pytest.mark.parametrize("q", [5.0, 50.0, 500.0, 5000.0])
def test_a_peak_is_found_however_narrow(q):
    # the peak is 1 at F0; at Q 500 it is 0.2 % wide, at Q 5000 0.02 %, far narrower
    # than the grid's 26 % spacing and than a two-level search's finest points
    value, where = peak_of(q)
    assert value == pytest.approx(1.0, abs=1e-4)
    assert where == pytest.approx(F0, rel=0.1 / q)


def test_a_broad_peak_stops_after_two_levels():
    # a peak of Q 5 is settled by the second level: no third solve is spent on it
    calls: list = []
    peak_of(5.0, calls)
    assert len(calls) == 2


def test_a_narrow_peak_is_followed_down_level_by_level():
    calls: list = []
    peak_of(5000.0, calls)
    assert 3 <= len(calls) <= 8
