"""The stage's natural frequencies: the closed-loop poles of the whole stage.

The nodal equations Y(s) x = 0 with every independent source zeroed (voltage sources
shorted, current sources open, rails at AC ground) have non-trivial solutions only at
the stage's natural frequencies. Y(s) = G + sC + sum_k A_k(s) E_k is not a pencil while
A_k(s) = A0 / ((1 + s/w1)(1 + s/w2)) is rational, so each op-amp's poles become states:

    x_k (1 + s/w1) = A0 (v+ - v-)          (a new unknown per op-amp with a first pole)
    v_int (1 + s/w2) = x_k                  (its gain-block row, second pole on v_int)

which makes the system (G' + s C') x = 0, linear in s (the standard state augmentation
of a rational controlled source; e.g. J. Vlach and K. Singhal, Computer Methods for
Circuit Analysis and Design, 2nd ed., chapter on poles and zeros). Its finite generalised
eigenvalues are the poles: with G' regular (the DC system, solvable as drawn), the
eigenvalues mu of -G'^-1 C' are 1/s, and mu = 0 belongs to the infinite eigenvalues
of the algebraic constraints. Shapes: G', C' are (N, N) real, N = the reduced
unknowns plus one per op-amp with a GBW.
"""

from __future__ import annotations

import math
from checker.record import record

import numpy as np

from checker.analysis.mna import without_rails

# Poles faster than this are beyond anything a stage of discrete parts does (and beyond
# the analysis grid's top by decades); below it mu is far above rounding (about 1e-15
# of the largest mu).
FASTEST_POLE_HZ = 1e12
RIGHT_HALF_TOLERANCE = 1e-9  # Re(s) > this x |s| counts as the right half-plane


@record(frozen=True)
class Pair:
    """A complex-conjugate pole pair s = -zeta wn +/- j wn sqrt(1 - zeta^2)."""

    frequency_hz: float  # natural frequency wn / 2 pi
    damping: float  # zeta (negative: growing)
    ringing_hz: float  # the damped frequency |Im s| / 2 pi

    @property
    def q(self) -> float:
        """Q = 1 / (2 zeta)."""
        return math.inf if self.damping <= 0 else 1 / (2 * self.damping)

    @property
    def overshoot(self) -> float | None:
        """Step overshoot of the standard second-order system, exp(-pi zeta /
        sqrt(1 - zeta^2)) for 0 <= zeta < 1 (K. Ogata, Modern Control Engineering,
        transient-response chapter); None where it does not ring."""
        if not 0 <= self.damping < 1:
            return None
        return math.exp(-math.pi * self.damping / math.sqrt(1 - self.damping ** 2))

    @property
    def peaking_db(self) -> float | None:
        """Resonant peak of the same system, 1 / (2 zeta sqrt(1 - zeta^2)) for
        zeta < 1/sqrt 2, in dB (same source); 0 where it does not peak."""
        if self.damping <= 0:
            return None
        if self.damping >= 1 / math.sqrt(2):
            return 0.0
        return 20 * math.log10(1 / (2 * self.damping * math.sqrt(1 - self.damping ** 2)))


@record(frozen=True)
class StagePoles:
    poles: np.ndarray  # complex, rad/s, (P,): every finite natural frequency
    right_half: np.ndarray  # those with Re(s) > 0 (growing), (R,)

    @property
    def stable(self) -> bool:
        return self.right_half.size == 0

    @property
    def dominant_pair(self) -> Pair | None:
        """The complex pair closest to the imaginary axis relative to its frequency (the
        least damped): it sets the ringing and the peaking."""
        complex_poles = self.poles[self.poles.imag > 1e-9 * np.abs(self.poles)]
        if not complex_poles.size:
            return None
        damping = -complex_poles.real / np.abs(complex_poles)
        pole = complex_poles[int(np.argmin(damping))]
        wn = abs(pole)
        return Pair(frequency_hz=wn / (2 * math.pi), damping=float(-pole.real / wn),
                    ringing_hz=abs(pole.imag) / (2 * math.pi))

    def oscillation_hz(self) -> float | None:
        """The frequency of the fastest-growing right-half-plane pole (0 for a real one,
        which runs away rather than rings); None when stable."""
        if self.stable:
            return None
        pole = self.right_half[int(np.argmax(self.right_half.real))]
        return abs(pole.imag) / (2 * math.pi)


def pencil(figures) -> tuple[np.ndarray, np.ndarray]:
    """(G', C') of the stage with the op-amp poles as states (module docstring)."""
    circuit = figures.circuit
    matrices, keep, _dropped = without_rails(figures.ac_matrices, circuit)
    n = matrices.G.shape[0]
    position = {old: new for new, old in enumerate(keep)}
    blocks = circuit.gain_blocks
    states = [k for k, block in enumerate(blocks) if block.pole1_hz]
    size = n + len(states)
    G = np.zeros((size, size))
    C = np.zeros((size, size))
    G[:n, :n] = matrices.G
    C[:n, :n] = matrices.C
    next_state = n
    for k, block in enumerate(blocks):
        row = matrices.control_rows[k]
        pos, neg = matrices.control_pos[k], matrices.control_neg[k]
        if not block.pole1_hz:  # a flat gain: the gain-block row as in the AC system
            if pos >= 0:
                G[row, pos] -= block.open_loop_gain
            if neg >= 0:
                G[row, neg] += block.open_loop_gain
            continue
        state = next_state
        next_state += 1
        G[state, state] = 1.0
        C[state, state] = 1.0 / (2 * math.pi * block.pole1_hz)
        if pos >= 0:
            G[state, pos] -= block.open_loop_gain
        if neg >= 0:
            G[state, neg] += block.open_loop_gain
        G[row, state] -= 1.0
        if block.pole2_hz and (block.out_int - 1) in position:
            C[row, position[block.out_int - 1]] += 1.0 / (2 * math.pi * block.pole2_hz)
    return G, C


def stage_poles(figures) -> StagePoles:
    """The stage's finite natural frequencies (rad/s), once per stage."""
    return figures.cached("poles", lambda: _solve(figures))


def _solve(figures) -> StagePoles:
    G, C = pencil(figures)
    try:
        mu = np.linalg.eigvals(-np.linalg.solve(G, C))
    except np.linalg.LinAlgError:
        return StagePoles(np.zeros(0, dtype=complex), np.zeros(0, dtype=complex))
    slowest = 1.0 / (2 * math.pi * FASTEST_POLE_HZ)
    finite = mu[np.abs(mu) > slowest]
    poles = 1.0 / finite
    right = poles[poles.real > RIGHT_HALF_TOLERANCE * np.abs(poles)]
    order = np.argsort(np.abs(poles))
    return StagePoles(poles[order], right)
