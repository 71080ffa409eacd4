"""The stage gain's spread over the resistors' tolerances, against its requirement."""

from __future__ import annotations

import math

import numpy as np

from checker.analysis.tolerance import corner_values, transfer_samples, uniform_values
from checker.engine import rule
from checker.findings import Suggestion
from checker.units import format_si

TOLERANCE_STEPS = (0.001, 0.0025, 0.005, 0.01, 0.02, 0.05)  # stock resistor tolerances


@rule("gain-tolerance", "warning",
      "Over the resistors' tolerances the gain can leave its required tolerance band.",
      default_tolerance=0.05, max_corner_resistors=10, samples=10000, seed=1)
def gain_tolerance(view):
    """
    What it checks:
        In a stage that states both `gain` and `gain-tolerance`, the gain from the
        first voltage source's net to the output, V(out)/V(source net), for every
        combination of each resistor at the low and the high end of its tolerance
        (corner enumeration, each set solved by the analysis core). Resistors whose
        change does not move the gain are left out first. The worst corner must stay
        within the required band (|G/G_required - 1| <= gain-tolerance). The gain is
        read at 0 Hz when the source's band starts at 0 Hz, else at its mid-band (as
        a magnitude with the sign of its real part). A Monte Carlo run (`samples`
        boards, each resistor uniform within its tolerance, seeded with `seed`)
        estimates the share of boards inside the band. A resistor without a
        tolerance is taken at `default_tolerance` and the message says so. With more
        than `max_corner_resistors` resistors that matter, the Monte Carlo extremes
        stand in for the corners.

    Why it matters:
        A gain set by a resistor ratio is only as accurate as the resistors: in an
        inverting stage the two ends of a ratio can move in opposite directions, so
        the worst case is about twice the resistor tolerance. A gain that meets its
        requirement on the nominal values can still fail on real boards.

    How the fix is computed:
        The rule tries the stock tolerances 5 %, 2 %, 1 %, 0.5 %, 0.25 % and 0.1 %
        for the resistors that set the gain (never loosening one), solves the corners
        again for each, and suggests the loosest that keeps the worst corner within
        the requirement. When even 0.1 % does not, the nominal ratio itself is off and
        the rule says so.

    Sources:
        Worst-case analysis by corner enumeration and the uniform distribution for a
        tolerance band: common practice. The rule of thumb that a ratio of two
        resistors of tolerance t is good to about 2t: common practice.
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    required, band = stage.require.gain, stage.require.gain_tolerance
    if required is None or band is None:
        return
    index = next((i for i, s in enumerate(stage.sources) if s.kind == "voltage"), None)
    if index is None:
        yield view.cannot_check("the gain tolerance", "the stage has no voltage source to"
                                " take the gain from", stage.require.origin)
        return
    source = stage.sources[index]
    frequency = 0.0 if not source.band_low_hz else figures.sources[index].reference_hz
    tolerances, assumed = _tolerances(stage, settings["default_tolerance"])
    gain = _GainSolver(figures, index, source.net, stage.output_net, frequency)
    if not math.isfinite(gain.nominal):
        yield view.cannot_check("the gain tolerance", f"the gain from net {source.net!r} is"
                                " not defined: nothing moves that net (it is held at a fixed"
                                " voltage)", stage.require.origin)
        return
    refs = gain.sensitive([p.ref for p in stage.resistors()], tolerances)
    if not refs:
        return
    worst = _worst(gain, refs, tolerances, required, settings)
    if worst.error <= band * (1 + 1e-9):
        return
    assumed = [r for r in assumed if r in refs]
    share = _share_within(gain, refs, tolerances, required, band, settings)
    origin = max(refs, key=lambda r: gain.sensitivity[r])
    listed = ", ".join(f"{r} {_percent(tolerances[r])}" for r in refs)
    corner = ", ".join(f"{r} {'+' if s > 0 else '-'}{_percent(tolerances[r])}"
                       for r, s in zip(refs, worst.signs))
    how = "at the worst corner" if worst.exact else \
        f"at the extremes of {int(settings['samples'])} Monte Carlo boards"
    message = (f"the gain is {gain.nominal:.4g} nominal, but over the resistors' tolerances"
               f" ({listed}) it reaches {worst.gain:.4g} {how}"
               + (f" ({corner})" if worst.exact else "") +
               f", {_percent(worst.error)} from the required {required:.4g}, beyond"
               f" ±{_percent(band)}; {_share_text(share, int(settings['samples']))}")
    if assumed:
        message += (f"; {', '.join(assumed)} {'has' if len(assumed) == 1 else 'have'} no"
                    f" tolerance, {_percent(settings['default_tolerance'])} assumed"
                    " (common practice)")
    yield view.finding(message, stage.element(origin).origin, elements=tuple(refs),
                       measured=worst.error, limit=band, unit="%",
                       suggestion=_suggest(gain, refs, tolerances, required, band, settings),
                       nominal_gain=gain.nominal, worst_gain=worst.gain,
                       share_within=share, exact_corners=worst.exact,
                       assumed_tolerance=list(assumed))


class _GainSolver:
    """V(out)/V(source net) for sets of resistor values, through the analysis core."""

    def __init__(self, figures, index: int, net: str, out: str, frequency: float):
        self.figures, self.index, self.net, self.out = figures, index, net, out
        self.frequency = frequency
        self.nominal_values = {p.ref: p.value for p in figures.stage.resistors()}
        self.nominal = float(self.gains({})[0])
        self.sensitivity: dict[str, float] = {}

    def gains(self, values: dict[str, np.ndarray]) -> np.ndarray:
        """The signed gain of every sample: (S,) real."""
        h = transfer_samples(self.figures, values, [self.index], [self.out, self.net],
                             self.frequency)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = h[:, 0, 0] / h[:, 0, 1]
        if np.iscomplexobj(g):
            g = np.where(g.real < 0, -1.0, 1.0) * np.abs(g)
        return np.asarray(g, dtype=float)

    def sensitive(self, refs: list[str], tolerances: dict[str, float]) -> list[str]:
        """Those of ``refs`` whose move to the top of their tolerance moves the gain."""
        if not refs:
            return []
        values = {r: np.full(len(refs), self.nominal_values[r]) for r in refs}
        for k, r in enumerate(refs):
            values[r][k] *= 1 + tolerances[r]
        moved = np.abs(self.gains(values) - self.nominal)
        self.sensitivity = dict(zip(refs, moved))
        scale = max(abs(self.nominal), 1e-30)
        return [r for r, m in zip(refs, moved) if m > 1e-6 * scale]


class _Worst:
    def __init__(self, error: float, gain: float, signs: tuple[float, ...], exact: bool):
        self.error, self.gain, self.signs, self.exact = error, gain, signs, exact


def _worst(gain: _GainSolver, refs, tolerances, required: float, settings) -> _Worst:
    if len(refs) <= settings["max_corner_resistors"]:
        values = corner_values(refs, gain.nominal_values, tolerances)
        exact = True
    else:
        values = uniform_values(refs, gain.nominal_values, tolerances,
                                int(settings["samples"]), int(settings["seed"]))
        exact = False
    gains = gain.gains(values)
    errors = np.abs(gains / required - 1)
    errors = np.where(np.isfinite(errors), errors, -1.0)  # a set whose gain is undefined
    at = int(np.argmax(errors))
    signs = tuple(math.copysign(1.0, values[r][at] - gain.nominal_values[r]) for r in refs)
    return _Worst(float(errors[at]), float(gains[at]), signs, exact)


def _share_within(gain, refs, tolerances, required, band, settings) -> float:
    values = uniform_values(refs, gain.nominal_values, tolerances, int(settings["samples"]),
                            int(settings["seed"]))
    errors = np.abs(gain.gains(values) / required - 1)
    return float(np.mean(errors <= band))


def _suggest(gain, refs, tolerances, required, band, settings) -> Suggestion:
    loosest = max(tolerances[r] for r in refs)
    for step in reversed(TOLERANCE_STEPS):
        if step >= loosest * (1 - 1e-9):
            continue
        tighter = {r: min(tolerances[r], step) for r in refs}
        worst = _worst(gain, refs, tighter, required, settings)
        if worst.error <= band * (1 + 1e-9):
            return Suggestion(
                f"use {_percent(step)} resistors for {', '.join(refs)}: the solved worst"
                f" case is then {worst.gain:.4g} ({_percent(worst.error)} from"
                f" {required:.4g}, within ±{_percent(band)})",
                value=step, unit="%")
    nominal_error = abs(gain.nominal / required - 1)
    return Suggestion(f"even 0.1 % resistors do not hold the gain within ±{_percent(band)}:"
                      f" the nominal gain {gain.nominal:.4g} is already"
                      f" {_percent(nominal_error)} from {required:.4g}; correct the"
                      " resistor ratio first")


def _tolerances(stage, default: float) -> tuple[dict[str, float], list[str]]:
    tolerances, assumed = {}, []
    for p in stage.resistors():
        if p.tolerance:
            tolerances[p.ref] = p.tolerance
        else:
            tolerances[p.ref] = default
            assumed.append(p.ref)
    return tolerances, assumed


def _share_text(share: float, samples: int) -> str:
    if share >= 1.0:
        return (f"all {samples} Monte Carlo boards (uniform) are within it: only boards near"
                " the extreme corners fail")
    return f"about {share * 100:.1f} % of {samples} Monte Carlo boards (uniform) are within it"


def _percent(fraction: float) -> str:
    return format_si(fraction, "%")
