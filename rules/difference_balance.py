"""The common-mode rejection that a difference stage's resistor tolerances leave."""

from __future__ import annotations

import math

import numpy as np

from checker.analysis.tolerance import corner_values, transfer_samples, uniform_values
from checker.analysis.topology import classify
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.units import format_si

MATCH_STEPS = (0.001, 0.0025, 0.005, 0.01, 0.02, 0.05)  # stock resistor tolerances


@rule("difference-balance", "warning",
      "A difference stage's resistor tolerances allow too little common-mode rejection.",
      min_cmrr_db=40.0, default_tolerance=0.05, max_corner_resistors=10, samples=10000,
      seed=1)
def difference_balance(view):
    """
    What it checks:
        For a stage with an op-amp in the difference topology (a source reaching each
        input) and two voltage sources, the common-mode rejection over the resistors'
        tolerances. For every combination of each resistor at either end of its
        tolerance (corner enumeration; resistors that move neither transfer are left
        out) the analysis core solves the transfers H1 and H2 from each source's EMF to
        the output; the common-mode gain is H1 + H2, the differential gain
        (H2 - H1)/2 and CMRR = |Ad/Acm|. The worst corner must reach the stage's
        `cmrr` requirement (error) or, without one, `min_cmrr_db` (warning). A Monte
        Carlo run (`samples` boards, uniform, seeded with `seed`) estimates the share
        of boards that do. Resistors without a tolerance count at `default_tolerance`.
        With more than `max_corner_resistors` resistors that matter, the Monte Carlo
        extremes stand in for the corners. The transfers are read at 0 Hz unless a
        source's band starts above it (then at mid-band); the sources' own impedances
        are part of the transfers, so an unbalanced source shows too.

    Why it matters:
        A difference stage rejects what both inputs share (ground noise, a bridge's
        common-mode voltage) only as well as its two resistor ratios match. The
        op-amp's own rejection hardly matters next to that: with 1 % resistors and a
        gain of 1 the worst case is about 50 (34 dB), so a volt of common-mode signal
        leaves 20 mV at the output.

    How the fix is computed:
        The rule tries matched resistors of 5 %, 2 %, 1 %, 0.5 %, 0.25 % and 0.1 %
        (never loosening a part), solves the corners again for each, and suggests the
        loosest whose worst corner reaches the limit. When even 0.1 % does not, the
        nominal ratios (or the sources' impedances) already unbalance the stage and the
        rule says so; a matched resistor network or an instrumentation amplifier is
        then the way.

    Sources:
        Worst-case CMRR of a difference amplifier from resistor tolerance t,
        CMRR ~ (1 + G)/(4t): common practice (a gain of 1 with 1 % parts gives 50, or
        34 dB). Corner enumeration and the uniform tolerance band: common practice.
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    amp = next((o for o in stage.opamps
                if figures.loops[o.ref].feedback == "negative"
                and classify(stage, o, "negative").name == "difference"), None)
    if amp is None:
        return
    sources = [i for i, s in enumerate(stage.sources) if s.kind == "voltage"]
    if len(sources) != 2:
        yield view.cannot_check(f"the common-mode rejection of {amp.ref}",
                                f"the stage has {len(sources)} voltage sources, not the two"
                                " a difference stage's rejection is measured between",
                                amp.origin, (amp.ref,))
        return
    frequency = 0.0
    if any(stage.sources[i].band_low_hz for i in sources):
        frequency = figures.sources[sources[0]].reference_hz
    tolerances, assumed = _tolerances(stage, settings["default_tolerance"])
    solver = _Rejection(figures, sources, stage.output_net, frequency)
    refs = solver.sensitive([p.ref for p in stage.resistors()], tolerances)
    required = stage.require.cmrr
    if required is not None:
        limit, severity, against = required, Severity.ERROR, "the required"
    else:
        limit, severity = 10 ** (settings["min_cmrr_db"] / 20), Severity.WARNING
        against = "the default minimum"
    limit_db = _db(limit)
    worst = _worst(solver, refs, tolerances, settings)
    if worst.cmrr >= limit * (1 - 1e-9):
        return
    if not worst.cmrr > 0:
        yield view.cannot_check(f"the common-mode rejection of {amp.ref}", "its"
                                " differential gain is zero (the two inputs are tied)",
                                amp.origin, (amp.ref,))
        return
    assumed = [r for r in assumed if r in refs]
    share = _share(solver, refs, tolerances, limit, settings)
    listed = ", ".join(f"{r} {format_si(tolerances[r], '%')}" for r in refs)
    how = ("at the worst corner" if worst.exact else
           f"at the worst of {int(settings['samples'])} Monte Carlo boards")
    gains = (f"differential gain {worst.differential:.4g}, common-mode gain"
             f" {worst.common:.3g}")
    nominal = ("infinite" if math.isinf(solver.nominal_cmrr)
               else f"{_db(solver.nominal_cmrr):.1f} dB")
    message = (f"{amp.ref} (difference) rejects common-mode signals by only"
               f" {_db(worst.cmrr):.1f} dB ({worst.cmrr:.3g}) {how} of its resistors"
               f" ({listed}; {gains}), below {against} {limit_db:.1f} dB; nominal"
               f" {nominal}; {share * 100:.1f} % of {int(settings['samples'])} Monte Carlo"
               " boards (uniform) reach it")
    if assumed:
        message += (f"; {', '.join(assumed)} {'has' if len(assumed) == 1 else 'have'} no"
                    f" tolerance, {format_si(settings['default_tolerance'], '%')} assumed"
                    " (common practice)")
    yield view.finding(message, amp.origin, elements=(amp.ref,) + tuple(refs),
                       severity=severity, measured=_db(worst.cmrr), limit=limit_db,
                       unit="dB", suggestion=_suggest(solver, refs, tolerances, limit,
                                                      settings),
                       cmrr_ratio=worst.cmrr, share_within=share,
                       exact_corners=worst.exact, assumed_tolerance=list(assumed))


class _Rejection:
    """Transfers from the two sources to the output for sets of resistor values."""

    def __init__(self, figures, sources: list[int], out: str, frequency: float):
        self.figures, self.sources, self.out, self.frequency = figures, sources, out, frequency
        self.nominal_values = {p.ref: p.value for p in figures.stage.resistors()}
        h = self.transfers({})
        self.nominal_cmrr = float(_cmrr(h)[0])

    def transfers(self, values: dict[str, np.ndarray]) -> np.ndarray:
        """(S, 2): the output per unit EMF of each source."""
        return transfer_samples(self.figures, values, self.sources, [self.out],
                                self.frequency)[:, :, 0]

    def sensitive(self, refs: list[str], tolerances: dict[str, float]) -> list[str]:
        if not refs:
            return []
        values = {r: np.full(len(refs) + 1, self.nominal_values[r]) for r in refs}
        for k, r in enumerate(refs):
            values[r][k] *= 1 + tolerances[r]
        h = self.transfers(values)
        moved = np.max(np.abs(h[:-1] - h[-1]), axis=1)
        scale = max(float(np.max(np.abs(h[-1]))), 1e-30)
        return [r for r, m in zip(refs, moved) if m > 1e-6 * scale]


def _cmrr(h: np.ndarray) -> np.ndarray:
    """|Ad/Acm| per sample, with Ad = (H2 - H1)/2 and Acm = H1 + H2 (inf where Acm = 0)."""
    differential = np.abs(h[:, 1] - h[:, 0]) / 2
    common = np.abs(h[:, 0] + h[:, 1])
    return np.divide(differential, common, out=np.full_like(differential, np.inf),
                     where=common > 1e-15 * differential)


class _Worst:
    def __init__(self, cmrr: float, differential: float, common: float, exact: bool):
        self.cmrr, self.differential, self.common, self.exact = cmrr, differential, common, exact


def _worst(solver: _Rejection, refs, tolerances, settings) -> _Worst:
    if not refs:
        h = solver.transfers({})
        exact = True
    elif len(refs) <= settings["max_corner_resistors"]:
        h = solver.transfers(corner_values(refs, solver.nominal_values, tolerances))
        exact = True
    else:
        h = solver.transfers(uniform_values(refs, solver.nominal_values, tolerances,
                                            int(settings["samples"]), int(settings["seed"])))
        exact = False
    cmrr = _cmrr(h)
    at = int(np.argmin(cmrr))
    return _Worst(float(cmrr[at]), float(abs(h[at, 1] - h[at, 0]) / 2),
                  float(abs(h[at, 0] + h[at, 1])), exact)


def _share(solver, refs, tolerances, limit, settings) -> float:
    if not refs:
        return float(solver.nominal_cmrr >= limit)
    values = uniform_values(refs, solver.nominal_values, tolerances, int(settings["samples"]),
                            int(settings["seed"]))
    return float(np.mean(_cmrr(solver.transfers(values)) >= limit))


def _suggest(solver, refs, tolerances, limit, settings) -> Suggestion:
    if refs:
        loosest = max(tolerances[r] for r in refs)
        for step in reversed(MATCH_STEPS):
            if step >= loosest * (1 - 1e-9):
                continue
            tighter = {r: min(tolerances[r], step) for r in refs}
            worst = _worst(solver, refs, tighter, settings)
            if worst.cmrr >= limit * (1 - 1e-9):
                return Suggestion(
                    f"use matched {format_si(step, '%')} resistors for {', '.join(refs)}:"
                    f" the solved worst corner then rejects {_db(worst.cmrr):.1f} dB"
                    f" ({worst.cmrr:.3g}), reaching {_db(limit):.1f} dB",
                    value=step, unit="%")
    nominal = ("infinite" if math.isinf(solver.nominal_cmrr)
               else f"{_db(solver.nominal_cmrr):.1f} dB")
    return Suggestion(f"even matched 0.1 % resistors do not reach {_db(limit):.1f} dB (nominal"
                      f" {nominal}): make the two resistor ratios equal, including the"
                      " sources' impedances, and use a matched resistor network or an"
                      " instrumentation amplifier")


def _tolerances(stage, default: float) -> tuple[dict[str, float], list[str]]:
    tolerances, assumed = {}, []
    for p in stage.resistors():
        tolerances[p.ref] = p.tolerance or default
        if not p.tolerance:
            assumed.append(p.ref)
    return tolerances, assumed


def _db(ratio: float) -> float:
    return math.inf if math.isinf(ratio) else 20 * math.log10(ratio)
