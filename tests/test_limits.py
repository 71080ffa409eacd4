"""The one comparison of a figure with a limit (checker/limits.py)."""

import math

from checker.limits import RELATIVE_TOLERANCE, above, below, reaches, within


def test_a_figure_on_its_limit_up_to_rounding_meets_it():
    # 1 + 4k/1k solved in floating point: one unit in the last place under 5
    assert reaches(4.999999999999999, 5.0)
    assert within(5.000000000000001, 5.0)


def test_just_beyond_the_relative_tolerance_fails_either_way():
    step = 10 * RELATIVE_TOLERANCE
    assert below(5.0 * (1 - step), 5.0)
    assert not below(5.0 * (1 + step), 5.0)
    assert above(5.0 * (1 + step), 5.0)
    assert not above(5.0 * (1 - step), 5.0)


def test_negative_limits_scale_with_their_magnitude():
    assert reaches(-10.0 * (1 + RELATIVE_TOLERANCE / 10), -10.0)
    assert below(-10.0 * (1 + 10 * RELATIVE_TOLERANCE), -10.0)


def test_infinite_and_missing_figures():
    assert not below(math.inf, 5.0)
    assert below(-math.inf, 5.0)
    assert above(math.inf, 5.0)
    assert not below(math.nan, 5.0) and not above(math.nan, 5.0)
