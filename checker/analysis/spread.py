"""The spread of a stage's signal gain and common-mode rejection over its resistors'
tolerances: worst corners by enumeration, shares by Monte Carlo, every sample solved.

A *signal* is a weighted sum of sources: one source alone ``((i, 1.0),)``, or a
differential pair ``((a, 0.5), (b, -0.5))``, whose gain Vout/(Va - Vb) is
(Ha - Hb)/2 with Ha, Hb the transfers from each source to the output (superposition:
Va = Vcm + Vd/2, Vb = Vcm - Vd/2). Gains are read as real numbers: at 0 Hz they are
real, elsewhere a magnitude with the sign of the real part (as the reports print them).

Used by the requirement verdicts and by the gain-tolerance and difference-balance rules,
so a verdict and the rule that explains it read the same numbers.
"""

from __future__ import annotations

import math
from checker.record import record

import numpy as np

from checker.analysis.tolerance import corner_values, transfer_samples, uniform_values

Signal = tuple[tuple[int, float], ...]


@record(frozen=True)
class SpreadOptions:
    """How a spread is sampled: the settings of the rules that read it."""

    default_tolerance: float = 0.05  # a resistor with none (common practice)
    max_corner_resistors: int = 10  # beyond: Monte Carlo extremes stand in for corners
    samples: int = 10000
    seed: int = 1


def resistor_tolerances(stage, default: float) -> tuple[dict[str, float], list[str]]:
    """Each resistor's tolerance (fraction), and the designators that had none and were
    given ``default``."""
    tolerances, assumed = {}, []
    for resistor in stage.resistors():
        tolerances[resistor.ref] = resistor.tolerance or default
        if not resistor.tolerance:
            assumed.append(resistor.ref)
    return tolerances, assumed


def _real(values: np.ndarray) -> np.ndarray:
    if np.iscomplexobj(values):
        return np.where(values.real < 0, -1.0, 1.0) * np.abs(values)
    return np.asarray(values, dtype=float)


@record(frozen=True)
class WorstGain:
    gain: float  # the worst sample's gain
    error: float  # |gain / required - 1| there
    signs: tuple[float, ...]  # each varied resistor's side at that sample (+1 high, -1 low)
    exact: bool  # True: corner enumeration; False: Monte Carlo extremes


@record(frozen=True)
class WorstRejection:
    cmrr: float  # |Ad/Acm| at the worst sample (inf where Acm = 0)
    differential: float  # |Ad| there
    common: float  # |Acm| there
    exact: bool


class GainSpread:
    """The signal's gain for sets of resistor values, solved at one frequency."""

    def __init__(self, figures, signal: Signal, frequency_hz: float):
        self.figures, self.signal, self.frequency_hz = figures, signal, frequency_hz
        self.sources = [index for index, _weight in signal]
        self.weights = np.array([weight for _index, weight in signal])
        self.nominal_values = {p.ref: p.value for p in figures.stage.resistors()}
        self.out = figures.stage.output_net
        h = self.transfers({})
        self.nominal = float(self._gains(h)[0])
        self.nominal_cmrr = float(rejection(h)[0]) if len(self.sources) == 2 else math.inf

    def transfers(self, values: dict[str, np.ndarray]) -> np.ndarray:
        """(S, number of sources): the output per unit of each source."""
        return transfer_samples(self.figures, values, self.sources, [self.out],
                                self.frequency_hz)[:, :, 0]

    def _gains(self, h: np.ndarray) -> np.ndarray:
        return _real(h @ self.weights)

    def gains(self, values: dict[str, np.ndarray]) -> np.ndarray:
        """The signal's gain for every sample: (S,) real."""
        return self._gains(self.transfers(values))

    def sensitive(self, refs: list[str], tolerances: dict[str, float]) -> list[str]:
        """Those of ``refs`` whose move to the top of their tolerance moves a transfer
        (for a pair, either one: the common mode counts too)."""
        if not refs:
            return []
        values = {r: np.full(len(refs) + 1, self.nominal_values[r]) for r in refs}
        for k, r in enumerate(refs):
            values[r][k] *= 1 + tolerances[r]
        h = self.transfers(values)
        moved = np.max(np.abs(h[:-1] - h[-1]), axis=1)
        self.sensitivity = dict(zip(refs, moved))
        scale = max(float(np.max(np.abs(h[-1]))), 1e-30)
        return [r for r, m in zip(refs, moved) if m > 1e-6 * scale]

    def samples(self, refs, tolerances, options: SpreadOptions, corners: bool):
        if corners:
            return corner_values(refs, self.nominal_values, tolerances)
        return uniform_values(refs, self.nominal_values, tolerances, int(options.samples),
                              int(options.seed))

    def uses_corners(self, refs, options: SpreadOptions) -> bool:
        return len(refs) <= options.max_corner_resistors

    def worst_gain(self, refs, tolerances, required: float, options: SpreadOptions
                   ) -> WorstGain:
        """The sample farthest from ``required``: every corner, or the Monte Carlo boards
        when more than ``max_corner_resistors`` resistors matter."""
        exact = self.uses_corners(refs, options)
        values = self.samples(refs, tolerances, options, exact) if refs else {}
        gains = self.gains(values)
        errors = np.abs(gains / required - 1)
        at = int(np.argmax(errors))
        signs = tuple(math.copysign(1.0, values[r][at] - self.nominal_values[r]) for r in refs)
        return WorstGain(float(gains[at]), float(errors[at]), signs, exact)

    def share_within(self, refs, tolerances, required: float, band: float,
                     options: SpreadOptions) -> float:
        """The share of Monte Carlo boards whose gain is within ``band`` of ``required``."""
        if not refs:
            return float(abs(self.nominal / required - 1) <= band * (1 + 1e-9))
        values = self.samples(refs, tolerances, options, False)
        return float(np.mean(np.abs(self.gains(values) / required - 1) <= band * (1 + 1e-9)))

    def worst_rejection(self, refs, tolerances, options: SpreadOptions) -> WorstRejection:
        """A pair's lowest CMRR over the corners (or the Monte Carlo boards)."""
        exact = self.uses_corners(refs, options) or not refs
        h = self.transfers(self.samples(refs, tolerances, options, exact) if refs else {})
        cmrr = rejection(h)
        at = int(np.argmin(cmrr))
        return WorstRejection(float(cmrr[at]), float(abs(h[at, 0] - h[at, 1]) / 2),
                              float(abs(h[at, 0] + h[at, 1])), exact)

    def share_rejecting(self, refs, tolerances, limit: float, options: SpreadOptions
                        ) -> float:
        if not refs:
            return float(self.nominal_cmrr >= limit * (1 - 1e-9))
        h = self.transfers(self.samples(refs, tolerances, options, False))
        return float(np.mean(rejection(h) >= limit * (1 - 1e-9)))


def rejection(h: np.ndarray) -> np.ndarray:
    """|Ad/Acm| per sample of a pair's transfers h (S, 2), Ad = (H1 - H2)/2 and
    Acm = H1 + H2 (inf where Acm vanishes against Ad)."""
    differential = np.abs(h[:, 0] - h[:, 1]) / 2
    common = np.abs(h[:, 0] + h[:, 1])
    with np.errstate(divide="ignore"):
        return np.where(common > 1e-15 * differential, differential / np.maximum(common, 1e-300),
                        np.inf)
