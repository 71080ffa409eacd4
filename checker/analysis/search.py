"""Fix searches that find what exists: every preferred value over a bracketing range
predicted from one solve, the promising ones confirmed exactly.

A margin need not rise with a component's value: a feedback capacitor lifts the margin
until its own pole with the feedback resistor falls inside the loop's band, and an
isolation resistor that lifts a capacitive load's margin raises the crossover into a
resistive load. So no search here assumes a monotonic response: every candidate on the
ladder is predicted at once on the grid (a two-terminal element is a rank-one change:
updates.loop_gain_candidates), the smallest whose prediction reaches the target is
confirmed with margins refined at the crossover (updates.margins_with_admittances,
exact to rounding), walking on through the predicted passes if the prediction was off;
where none reaches the target, the best predicted values are confirmed and the best
one is returned with its margin.
"""

from __future__ import annotations

from checker.record import record

import numpy as np

from checker.analysis.loop import grid_phase_margins
from checker.analysis.updates import loop_gain_candidates, margins_with_admittances

CONFIRMATIONS = 6  # exact margins solved at most per search


@record(frozen=True)
class Found:
    value: float  # the chosen candidate (SI)
    margin_deg: float  # its confirmed phase margin
    reaches: bool  # True: the smallest value that reaches the target; False: the best


def element_search(figures, ref: str, net_a: str, net_b: str, values: list[float],
                   admittance, target_deg: float) -> Found | None:
    """Op-amp ``ref``'s phase margin with ``admittance(value, s)`` added between two nets,
    for each of ascending ``values``: the smallest that reaches ``target_deg``, else the
    best; None when no candidate closes the loop."""
    if not values:
        return None
    frequencies = figures.frequencies_hz
    s = 2j * np.pi * frequencies
    added = np.stack([admittance(value, s) for value in values])  # (V, F)
    predicted = grid_phase_margins(frequencies, loop_gain_candidates(
        figures, ref, net_a, net_b, added))
    confirmed: dict[int, float] = {}

    def exact(i: int) -> float:
        if i not in confirmed:
            margins = margins_with_admittances(
                figures, ref, lambda f, i=i: [(net_a, net_b, admittance(values[i],
                                                                        2j * np.pi * f))])
            confirmed[i] = margins.phase_margin_deg if margins.phase_margin_deg is not None \
                else -np.inf
        return confirmed[i]

    passing = [i for i in np.nonzero(predicted >= target_deg)[0]]
    for i in passing[:CONFIRMATIONS]:
        if exact(int(i)) >= target_deg:
            # the smallest confirmed: a smaller value predicted to fail may still pass
            j = int(i) - 1
            while j >= 0 and len(confirmed) < 2 * CONFIRMATIONS and exact(j) >= target_deg:
                j -= 1
            chosen = j + 1
            return Found(values[chosen], float(exact(chosen)), True)
    order = np.argsort(-np.nan_to_num(predicted, nan=-np.inf))
    best = None
    for i in order[:CONFIRMATIONS - min(len(passing), CONFIRMATIONS) + 2]:
        margin = exact(int(i))
        if np.isfinite(margin) and (best is None or margin > best[1]):
            best = (int(i), margin)
    if best is None:
        return None
    return Found(values[best[0]], float(best[1]), best[1] >= target_deg)


def capacitor(value: float, s: np.ndarray) -> np.ndarray:
    """The admittance sC of a capacitor."""
    return s * value


def conductance_change(present_ohm: float):
    """admittance(value, s) for a resistor now at ``present_ohm`` changed to ``value``."""
    def admittance(value: float, s: np.ndarray) -> np.ndarray:
        return np.full(s.shape, 1 / value - 1 / present_ohm, dtype=complex)
    return admittance
