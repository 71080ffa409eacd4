"""The frequency grid and what is read on it: bands, local grids that pin a crossing
down, -3 dB edges, and the small array helpers the figure modules share.

Every crossing a figure is read at (loop crossover, phase crossover, -3 dB edges) is
bracketed on the grid, then pinned down on a local grid of REFINE_POINTS solved between
the two bracketing points, so no figure depends on the grid's density.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from checker.analysis.loop import crossing_index, interpolate_log
from checker.model import Source, Stage

REFINE_POINTS = 17  # points of the local grid that pins down each crossover
_REFINE_STEPS = np.linspace(0.0, 1.0, REFINE_POINTS)


def frequency_grid(stage: Stage, points: int) -> np.ndarray:
    """Log grid from well below the band to well above every op-amp's GBW, plus each
    source's band edges and centre. Shape (F,), sorted, no repeats."""
    high = 1e6
    low = 1e-2
    for opamp in stage.opamps:
        for value in (opamp.part.gbw_hz, opamp.part.second_pole_hz):
            if value:
                high = max(high, 30 * value)
    extra: list[float] = []
    for source in stage.sources:
        extra.extend(f for f in (source.band_low_hz, source.band_high_hz,
                                 band_centre(source)) if f and f > 0)
        if source.band_low_hz:
            low = min(low, source.band_low_hz / 100)
        if source.band_high_hz:
            high = max(high, source.band_high_hz * 1000)
    grid = _log_grid(low, high, points)
    values = np.sort(np.concatenate([grid, extra]))
    # sorted and without repeats, as np.unique (which would import numpy.ma)
    return values[np.concatenate([[True], values[1:] != values[:-1]])]


@functools.lru_cache(maxsize=64)
def _log_grid(low: float, high: float, points: int) -> np.ndarray:
    """``points`` log-spaced frequencies from ``low`` to ``high``, read-only (the few
    grids of a run's parts and bands are built once)."""
    grid = np.logspace(math.log10(low), math.log10(high), points)
    grid.flags.writeable = False
    return grid


def local_grid(start: float, stop: float) -> np.ndarray:
    """REFINE_POINTS log-spaced frequencies from ``start`` to ``stop`` (either order)."""
    return start * (stop / start) ** _REFINE_STEPS


def signed_gain(gain: complex) -> float:
    """A mid-band gain as a real number: its magnitude with the sign of its real part."""
    return math.copysign(abs(gain), gain.real) if gain.real else abs(gain)


def pick(X: np.ndarray, node: int, column: int) -> np.ndarray:
    """Node ``node``'s voltage in column ``column`` of a solution X (F, n, m): (F,)
    (zeros for ground, node 0)."""
    if node == 0:
        return np.zeros(X.shape[0], dtype=X.dtype)
    return X[:, node - 1, column]


def safe_divide(a, b):
    """a / b elementwise, infinite where b is 0 (an open circuit's impedance)."""
    a = np.asarray(a, dtype=complex)
    b = np.asarray(b, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        result = a / b
    return np.where(b == 0, np.inf, result)


def reference_frequency(source: Source) -> float:
    """The frequency a source's single-number figures are read at: the geometric centre
    of its band, or 0 Hz (DC) for a source with no band or a band from 0 Hz."""
    return band_centre(source) or 0.0


def band_centre(source: Source) -> float | None:
    if source.band_high_hz and source.band_low_hz:
        return math.sqrt(source.band_low_hz * source.band_high_hz)
    return None


def band_points(frequencies: np.ndarray, source: Source) -> np.ndarray | None:
    """The grid points inside a source's band (from the grid's start where it gives no
    lower edge), a relative 1e-12 either side so a band edge on a grid point counts;
    None where the source gives no band or no grid point lies in it."""
    if not source.band_high_hz:
        return None
    low = source.band_low_hz or frequencies[0]
    mask = (frequencies >= low * (1 - 1e-12)) & \
        (frequencies <= source.band_high_hz * (1 + 1e-12))
    return mask if mask.any() else None


def band_mask(frequencies: np.ndarray, source: Source) -> np.ndarray:
    """The grid points inside a source's band (every point where it gives none)."""
    mask = band_points(frequencies, source)
    return np.ones(frequencies.shape, dtype=bool) if mask is None else mask


# Around the grid's largest in-band value, a neighbour within this of it means the
# response is flat there (no narrow peak can sit between the points): no local solve.
FLAT_NEIGHBOURS = 1e-3
# A peak is pinned down level by level, each local grid spanning the neighbours of the
# last one's maximum (1/8 of its span). Two levels always, and more while a level raises
# the peak by more than PEAK_SETTLED: once the spacing is below the peak's width its top
# is quadratic and the error falls about 64-fold per level, so a rise under 0.5 % leaves
# well under 0.01 %; a narrow peak (a Q of hundreds) that a level still straddles rises
# by far more and is followed down, up to PEAK_LEVELS (about 1e-7 of the frequency).
PEAK_SETTLED = 5e-3
PEAK_LEVELS = 8


def band_peak(frequencies: np.ndarray, values: np.ndarray, band: np.ndarray, value_at,
              weight=None) -> tuple[np.ndarray, np.ndarray, int]:
    """Where |values| (times ``weight(frequencies)`` when given) is largest inside
    ``band``, pinned down so a narrow resonance between grid points is not missed. The
    true maximum of a peak lies between the neighbours of a grid point that is larger
    than both, so a local grid of REFINE_POINTS is solved there by
    ``value_at(frequencies)``, and again between the neighbours of its own maximum
    (spacing about 0.4 % of the frequency for the default grid, where a peak of Q 50 is
    2 % wide), and again while a level still raises the peak (PEAK_SETTLED: a peak of
    Q 500 is 0.2 % wide). The grid points looked at: the largest score, and every grid point where
    |values| itself peaks. No local solve where the response is flat at a point.
    Returns (frequencies, values, at): the grid with the local points merged in,
    sorted, and the index of the maximum in them."""
    def score(freqs: np.ndarray, vals: np.ndarray) -> np.ndarray:
        magnitude = np.abs(vals)
        return magnitude * weight(freqs) if weight is not None else magnitude

    inside = np.flatnonzero(band)
    first, last = int(inside[0]), int(inside[-1])
    scores = score(frequencies[first:last + 1], values[first:last + 1])
    largest = first + int(np.argmax(scores))
    starts = {largest}
    # every peak of |values| itself inside the band: a narrow one may rise above the
    # grid's largest value between two points, and under a rising weight (2 pi f) the
    # weighted score does not peak there at all
    magnitude = np.abs(values[first:last + 1])
    bumps = np.flatnonzero((magnitude[1:-1] > magnitude[:-2])
                           & (magnitude[1:-1] > magnitude[2:])) + 1
    starts.update(first + int(k) for k in bumps)
    extra_f, extra_v = [], []
    for i in sorted(starts):
        left, right = max(i - 1, first), min(i + 1, last)
        # flat: |values| at the neighbours as at i (a weight alone moves the maximum to a
        # band edge, which is on the grid, and hides no peak)
        here = magnitude[i - first]
        if left == right or all(magnitude[k - first] >= here * (1 - FLAT_NEIGHBOURS)
                                for k in {left, right} - {i}):
            continue
        span = (frequencies[left], frequencies[right])
        previous = 0.0
        for level in range(PEAK_LEVELS):
            fine = local_grid(*span)
            fine_values = np.asarray(value_at(fine))
            extra_f.append(fine)
            extra_v.append(fine_values)
            fine_scores = score(fine, fine_values)
            k = int(np.argmax(fine_scores))
            span = (fine[max(k - 1, 0)], fine[min(k + 1, fine.size - 1)])
            top = float(fine_scores[k])
            if level >= 1 and not top > previous * (1 + PEAK_SETTLED):
                break  # settled: the last level hardly raised the peak
            previous = max(previous, top)
    if not extra_f:
        return frequencies, values, largest
    merged_f = np.concatenate([frequencies] + extra_f)
    merged_v = np.concatenate([values] + extra_v)
    order = np.argsort(merged_f, kind="stable")
    merged_f, merged_v = merged_f[order], merged_v[order]
    keep = np.concatenate([[True], merged_f[1:] != merged_f[:-1]])
    merged_f, merged_v = merged_f[keep], merged_v[keep]
    low, high = frequencies[first], frequencies[last]
    in_band = (merged_f >= low) & (merged_f <= high)
    candidates = np.flatnonzero(in_band)
    at = int(candidates[np.argmax(score(merged_f, merged_v)[candidates])])
    return merged_f, merged_v, at


def grid_upper_edges(frequencies: np.ndarray, gains: np.ndarray, at: int) -> np.ndarray:
    """-3 dB upper edges of many gains (V, F) above grid index ``at``, read on the grid
    alone (log-log interpolation, no local solve); NaN where the response stays up.
    For ranking candidates; reported edges come from bandwidth_edges."""
    if at >= frequencies.size - 1:
        return np.full(gains.shape[0], np.nan)
    magnitude = np.maximum(np.abs(gains[:, at:]), np.finfo(float).tiny)
    level = magnitude[:, :1] / math.sqrt(2)
    above = magnitude >= level
    falls = above[:, :-1] & ~above[:, 1:]
    found = falls.any(axis=1)
    i = np.argmax(falls, axis=1)
    rows = np.arange(gains.shape[0])
    log_f = np.log(frequencies[at:])
    m0, m1 = np.log(magnitude[rows, i]), np.log(magnitude[rows, i + 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        fraction = np.where(found & (m1 != m0), (np.log(level[:, 0]) - m0) / (m1 - m0), 0.0)
    edge = np.exp(log_f[i] + fraction * (log_f[np.minimum(i + 1, log_f.size - 1)] - log_f[i]))
    return np.where(found, edge, np.nan)


def bandwidth_edges(frequencies: np.ndarray, gain: np.ndarray, at: int,
                    gain_at=None) -> tuple[float | None, float | None]:
    """-3 dB edges of |gain| around index ``at`` (None where the response stays up).

    Each edge is bracketed on the grid, then pinned down on a local grid of
    REFINE_POINTS solved by ``gain_at(frequencies)`` (when given; one call for both
    edges), so its accuracy does not depend on the grid's density."""
    magnitude = np.abs(gain)
    reference = magnitude[at]
    if reference == 0 or not math.isfinite(reference):  # no gain, or the net is held
        return None, None
    level = reference / math.sqrt(2)
    tiny = np.finfo(float).tiny  # a zero response has no log
    sides = [(frequencies[at:], magnitude[at:]),  # upwards from the reference
             (frequencies[: at + 1][::-1], magnitude[: at + 1][::-1])]  # downwards
    brackets = [crossing_index(values, level) for _freqs, values in sides]
    locals_ = [local_grid(freqs[i], freqs[i + 1])
               for (freqs, _values), i in zip(sides, brackets) if i is not None]
    solved = iter(np.split(np.maximum(np.abs(gain_at(np.concatenate(locals_))), tiny),
                           len(locals_))) if gain_at is not None and locals_ else None
    local_grids = iter(locals_)
    edges: list[float | None] = []
    for (freqs, values), i in zip(sides, brackets):
        if i is None:
            edges.append(None)
            continue
        if solved is not None:
            local, local_values = next(local_grids), next(solved)
            j = crossing_index(local_values, level)
            if j is not None:
                edges.append(interpolate_log(local, j, math.log10(level),
                                             np.log10(local_values)))
                continue
        edges.append(interpolate_log(freqs, i, math.log10(level),
                                     np.log10(np.maximum(values, tiny))))
    high, low = edges
    return low, high
