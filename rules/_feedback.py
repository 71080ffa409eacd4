"""Shared by the swapped-inputs and open-loop rules: when a regenerative loop is a wiring
mistake rather than a comparator with hysteresis.

Not a rule module (the leading underscore keeps the loader away from it).
"""

from __future__ import annotations

import numpy as np

from checker.analysis.grid import band_points

# Requirements only a closed loop can meet: a stage that states one means to be linear.
CLOSED_LOOP_REQUIREMENTS = ("gain", "gain-tolerance", "bandwidth", "phase-margin", "cmrr")


def regenerative(figures, opamp) -> bool:
    """The loop of ``opamp`` is regenerative: positive feedback of loop gain 1 or more at
    DC, or, where nothing closes it at DC (an AC-coupled network), in a source's band,
    where T is at least 1 in magnitude and within 45 degrees of the positive-feedback
    phase (T is the negated return, so positive feedback is T near the negative real
    axis)."""
    loop = figures.loops[opamp.ref]
    if loop.regenerative_at_dc:
        return True
    if loop.feedback == "negative":
        return False
    frequencies = figures.frequencies_hz
    for source in figures.stage.sources:
        band = band_points(frequencies, source)
        if band is None:
            continue
        T = loop.loop_gain[band]
        if np.any((np.abs(T) >= 1.0) & (np.abs(np.angle(T)) >= np.radians(135.0))):
            return True
    return False


def looks_swapped(stage, figures, opamp) -> bool:
    """A regenerative loop on a stage that means to be linear: one that states a
    closed-loop requirement, or a follower whose output is wired straight to in+ (no
    comparator is drawn that way)."""
    if not regenerative(figures, opamp):
        return False
    if any(keyword in stage.require.stated() for keyword in CLOSED_LOOP_REQUIREMENTS):
        return True
    return opamp.out == opamp.in_pos
