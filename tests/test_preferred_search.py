"""The fix searches' ladder search: the estimate-led search finds what bisection finds.

The expected answers are the project's own: a monotone predicate over a list has one
smallest passing member, whatever the search; the call counts are the bound of an
exponential search (Bentley and Yao, 1976) for an estimate that is right or one off.
"""

from __future__ import annotations

import random

import pytest

from checker.preferred import ladder, smallest_passing


def _counting(threshold):
    calls = []

    def passes(value):
        calls.append(value)
        return value >= threshold

    return passes, calls


@pytest.mark.parametrize("seed", range(5))
def test_search_from_any_start_matches_bisection(seed):
    rng = random.Random(seed)
    for _ in range(2000):
        values = sorted(rng.sample(range(1000), rng.randint(1, 80)))
        threshold = rng.choice(values + [1000])  # 1000: nothing passes
        passes, calls = _counting(threshold)
        expected = smallest_passing(values, passes)
        calls.clear()
        found = smallest_passing(values, passes, start=rng.randint(-3, len(values) + 3))
        assert found == expected
        assert len(calls) == len(set(calls)), "a value was tried twice"


def test_a_right_estimate_costs_two_calls():
    values = ladder(1.0, 10e3, "E24")
    answer = values.index(47.0)
    passes, calls = _counting(47.0)
    assert smallest_passing(values, passes, start=answer) == 47.0
    assert len(calls) == 2  # 47 passes, 43 fails


def test_an_estimate_one_step_low_costs_two_calls():
    values = ladder(1.0, 10e3, "E24")
    passes, calls = _counting(47.0)
    assert smallest_passing(values, passes, start=values.index(43.0)) == 47.0
    assert calls == [43.0, 47.0]


def test_nothing_passing_gives_none_with_or_without_an_estimate():
    values = ladder(1.0, 100.0, "E12")
    passes, _calls = _counting(1e9)
    assert smallest_passing(values, passes) is None
    assert smallest_passing(values, passes, start=3) is None
    assert smallest_passing([], passes, start=0) is None
