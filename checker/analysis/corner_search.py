"""A first-order choice of the worst corner of a tolerance box, verified by single flips.

For ``k`` resistors each within R(1 +- t) the figure's extremes over the box are sought
without the 2^k corners:

1. *Sensitivities at nominal*, by central differences across the whole tolerance band:
   D_r = F(R_r (1 + t_r)) - F(R_r (1 - t_r)), the others nominal (2k samples, one
   batch). The signs of D choose the candidate corner in each direction: every resistor
   at the end of its tolerance that moves the figure that way.
2. *Verification at the corner*: the k corners one flip away are solved (one batch of
   k + 1). If none moves the figure further, every sensitivity's sign agrees at the
   corner too: it is a vertex of the box where no single resistor's flip improves (a
   local worst of the box's corners), and it is marked ``verified``. Otherwise the
   resistors whose flip improves are flipped together (or, when that came out worse,
   the best vertex seen so far is taken) and the check repeats, at most ``MAX_ROUNDS``
   times; a vertex still moving then is reported as the worst seen, not verified.

When it is exact: a network function is a bilinear function of any one element,
F = (A + B R)/(C + D R) (the bilinear theorem; J. Vlach, K. Singhal, Computer Methods
for Circuit Analysis and Design, 2nd ed., the chapter on symbolic analysis, from
memory), so at 0 Hz a real F is monotonic in each single resistor over any interval
free of its pole (its derivative (BC - AD)/(C + DR)^2 keeps one sign). If, moreover,
each partial derivative keeps one sign over the whole box (whatever the other
resistors), the corner the signs choose is the box's true extreme, since moving any
point towards it one coordinate at a time never loses. That holds when each
sensitivity is large against the product terms across the band (the usual case of a
ratio of resistors within a few per cent): common practice.

Where first order is not exact enough: a figure that depends on a resistor
non-monotonically, or whose sensitivity to one resistor is near zero and changes sign
across the box as the others move (a balanced bridge's common-mode gain at its null, a
magnitude |F| at a frequency where F is complex, since a bilinear map takes the real
line to a circle and |F| along an arc can turn back). The verification then catches a
corner that one flip improves, but a vertex that no single flip improves can still
fall short of the box's worst (a local, not a global, worst): only enumeration is
exhaustive, and the report says which was done.
"""

from __future__ import annotations

from collections.abc import Callable
from checker.record import record

import numpy as np

MAX_ROUNDS = 8  # flip-and-check rounds before a corner is reported as not verified
RELATIVE = 1e-10  # a flip must move the objective by more than this share to count

Values = dict[str, np.ndarray]


@record(frozen=True)
class Corner:
    signs: np.ndarray  # each resistor's end: +1 high, -1 low
    objective: float  # the (maximised) objective there
    verified: bool  # no single resistor's flip improves it
    rounds: int  # verification rounds used


def corner_samples(refs: list[str], nominal: dict[str, float], tolerance: dict[str, float],
                   signs: np.ndarray) -> Values:
    """Resistor values of the corners ``signs`` (S, k) of +-1."""
    signs = np.atleast_2d(signs)
    return {ref: nominal[ref] * (1 + signs[:, i] * tolerance[ref]) for i, ref in enumerate(refs)}


def central_differences(quantity: Callable[[Values], np.ndarray], refs: list[str],
                        nominal: dict[str, float], tolerance: dict[str, float]) -> np.ndarray:
    """D_r = Q(r high) - Q(r low), every other resistor nominal: (k,) in Q's type, from
    one batch of 2k samples."""
    k = len(refs)
    steps = np.zeros((2 * k, k))
    steps[2 * np.arange(k), np.arange(k)] = 1.0
    steps[2 * np.arange(k) + 1, np.arange(k)] = -1.0
    q = quantity(corner_samples(refs, nominal, tolerance, steps))
    return q[0::2] - q[1::2]


def start_signs(differences: np.ndarray) -> np.ndarray:
    """The corner a direction's sensitivities choose (+1 where D >= 0)."""
    return np.where(np.asarray(differences) < 0, -1.0, 1.0)


def climb(objective: Callable[[Values], np.ndarray], refs: list[str],
          nominal: dict[str, float], tolerance: dict[str, float], start: np.ndarray,
          max_rounds: int = MAX_ROUNDS) -> Corner:
    """From the corner ``start``, flip resistors while a single flip raises
    ``objective`` (to be maximised), each round one batch of the corner and its k
    neighbours; the best corner seen, verified when no neighbour of it improves."""
    k = len(refs)
    current = np.array(start, dtype=float)
    best, best_value = current.copy(), -np.inf
    for rounds in range(1, max_rounds + 1):
        batch = np.repeat(current[None], k + 1, axis=0)
        batch[1 + np.arange(k), np.arange(k)] *= -1
        f = np.asarray(objective(corner_samples(refs, nominal, tolerance, batch)), dtype=float)
        margin = RELATIVE * max(abs(float(f[0])), 1e-300)
        improving = f[1:] > f[0] + margin
        if f[0] >= best_value - margin and not improving.any():
            return Corner(current, float(f[0]), True, rounds)
        previous_best = best_value
        at = int(np.argmax(f))
        if f[at] > best_value:
            best, best_value = batch[at].copy(), float(f[at])
        if f[0] + margin < previous_best or not improving.any():
            current = best.copy()  # the joint flip lost: go on from the best seen
        else:
            current = current.copy()
            current[improving] *= -1
    return Corner(best, best_value, False, max_rounds)
