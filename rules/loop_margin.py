"""Every loop's stability margins, whatever makes them small."""

from __future__ import annotations

import math

from checker.analysis.mna import SingularCircuit
from checker.analysis.search import capacitor, element_search
from checker.analysis.updates import margins_with_admittances
from checker.changes import AddPassive, SetValue, free_designator, like_tolerance
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import below, reaches
from checker.preferred import ladder
from checker.units import format_si
from checker.variants import (inverting_input_capacitance_removed, load_capacitance_removed,
                              with_ideal_opamp, without_passive, without_second_pole)


@rule("loop-margin", "warning",
      "An op-amp's loop has too little phase or gain margin, whatever the cause.",
      warn_below_deg=45.0, error_below_deg=30.0, min_gain_margin_db=6.0, target_deg=60.0)
def loop_margin(view):
    """
    What it checks:
        Every op-amp whose loop has negative feedback, at DC or only above it (an
        integrator with nothing across its capacitor, whose loop gain starts below 1):
        its return ratio's phase margin at the crossover, where |T| falls through 1,
        against the stage's `phase-margin` requirement or, without one,
        `warn_below_deg` (warning) and `error_below_deg` (error), and its gain margin
        against `min_gain_margin_db` (warning). Loops through several op-amps (a
        composite stage, an instrumentation amplifier, a two-op-amp filter) are judged at
        each op-amp's return ratio, which is taken with the whole network around it.
        The finding names what eats the margin, by solving the loop again with each
        cause taken out: the capacitance at the inverting input, the load's capacitance,
        the op-amp's second pole, each other op-amp in the loop (made ideal), each
        capacitor of the network. Where a rule for the cause itself (feedback-pole,
        load-isolation, stable-gain) reports the same loop, the engine keeps that
        finding and drops this one, so a loop is reported once.

    Why it matters:
        A loop with little phase margin rings on every step and peaks in its response;
        at none it oscillates. The usual causes have rules of their own, but a margin is
        eaten by whatever adds phase lag around the loop, and an op-amp inside another's
        loop, an RC in the network or a part's own second pole pass those rules by.

    How the fix is computed:
        A capacitor across the feedback resistor from the op-amp's inverting input to
        the output that feeds it (the stage's output for a composite loop) adds a zero
        that lifts the phase at the crossover. Every E12 value from 0.1 pF to 10 µF is
        predicted at once from one solve (a capacitor is a rank-one change of the nodal
        matrix: Sherman-Morrison identity), and the smallest whose prediction reaches
        `target_deg` (or the requirement) is confirmed with the margin solved exactly;
        the margin need not rise with the value, so no value is skipped on that
        assumption. The bandwidth the fix costs is stated. Where no value reaches the
        target, the best reachable margin, the value that gives it and what limits it
        are given instead.

    Sources:
        Phase and gain margin of the return ratio (H. W. Bode, Network Analysis and
        Feedback Amplifier Design, 1945). At least 45 degrees of phase margin, 60
        preferred, and 6 dB of gain margin: common practice (from memory, K. Ogata,
        Modern Control Engineering, chapter on frequency-response analysis, which
        asks 30 to 60 degrees and more than 6 dB).

    Passes:
        (stage level-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (params (open-loop-gain 100000) (gbw 10MHz) (second-pole 50MHz))
            (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz))
          (load out (resistance 100k)))

    Fails:
        (stage level-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (params (open-loop-gain 100000) (gbw 10MHz) (second-pole 5MHz))
            (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    required = stage.require.phase_margin_deg
    warn = required if required is not None else settings["warn_below_deg"]
    failing = []
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if not loop.negative_somewhere or opamp.part.gbw_hz is None:
            continue  # open loops: the open-loop and swapped-inputs rules; no GBW: unknown
        margin, gain_margin = loop.phase_margin_deg, loop.margins.gain_margin_db
        if margin is None:
            yield view.cannot_check(f"the phase margin of {opamp.ref}",
                                    "its loop gain does not fall through 1 on the analysis"
                                    " grid", opamp.origin, (opamp.ref,))
            continue
        short_phase = below(margin, warn)
        short_gain = gain_margin is not None and below(gain_margin,
                                                        settings["min_gain_margin_db"])
        if short_phase or short_gain:
            failing.append((opamp, loop, short_phase, short_gain, _causes(view, opamp)))
    # One loop through several op-amps fails at each of them: report it once, at the
    # op-amp whose margin another op-amp inside its loop eats.
    inside: dict[str, str] = {}
    for opamp, _loop, _p, _g, causes in failing:
        for other in stage.opamps:
            if any(name == f"{other.ref} inside the loop" and reaches(value, warn)
                   for name, value in causes):
                inside.setdefault(other.ref, opamp.ref)
    for opamp, loop, short_phase, short_gain, causes in failing:
        if opamp.ref in inside and inside[opamp.ref] != opamp.ref and \
                any(item[0].ref == inside[opamp.ref] for item in failing):
            continue
        shared = sorted(ref for ref, outer in inside.items() if outer == opamp.ref
                        and any(item[0].ref == ref for item in failing))
        yield _finding(view, opamp, loop, short_phase, short_gain, causes, warn, shared)


def _finding(view, opamp, loop, short_phase, short_gain, causes, warn, shared):
    settings = view.settings
    margin, gain_margin = loop.phase_margin_deg, loop.margins.gain_margin_db
    severity = Severity.ERROR if (below(margin, settings["error_below_deg"])
                                  or margin <= 0) else Severity.WARNING
    limits = []
    if short_phase:
        limits.append(f"{margin:.1f}° of phase margin")
    if short_gain:
        limits.append(f"{gain_margin:.1f} dB of gain margin")
    under = []
    if short_phase:
        under.append(f"{warn:.3g}°")
    if short_gain:
        under.append(f"{settings['min_gain_margin_db']:.3g} dB")
    message = (f"{opamp.ref}'s loop has {' and '.join(limits)} at its"
               f" {format_si(loop.crossover_hz, 'Hz')} crossover, under"
               f" {' and '.join(under)}: {_cause_text(causes, warn)}")
    if shared:
        others = ", ".join(f"{ref} {view.figures.loops[ref].phase_margin_deg:.1f}°"
                           for ref in shared)
        message += f"; the same loop seen at {others}"
    target = max(settings["target_deg"], warn)
    return view.finding(
        message, opamp.origin, elements=(opamp.ref, *shared), severity=severity,
        measured=margin if short_phase else gain_margin,
        limit=warn if short_phase else settings["min_gain_margin_db"],
        unit="°" if short_phase else "dB",
        suggestion=lambda: _compensation(view, opamp, target),
        loop=opamp.ref, causes={name: value for name, value in causes},
        gain_margin_db=gain_margin, **view.answers("phase-margin"))


def _causes(view, opamp) -> list[tuple[str, float]]:
    """(cause, the margin without it), most restoring first."""
    stage, figures = view.stage, view.figures
    found = []

    def margin_of(stage_copy) -> float | None:
        try:
            return view.margins_of(stage_copy).margins_of(opamp.ref).phase_margin_deg
        except (SingularCircuit, KeyError, ValueError):
            return None

    stray = figures.options.stray_capacitance_f
    bare = margins_with_admittances(figures, opamp.ref, lambda f: inverting_input_capacitance_removed(
        stage, opamp.ref, stray, f)).phase_margin_deg
    found.append((f"the capacitance at {opamp.ref}'s inverting input", bare))
    if any(load.capacitance_f for load in stage.loads):
        found.append(("the load's capacitance", margins_with_admittances(
            figures, opamp.ref, lambda f: load_capacitance_removed(stage, f)).phase_margin_deg))
    if opamp.part.second_pole_hz:
        found.append((f"{opamp.ref}'s second pole"
                      f" ({format_si(opamp.part.second_pole_hz, 'Hz')})",
                      margin_of(without_second_pole(stage, opamp.ref))))
    for other in stage.opamps:
        if other.ref != opamp.ref:
            found.append((f"{other.ref} inside the loop", margin_of(with_ideal_opamp(stage,
                                                                                 other.ref))))
    for part in stage.capacitors():
        found.append((f"{part.ref} ({format_si(part.value, 'F')}) in the network",
                      margin_of(without_passive(stage, part.ref))))
    base = figures.loops[opamp.ref].phase_margin_deg
    useful = [(name, value) for name, value in found
              if value is not None and value > base + 1.0]
    return sorted(useful, key=lambda item: -item[1])


def _cause_text(causes, warn: float) -> str:
    if not causes:
        return "no single part of the network or the op-amp model restores it alone"
    restoring = [(name, value) for name, value in causes if reaches(value, warn)]
    if restoring:
        name, value = restoring[0]
        return f"{name} eats it (without it {value:.0f}°)"
    listed = "; ".join(f"without {name} {value:.0f}°" for name, value in causes[:3])
    return f"several causes share it, none restores it alone ({listed})"


def _compensation(view, opamp, target: float):
    """A capacitor across the feedback resistor, found over every E12 value."""
    stage, figures = view.stage, view.figures
    outputs = {o.out for o in stage.opamps} | {stage.output_net}
    paths = [p for p in stage.resistors() if opamp.in_neg in p.nets
             and p.other(opamp.in_neg) in outputs]
    advice = Suggestion(f"lower {opamp.ref}'s loop gain at the crossover (a larger noise"
                        " gain) or take the phase lag out of the loop (a faster part, less"
                        " capacitance on its nodes)", element=opamp.ref)
    best = None
    for resistor in paths:
        other = resistor.other(opamp.in_neg)
        present = [c for c in stage.capacitors() if set(c.nets) == {opamp.in_neg, other}]
        existing = sum(c.value for c in present)
        values = ladder(max(existing * 1.0001, 0.1e-12), 10e-6, "E12")
        found = element_search(figures, opamp.ref, opamp.in_neg, other, values,
                               lambda value, s, existing=existing: capacitor(value - existing, s),
                               target)
        if found is not None and (best is None or (found.reaches, -found.value) >
                                  (best[0].reaches, -best[0].value)):
            best = (found, resistor, other, present)
    if best is None:
        return advice
    found, resistor, other, present = best
    ref = present[0].ref if present else free_designator(stage, "C")
    changes = (SetValue(ref, found.value),) if present else \
        (AddPassive(ref, "capacitor", opamp.in_neg, other, found.value,
                    like_tolerance(stage, "capacitor")),)
    where = (f"raise {ref} to {format_si(found.value, 'F')} (E12)" if present else
             f"put {format_si(found.value, 'F')} ({ref}, E12) from {opamp.in_neg} to {other}"
             f" across {resistor.ref}")
    cost = _bandwidth_cost(view, changes)
    if found.reaches:
        text = (f"{where}: the smallest E12 value whose solved phase margin reaches"
                f" {target:.0f}° ({found.margin_deg:.0f}°){cost}")
        return [Suggestion(text, value=found.value, unit="F", element=ref, changes=changes),
                advice]
    text = (f"no capacitor across {resistor.ref} reaches {target:.0f}°: the best is {where}"
            f" at {found.margin_deg:.0f}°{cost}; the rest of the lag is set elsewhere in the"
            " loop (see the causes)")
    return [Suggestion(text, value=found.value, unit="F", element=ref, changes=changes), advice]


def _bandwidth_cost(view, changes) -> str:
    from checker.changes import apply_changes

    if not view.figures.sources:
        return ""
    try:
        before = view.figures.sources[0].bandwidth_high_hz
        after = view.reanalyse(apply_changes(view.stage, changes)).sources[0].bandwidth_high_hz
    except SingularCircuit:
        return ""
    if before is None or after is None or not math.isfinite(after):
        return ""
    return (f"; bandwidth then {format_si(after, 'Hz')} (now {format_si(before, 'Hz')})")
