"""A net's DC range with the op-amp's clip limits applied.

Expected values are the project's own arithmetic on made-up ranges: an output cannot
leave the band between its clip limits, so a range wholly beyond one limit sits at it.
"""

from __future__ import annotations

from checker.analysis.figures import NodeRange


def test_range_inside_the_limits_is_kept():
    node = NodeRange("out", -1.0, 2.0, 0.5, clip_low=-4.0, clip_high=4.0)
    assert (node.clipped_low, node.clipped_high) == (-1.5, 2.5)


def test_range_across_a_limit_is_cut_there():
    node = NodeRange("out", -1.0, 6.0, 0.0, clip_low=0.05, clip_high=4.95)
    assert (node.clipped_low, node.clipped_high) == (0.05, 4.95)


def test_range_wholly_below_the_lower_limit_sits_at_it():
    # e.g. a floating input charged towards the negative rail on a single supply
    node = NodeRange("out", -20.0, -9.0, 0.04, clip_low=0.05, clip_high=4.95)
    assert (node.clipped_low, node.clipped_high) == (0.05, 0.05)


def test_range_wholly_above_the_upper_limit_sits_at_it():
    node = NodeRange("out", 7.0, 9.0, 0.0, clip_low=0.05, clip_high=4.95)
    assert (node.clipped_low, node.clipped_high) == (4.95, 4.95)


def test_a_net_without_limits_is_not_clipped():
    node = NodeRange("mid", -20.0, 20.0, 1.0)
    assert (node.clipped_low, node.clipped_high) == (-21.0, 21.0)
