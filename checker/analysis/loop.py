"""Loop gain by the return ratio, and the margins read from it.

The return ratio of op-amp k (H. W. Bode, Network Analysis and Feedback Amplifier
Design, 1945): replace its controlled source by an independent source of value 1,
zero the other independent sources, and take T = -A_k(s) * v_d, the negated signal the
source would have produced. Its margins: crossover where |T| = 1, phase margin
180 deg + arg T there, gain margin -20 log10 |T| where arg T = -180 deg.

T need not be solved on a separate matrix: the closed-loop system differs from the one
with op-amp k's source made independent by the rank-one term A_k u v^T (u the unit
vector of its branch row, v^T x = -(v_in+ - v_in-)). With z = v^T Y^-1 u from the
closed-loop solve, the Sherman-Morrison identity gives w = v^T Y_open^-1 u =
z / (1 - A_k z) and T = A_k w; w is the feedback factor beta, so 1/w is the noise gain.
"""

from __future__ import annotations

from checker.record import record

import numpy as np


def return_ratio(gain: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(T, beta) from A_k (F,) and the closed-loop response z (F,) (see module doc).
    Where 1 - A z is exactly 0 (the stage with this gain taken out is singular, as when
    other op-amps hold the nets) both are infinite: no finite loop gain describes it."""
    gain, z = np.asarray(gain), np.asarray(z)
    denominator = 1 - gain * z
    beta = np.divide(z, denominator, out=np.full(denominator.shape, np.inf, dtype=complex),
                     where=denominator != 0)
    T = np.multiply(gain, beta, out=np.full(beta.shape, np.inf, dtype=complex),
                    where=np.isfinite(beta))
    return T, beta


@record(frozen=True)
class Margins:
    crossover_hz: float | None  # None: |T| never falls through 1 (or never reaches it)
    phase_margin_deg: float | None
    gain_margin_db: float | None  # None: the phase never reaches -180 deg
    phase_crossover_hz: float | None
    noise_gain_at_crossover: float | None = None  # |1/beta| at the crossover


def crossing_index(values: np.ndarray, level: float) -> int | None:
    """First i with values[i] >= level > values[i + 1] (a downward crossing)."""
    above = values >= level
    hits = np.nonzero(above[:-1] & ~above[1:])[0]
    return int(hits[0]) if hits.size else None


def interpolate_log(f: np.ndarray, i: int, target: float, x_values: np.ndarray) -> float:
    """Frequency between f[i] and f[i+1] where x_values (monotone there) hits target,
    linear in log f."""
    x0, x1 = x_values[i], x_values[i + 1]
    fraction = 0.0 if x1 == x0 else (target - x0) / (x1 - x0)
    return float(np.exp(np.log(f[i]) + fraction * (np.log(f[i + 1]) - np.log(f[i]))))


def unwrapped_phase_deg(T: np.ndarray) -> np.ndarray:
    """arg T in degrees, unwrapped from the lowest frequency along the last axis: each
    step's turn arg(T[i+1]/T[i]) taken in (-180, 180] and summed, as np.unwrap does."""
    steps = np.angle(T[..., 1:] * np.conj(T[..., :-1]))  # arg(a/b), no division by 0
    return np.degrees(np.concatenate([np.angle(T[..., :1]), steps], axis=-1).cumsum(axis=-1))


def grid_phase_margins(frequencies: np.ndarray, T: np.ndarray) -> np.ndarray:
    """Phase margins of many loop gains T (V, F) read on the grid alone (no local
    refinement): 180 deg + arg T at the first downward crossing of |T| = 1, with log|T|
    and the unwrapped phase interpolated linearly in log f. NaN where |T| never falls
    through 1. Cheap and a little coarse: for ranking candidates, not reporting."""
    magnitude = np.abs(T)
    phase = unwrapped_phase_deg(T)
    above = magnitude >= 1.0
    falls = above[:, :-1] & ~above[:, 1:]
    found = falls.any(axis=1)
    i = np.argmax(falls, axis=1)
    rows = np.arange(T.shape[0])
    log_mag = np.log10(np.maximum(magnitude, np.finfo(float).tiny))
    m0, m1 = log_mag[rows, i], log_mag[rows, i + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        fraction = np.where(m1 != m0, m0 / (m0 - m1), 0.0)
    phase_at = phase[rows, i] + fraction * (phase[rows, i + 1] - phase[rows, i])
    return np.where(found, 180.0 + phase_at, np.nan)
