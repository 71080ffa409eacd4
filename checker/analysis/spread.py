"""The spread of a stage's signal gain and common-mode rejection over its resistors'
tolerances: worst corners by enumeration, shares by Monte Carlo, every sample solved.

A *signal* is a weighted sum of sources: one source alone ``((i, 1.0),)``, or a
differential pair ``((a, 0.5), (b, -0.5))``, whose gain Vout/(Va - Vb) is
(Ha - Hb)/2 with Ha, Hb the transfers from each source to the output (superposition:
Va = Vcm + Vd/2, Vb = Vcm - Vd/2). Gains are read as real numbers: at 0 Hz they are
real, elsewhere a magnitude with the sign of the real part (as the reports print them).

The worst case: with at most ``max_corner_resistors`` varied resistors, every corner
(full enumeration, exact for the corners). Beyond, a first-order choice
(corner_search.py: the corner the sensitivities' signs choose, verified where no single
resistor's flip makes it worse) against the Monte Carlo extremes, the worse of the two
reported with its ``method``: a first-order choice, not a full enumeration.

Used by the requirement verdicts and by the gain-tolerance and difference-balance rules,
so a verdict and the rule that explains it read the same numbers.
"""

from __future__ import annotations

import math
from checker.record import record

import numpy as np

from checker.analysis.corner_search import (central_differences, climb, corner_samples,
                                           start_signs)
from checker.analysis.tolerance import corner_values, transfer_samples, uniform_values

Signal = tuple[tuple[int, float], ...]


@record(frozen=True)
class SpreadOptions:
    """How a spread is sampled: the settings of the rules that read it."""

    default_tolerance: float = 0.05  # a resistor with none (common practice)
    max_corner_resistors: int = 10  # beyond: a first-order corner against Monte Carlo
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


ENUMERATION, SENSITIVITY, MONTE_CARLO = "enumeration", "sensitivity", "monte-carlo"


@record(frozen=True)
class WorstGain:
    gain: float  # the worst sample's gain
    error: float  # |gain / required - 1| there
    signs: tuple[float, ...]  # each varied resistor's side at that sample (+1 high, -1 low)
    exact: bool  # True: corner enumeration; False: a first-order corner or Monte Carlo
    method: str = ENUMERATION  # which found it: ENUMERATION, SENSITIVITY or MONTE_CARLO
    verified: bool = True  # SENSITIVITY: no single resistor's flip makes it worse


@record(frozen=True)
class WorstRejection:
    cmrr: float  # |Ad/Acm| at the worst sample (inf where Acm = 0)
    differential: float  # |Ad| there
    common: float  # |Acm| there
    exact: bool
    method: str = ENUMERATION
    verified: bool = True
    signs: tuple[float, ...] = ()  # each varied resistor's side there (not enumerated)


def method_text(worst: WorstGain | WorstRejection, boards: int) -> str:
    """Where a worst case was found, in the reports' words ("at the worst corner" for
    full enumeration); ``method_note`` says the rest."""
    if worst.method == ENUMERATION:
        return "at the worst corner"
    if worst.method == SENSITIVITY:
        return "at the first-order worst corner"
    return f"at the extremes of {boards} Monte Carlo boards"


def method_note(worst: WorstGain | WorstRejection) -> str:
    """"" for full enumeration, else a plain note that the worst case is a first-order
    choice (and whether its corner was verified), to close a message."""
    if worst.method == ENUMERATION:
        return ""
    if worst.method == SENSITIVITY:
        check = ("verified: no single resistor's flip makes it worse" if worst.verified
                 else "not verified: single flips still moved it")
        return ("; a first-order choice by the sensitivities' signs, not full enumeration"
                f" of the corners ({check})")
    return ("; the Monte Carlo extremes were worse than the first-order corner (a choice"
            " by the sensitivities' signs), and neither is a full enumeration of the"
            " corners")


def worst_case_record(worst: WorstGain | WorstRejection) -> dict | None:
    """The method and verification of a worst case not fully enumerated (None when it
    was), as a report carries it."""
    if worst.method == ENUMERATION:
        return None
    return {"method": worst.method, "verified": bool(worst.verified)}


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
        """The sample farthest from ``required``: every corner, or, when more than
        ``max_corner_resistors`` resistors matter, the worse of the first-order corners
        (highest and lowest gain) and the Monte Carlo extremes."""
        exact = self.uses_corners(refs, options) or not refs
        values = self.samples(refs, tolerances, options, exact) if refs else {}
        gains = self.gains(values)
        errors = np.abs(gains / required - 1)
        at = int(np.argmax(errors))
        signs = tuple(math.copysign(1.0, values[r][at] - self.nominal_values[r]) for r in refs)
        carlo = WorstGain(float(gains[at]), float(errors[at]), signs, exact,
                          ENUMERATION if exact else MONTE_CARLO, exact)
        if exact:
            return carlo
        high, low = self.gain_corners(refs, tolerances)
        chosen = [(abs(gain / required - 1), gain, corner)
                  for gain, corner in ((high.objective, high), (-low.objective, low))]
        error, gain, corner = max(chosen, key=lambda item: item[0])
        if error >= carlo.error:
            return WorstGain(gain, error, tuple(float(s) for s in corner.signs), False,
                             SENSITIVITY, corner.verified)
        return carlo

    def gain_corners(self, refs, tolerances) -> list:
        """The first-order corners of the highest and of the lowest gain (corner_search;
        the second's objective is the negated gain)."""
        nominal = self.nominal_values
        differences = central_differences(self.gains, refs, nominal, tolerances)

        def lowest(values: dict[str, np.ndarray]) -> np.ndarray:
            return -self.gains(values)

        return [climb(self.gains, refs, nominal, tolerances, start_signs(differences)),
                climb(lowest, refs, nominal, tolerances, start_signs(-differences))]

    def share_within(self, refs, tolerances, required: float, band: float,
                     options: SpreadOptions) -> float:
        """The share of Monte Carlo boards whose gain is within ``band`` of ``required``."""
        if not refs:
            return float(abs(self.nominal / required - 1) <= band * (1 + 1e-9))
        values = self.samples(refs, tolerances, options, False)
        return float(np.mean(np.abs(self.gains(values) / required - 1) <= band * (1 + 1e-9)))

    def worst_rejection(self, refs, tolerances, options: SpreadOptions) -> WorstRejection:
        """A pair's lowest CMRR over the corners, or, beyond ``max_corner_resistors``,
        the worse of the first-order corner and the worst Monte Carlo board."""
        exact = self.uses_corners(refs, options) or not refs
        values = self.samples(refs, tolerances, options, exact) if refs else {}
        h = self.transfers(values)
        cmrr = rejection(h)
        at = int(np.argmin(cmrr))
        signs = tuple(math.copysign(1.0, values[r][at] - self.nominal_values[r]) for r in refs)
        carlo = WorstRejection(float(cmrr[at]), float(abs(h[at, 0] - h[at, 1]) / 2),
                               float(abs(h[at, 0] + h[at, 1])), exact,
                               ENUMERATION if exact else MONTE_CARLO, exact, signs)
        if exact:
            return carlo
        corner = self.rejection_corner(refs, tolerances)
        h = self.transfers(corner_samples(refs, self.nominal_values, tolerances, corner.signs))
        worst = float(rejection(h)[0])
        if worst <= carlo.cmrr:
            return WorstRejection(worst, float(abs(h[0, 0] - h[0, 1]) / 2),
                                  float(abs(h[0, 0] + h[0, 1])), False, SENSITIVITY,
                                  corner.verified, tuple(float(s) for s in corner.signs))
        return carlo

    def rejection_corner(self, refs, tolerances):
        """The first-order corner of the largest |Acm/Ad| (the lowest CMRR). The ratio
        r = Acm/Ad is bilinear in each resistor (H1 and H2 share their denominator), so
        the starts are the corners that push r furthest along a few directions of the
        complex plane (at 0 Hz: up and down the real line); each is climbed on |r|."""
        nominal = self.nominal_values

        def ratio(values):
            h = self.transfers(values)
            return (h[:, 0] + h[:, 1]) / ((h[:, 0] - h[:, 1]) / 2)

        def size(values):
            return np.abs(ratio(values))

        differences = central_differences(ratio, refs, nominal, tolerances)
        largest = float(np.max(np.abs(differences))) if len(refs) else 0.0
        starts: list[np.ndarray] = []
        for turn in (1.0, 1j, -1.0, -1j):
            along = np.real(differences / turn)
            if float(np.max(np.abs(along))) <= 1e-9 * largest:
                continue  # no component this way (at 0 Hz, the imaginary ones)
            signs = start_signs(along)
            if not any(np.array_equal(signs, s) for s in starts):
                starts.append(signs)
        if not starts:
            starts.append(np.ones(len(refs)))
        corners = [climb(size, refs, nominal, tolerances, s) for s in starts]
        return max(corners, key=lambda corner: corner.objective)

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
