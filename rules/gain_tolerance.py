"""The stage gain's spread over the resistors' tolerances, against its requirement."""

from __future__ import annotations

from checker.analysis.signal import stage_signals
from checker.analysis.spread import (MONTE_CARLO, SpreadOptions, method_note, method_text,
                                     worst_case_record)
from checker.changes import SetTolerance
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import within
from checker.requirements import gain_spread
from checker.units import format_si

TOLERANCE_STEPS = (0.001, 0.0025, 0.005, 0.01, 0.02, 0.05)  # stock resistor tolerances


@rule("gain-tolerance", "warning",
      "Over the resistors' tolerances the gain can leave its required tolerance band.",
      default_tolerance=0.05, max_corner_resistors=10, samples=10000, seed=1)
def gain_tolerance(view):
    """
    What it checks:
        In a stage that states both `gain` and `gain-tolerance`, the signal's gain
        from the source itself (its EMF, behind its impedance) to the output, or a
        differential pair's Vout/(V1 - V2), for every combination of each resistor at
        the low and the high end of its tolerance (corner enumeration, each set
        solved by the analysis core). Resistors whose change does not move the gain
        are left out first. The worst corner must stay within the required band
        (|G/G_required - 1| <= gain-tolerance); it reads the same spread as the
        requirement's verdict. The gain is read at 0 Hz for a source with no band or
        a band from 0 Hz, else at its mid-band (as a magnitude with the sign of its
        real part). A Monte Carlo run (`samples`
        boards, each resistor uniform within its tolerance, seeded with `seed`)
        estimates the share of boards inside the band. A resistor without a
        tolerance is taken at `default_tolerance` and the message says so. With more
        than `max_corner_resistors` resistors that matter, the corners are not all
        solved: a first-order choice takes their place, the corner of the highest and
        of the lowest gain as the signs of the gain's sensitivities to each resistor
        choose it, checked at that corner (no single resistor's flip may make it
        worse, else those are flipped, a few rounds at most), and the worse of it and
        the Monte Carlo extremes is reported. The message says plainly that it is a
        first-order choice, not full enumeration, and whether the corner was
        verified; it is exact where the gain is monotonic in each resistor over
        its tolerance (the usual ratio of resistors), and can fall short where a
        sensitivity is near zero and changes sign.

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
        Worst-case analysis by corner enumeration, the first-order (sensitivity)
        choice of the worst corner and the uniform distribution for a tolerance
        band: common practice. A network function is bilinear in any one element
        (J. Vlach, K. Singhal, Computer Methods for Circuit Analysis and Design,
        2nd ed.), so at 0 Hz monotonic in each resistor. The rule of thumb that a ratio of two
        resistors of tolerance t is good to about 2t: common practice.

    Passes:
        (stage level-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part precision-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 0.1%)) (resistor R2 fb out 100k (tolerance 0.1%))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (gain -10) (gain-tolerance 1.5%)))

    Fails:
        (stage level-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part precision-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 1%)) (resistor R2 fb out 100k (tolerance 1%))
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (gain -10) (gain-tolerance 1.5%)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    required, band = stage.require.gain, stage.require.gain_tolerance
    if required is None or band is None or required == 0:
        return  # the requirement's verdict says why it cannot be checked
    if any(not figures.loops[o.ref].negative_somewhere for o in stage.opamps):
        return  # no closed loop, no closed-loop gain to spread: the verdict says so
    signals = [s for s in stage_signals(figures) if s.unit == "V/V"]
    if not signals:
        yield view.cannot_check("the gain tolerance", "the stage has no voltage source to"
                                " take a voltage gain from", stage.require.origin)
        return
    options = _options(settings)
    spreads = [gain_spread(figures, signal, options, required) for signal in signals]
    spread = max(spreads, key=lambda item: item.worst.error)
    worst, refs, tolerances = spread.worst, spread.refs, spread.tolerances
    if not refs or within(worst.error, band):
        return
    # the Monte Carlo share is for the reader; a fix's re-check reads findings alone
    share = spread.solver.share_within(refs, tolerances, required, band, options) \
        if view.fixes_wanted else None
    origin = max(refs, key=lambda r: spread.solver.sensitivity[r])
    listed = ", ".join(f"{r} {_percent(tolerances[r])}" for r in refs)
    corner = ", ".join(f"{r} {'+' if s > 0 else '-'}{_percent(tolerances[r])}"
                       for r, s in zip(refs, worst.signs))
    how = method_text(worst, int(settings["samples"]))
    message = (f"the gain from {spread.signal.label} is {spread.nominal:.4g} nominal, but over"
               f" the resistors' tolerances ({listed}) it reaches {worst.gain:.4g} {how}"
               + (f" ({corner})" if worst.method != MONTE_CARLO else "") +
               f", {_percent(worst.error)} from the required {required:.4g}, beyond"
               f" ±{_percent(band)}"
               + (f"; {_share_text(share, int(settings['samples']))}" if share is not None else "")
               + method_note(worst))
    if spread.assumed:
        message += (f"; {', '.join(spread.assumed)}"
                    f" {'has' if len(spread.assumed) == 1 else 'have'} no"
                    f" tolerance, {_percent(settings['default_tolerance'])} assumed"
                    " (common practice)")
    yield view.finding(message, stage.element(origin).origin, elements=tuple(refs),
                       measured=worst.error, limit=band, unit="%",
                       suggestion=lambda: _suggest(spread, required, band, options),
                       nominal_gain=spread.nominal, worst_gain=worst.gain,
                       share_within=share, exact_corners=worst.exact,
                       **_worst_case(worst),
                       assumed_tolerance=list(spread.assumed),
                       **view.answers("gain-tolerance"))


def _worst_case(worst) -> dict:
    """The ``worst_case`` detail (method, verified) where the corners were not all
    enumerated; nothing where they were (the finding as before)."""
    record = worst_case_record(worst)
    return {} if record is None else {"worst_case": record}


def _options(settings) -> SpreadOptions:
    return SpreadOptions(default_tolerance=settings["default_tolerance"],
                         max_corner_resistors=int(settings["max_corner_resistors"]),
                         samples=int(settings["samples"]), seed=int(settings["seed"]))


def _suggest(spread, required, band, options) -> Suggestion:
    refs, tolerances = spread.refs, spread.tolerances
    loosest = max(tolerances[r] for r in refs)
    for step in reversed(TOLERANCE_STEPS):
        if step >= loosest * (1 - 1e-9):
            continue
        tighter = {r: min(tolerances[r], step) for r in refs}
        worst = spread.solver.worst_gain(refs, tighter, required, options)
        if within(worst.error, band):
            changed = [r for r in refs if tolerances[r] > step * (1 + 1e-9)]
            kept = [r for r in refs if r not in changed]
            also = f" ({', '.join(kept)} already at or below it)" if kept else ""
            return Suggestion(
                f"use {_percent(step)} resistors for {', '.join(changed)}{also}: the solved"
                f" worst case is then {worst.gain:.4g} ({_percent(worst.error)} from"
                f" {required:.4g}, within ±{_percent(band)})",
                value=step, unit="%", changes=(SetTolerance(tuple(changed), step),))
    nominal_error = abs(spread.nominal / required - 1)
    return Suggestion(f"even 0.1 % resistors do not hold the gain within ±{_percent(band)}:"
                      f" the nominal gain {spread.nominal:.4g} is already"
                      f" {_percent(nominal_error)} from {required:.4g}; correct the"
                      " resistor ratio (or the source's loading) first")


def _share_text(share: float, samples: int) -> str:
    if share >= 1.0:
        return (f"all {samples} Monte Carlo boards (uniform) are within it: only boards near"
                " the extreme corners fail")
    return f"about {share * 100:.1f} % of {samples} Monte Carlo boards (uniform) are within it"


def _percent(fraction: float) -> str:
    return format_si(fraction, "%")
