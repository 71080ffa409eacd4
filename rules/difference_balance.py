"""The common-mode rejection that a difference stage's resistor tolerances leave."""

from __future__ import annotations

import math

from checker.analysis.signal import stage_signals
from checker.analysis.spread import (MONTE_CARLO, SpreadOptions, method_note, method_text,
                                     worst_case_record)
from checker.analysis.topology import classify
from checker.changes import SetTolerance
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import reaches
from checker.requirements import differential_pair, rejection_spread
from checker.units import format_gain, format_si

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
        With more than `max_corner_resistors` resistors that matter, the corners are
        not all solved: a first-order choice takes their place (the corner that the
        signs of the ratio Acm/Ad's sensitivities to each resistor choose, checked at
        that corner so that no single resistor's flip lowers the CMRR further, a few
        rounds at most), and the worse of it and the worst Monte Carlo board is
        reported; the message says it is a first-order choice, not full enumeration,
        and whether the corner was verified. Near a balanced stage's null the
        common-mode gain is small and its sensitivities can change sign within the
        tolerances: there first order can fall short of the true worst corner. The transfers are read where the first
        source's figures are (0 Hz for a source with no band or a band from 0 Hz, else
        its band centre), the same spread the `cmrr` requirement's verdict reads; the
        sources' own impedances are part of the transfers, so an unbalanced source
        shows too. The op-amp named is the difference stage that delivers the output.

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

    Passes:
        (stage level-diff (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part precision-bipolar) (in+ p) (in- n) (out out) (v+ vcc) (v- vee))
          (resistor R1 a n 10k (tolerance 0.01%)) (resistor R2 n out 10k (tolerance 0.01%))
          (resistor R3 b p 10k (tolerance 0.01%)) (resistor R4 p gnd 10k (tolerance 0.01%))
          (source a (range 2.4V 2.6V) (band 0Hz 10Hz))
          (source b (range 2.4V 2.6V) (band 0Hz 10Hz))
          (load out (resistance 10k)))

    Fails:
        (stage level-diff (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part precision-bipolar) (in+ p) (in- n) (out out) (v+ vcc) (v- vee))
          (resistor R1 a n 10k (tolerance 1%)) (resistor R2 n out 10k (tolerance 1%))
          (resistor R3 b p 10k (tolerance 1%)) (resistor R4 p gnd 10k (tolerance 1%))
          (source a (range 2.4V 2.6V) (band 0Hz 10Hz))
          (source b (range 2.4V 2.6V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    differences = [o for o in stage.opamps if figures.loops[o.ref].feedback == "negative"
                   and classify(stage, o, "negative").name == "difference"]
    if not differences:
        return
    # The difference stage is the one that delivers the output (an instrumentation
    # amplifier's input op-amps read as differences too), else the last of them.
    amp = next((o for o in differences if o.out == stage.output_net), differences[-1])
    pair = differential_pair(stage_signals(figures))
    if pair is None:
        voltage = sum(1 for s in stage.sources if s.kind == "voltage")
        yield view.cannot_check(f"the common-mode rejection of {amp.ref}",
                                f"the stage has {voltage} voltage sources, not a pair whose"
                                " transfers have opposite signs, that its rejection is"
                                " measured between", amp.origin, (amp.ref,))
        return
    options = SpreadOptions(default_tolerance=settings["default_tolerance"],
                            max_corner_resistors=int(settings["max_corner_resistors"]),
                            samples=int(settings["samples"]), seed=int(settings["seed"]))
    solver, refs, tolerances, assumed, worst = rejection_spread(figures, pair, options)
    required = stage.require.cmrr
    if required is not None:
        limit, severity, against = required, Severity.ERROR, "the required"
    else:
        limit, severity = 10 ** (settings["min_cmrr_db"] / 20), Severity.WARNING
        against = "the default minimum"
    limit_db = _db(limit)
    if reaches(worst.cmrr, limit):
        return
    share = solver.share_rejecting(refs, tolerances, limit, options) \
        if view.fixes_wanted else None  # for the reader; a re-check reads findings alone
    listed = ", ".join(f"{r} {format_si(tolerances[r], '%')}" for r in refs)
    how = ("at the worst corner" if worst.exact else
           f"at the worst of {int(settings['samples'])} Monte Carlo boards"
           if worst.method == MONTE_CARLO else method_text(worst, int(settings["samples"])))
    gains = (f"differential gain {worst.differential:.4g}, common-mode gain"
             f" {worst.common:.3g}")
    nominal = ("infinite" if math.isinf(solver.nominal_cmrr)
               else f"{_db(solver.nominal_cmrr):.1f} dB")
    message = (f"{amp.ref} (difference) rejects common-mode signals by only"
               f" {_db(worst.cmrr):.1f} dB ({format_gain(worst.cmrr, 3)}) {how} of its resistors"
               f" ({listed}; {gains}), below {against} {limit_db:.1f} dB; nominal"
               f" {nominal}"
               + (f"; {share * 100:.1f} % of {int(settings['samples'])} Monte Carlo boards"
                  " (uniform) reach it" if share is not None else "")
               + method_note(worst))
    if assumed:
        message += (f"; {', '.join(assumed)} {'has' if len(assumed) == 1 else 'have'} no"
                    f" tolerance, {format_si(settings['default_tolerance'], '%')} assumed"
                    " (common practice)")
    yield view.finding(message, amp.origin, elements=(amp.ref,) + tuple(refs),
                       severity=severity, measured=_db(worst.cmrr), limit=limit_db,
                       unit="dB", suggestion=lambda: _suggest(solver, refs, tolerances, limit,
                                                              options),
                       cmrr_ratio=worst.cmrr, share_within=share,
                       exact_corners=worst.exact, assumed_tolerance=list(assumed),
                       **({} if worst_case_record(worst) is None
                          else {"worst_case": worst_case_record(worst)}),
                       **view.answers("cmrr"))


def _suggest(solver, refs, tolerances, limit, options) -> Suggestion:
    if refs:
        loosest = max(tolerances[r] for r in refs)
        for step in reversed(MATCH_STEPS):
            if step >= loosest * (1 - 1e-9):
                continue
            tighter = {r: min(tolerances[r], step) for r in refs}
            worst = solver.worst_rejection(refs, tighter, options)
            if reaches(worst.cmrr, limit):
                changed = [r for r in refs if tolerances[r] > step * (1 + 1e-9)]
                kept = [r for r in refs if r not in changed]
                also = f" ({', '.join(kept)} already at or below it)" if kept else ""
                return Suggestion(
                    f"use matched {format_si(step, '%')} resistors for {', '.join(changed)}"
                    f"{also}: the solved worst corner then rejects {_db(worst.cmrr):.1f} dB"
                    f" ({format_gain(worst.cmrr, 3)}), reaching {_db(limit):.1f} dB",
                    value=step, unit="%", changes=(SetTolerance(tuple(changed), step),))
    nominal = ("infinite" if math.isinf(solver.nominal_cmrr)
               else f"{_db(solver.nominal_cmrr):.1f} dB")
    return Suggestion(f"even matched 0.1 % resistors do not reach {_db(limit):.1f} dB (nominal"
                      f" {nominal}): make the two resistor ratios equal, including the"
                      " sources' impedances, and use a matched resistor network or an"
                      " instrumentation amplifier")


def _db(ratio: float) -> float:
    return math.inf if math.isinf(ratio) else 20 * math.log10(ratio)
