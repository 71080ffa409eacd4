"""The pole that the feedback network forms with the op-amp's input capacitance."""

from __future__ import annotations

import math
from dataclasses import replace

from checker.analysis.mna import SingularCircuit
from checker.analysis.search import capacitor, element_search
from checker.analysis.topology import classify
from checker.analysis.updates import margins_with_admittances
from checker.changes import AddPassive, RemovePassive, SetValue
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import below, reaches
from checker.preferred import at_least, ladder
from checker.units import format_si
from checker.variants import inverting_input_capacitance_removed, with_capacitor


@rule("feedback-pole", "warning",
      "The feedback resistance and the op-amp's input capacitance form a pole that eats"
      " phase margin.",
      error_below_deg=30.0, warn_below_deg=45.0, target_deg=60.0)
def feedback_pole(view):
    """
    What it checks:
        For every op-amp with negative feedback, the phase margin of its solved loop
        gain (return ratio), with the part's input capacitance (common-mode plus
        differential) and the configured stray capacitance at the inverting input. It
        flags a margin under the stage's `phase-margin` requirement, or without one
        under `warn_below_deg` (warning), and under `error_below_deg` (error), when the
        capacitance at the inverting input is the cause: with it removed (the part's
        input capacitance, the stray, a sensor's capacitance and capacitors from that
        net to a rail), the margin would pass.

    Why it matters:
        The resistance seen at the inverting input (Rf||Rg, or the feedback resistor
        and the sensor in a transimpedance stage) and the input capacitance make a pole
        in the feedback factor, fp = 1/(2 pi (Rf||Rg) Cin). Near the loop's crossover
        it adds phase lag: the stage rings, peaks, or oscillates. Large feedback
        resistors and fast parts make it worse. Because the check reads the solved
        loop, it applies alike to inverting, non-inverting, T-network and
        transimpedance stages.

    How the fix is computed:
        A capacitor Cf across the feedback path puts a zero on the pole. The
        neutralising value is Cf = Rg*Cin/Rf, rounded up to the E12 series; the rule
        adds it to a copy of the stage, solves again and reports the margin it
        restores. Where the neutralising value would cut the bandwidth below the
        requirement or the source's band (a transimpedance stage with a very large
        Rg), it instead searches every E12 value from 0.1 pF to 10 µF, all predicted
        at once from one solve (a capacitor is a rank-one change: Sherman-Morrison
        identity) and the smallest predicted to reach `target_deg` confirmed exactly;
        the margin falls again at large values, so no value is skipped on the
        assumption that a larger one does better. Where none reaches the target, the
        best reachable margin and its value are given.

    Sources:
        R. Mancini (ed.), Op Amps for Everyone, chapter on stability (feedback pole
        and the neutralising capacitor Cf = Rg*Cin/Rf). Phase-margin targets of 45
        degrees minimum and 60 preferred: common practice.

    Passes:
        (stage turbidity-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part jfet-input) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k)))

    Fails:
        (stage turbidity-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part jfet-input) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 1M) (resistor R2 fb out 10M)
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    for opamp in stage.opamps:
        part = opamp.part
        loop = figures.loops[opamp.ref]
        if not loop.negative_somewhere:  # integrators included: their loop closes above DC
            continue
        unknown_cin = (part.input_capacitance_cm_f is None
                       and part.input_capacitance_diff_f is None)
        if unknown_cin and part.gbw_hz is None:
            yield _no_input_capacitance(view, opamp)
            continue
        if part.gbw_hz is None:
            yield view.cannot_check(f"the phase margin of {opamp.ref}",
                                    f"part {part.name} gives no GBW", opamp.origin, (opamp.ref,))
            continue
        margin = loop.phase_margin_deg
        warn = _warn_limit(stage, settings)
        if margin is None or reaches(margin, warn):
            if unknown_cin:  # the part's own capacitance could still cost the margin
                yield _no_input_capacitance(view, opamp)
            continue
        # An unknown part capacitance only adds to what is there: a margin that already
        # fails with the known capacitance (a sensor's, the stray) fails for certain.
        stray = view.figures.options.stray_capacitance_f
        bare_margin = margins_with_admittances(
            view.figures, opamp.ref, lambda f, ref=opamp.ref: inverting_input_capacitance_removed(
                stage, ref, stray, f)).phase_margin_deg
        if bare_margin is not None and below(bare_margin, warn):
            continue  # something else costs the margin (load, compensation): other rules
        if not 0 < figures.inverting_input[opamp.ref][0] < math.inf:
            yield view.cannot_check(f"the feedback pole of {opamp.ref}", "the resistance at"
                                    " its inverting input is not a positive finite value (no"
                                    " resistive path there, or another output drives that"
                                    " net)", opamp.origin, (opamp.ref,))
            continue
        yield _finding(view, opamp, margin, bare_margin, warn)


def _degrees(margin: float | None) -> str:
    """A margin for a message; None where the loop no longer crosses over."""
    return "no crossover" if margin is None else f"{margin:.0f}°"


def _no_input_capacitance(view, opamp):
    return view.cannot_check(f"the feedback pole of {opamp.ref}",
                             f"part {opamp.part.name} gives no input capacitance",
                             opamp.origin, (opamp.ref,))


def _warn_limit(stage, settings) -> float:
    """The stage's phase-margin requirement where it states one, else the setting."""
    if stage.require.phase_margin_deg is not None:
        return stage.require.phase_margin_deg
    return settings["warn_below_deg"]


def _finding(view, opamp, margin, bare_margin, warn):
    stage, figures, settings = view.stage, view.figures, view.settings
    resistance, capacitance, pole_hz = figures.inverting_input[opamp.ref]
    topology = classify(stage, opamp)
    feedback_resistors = [stage.element(ref) for ref in topology.feedback_elements
                          if stage.element(ref).kind == "resistor"]
    severity = Severity.ERROR if below(margin, settings["error_below_deg"]) else Severity.WARNING
    where = feedback_resistors[0] if feedback_resistors else opamp
    elements = (opamp.ref,) + tuple(r.ref for r in feedback_resistors)
    message = (f"{opamp.ref} ({topology.name}) has {margin:.1f}° phase margin: the"
               f" {format_si(resistance, 'Ω')} at its inverting input and"
               f" {format_si(capacitance, 'F')} of capacitance there put a feedback pole at"
               f" {format_si(pole_hz, 'Hz')}, near the {format_si(figures.loops[opamp.ref].crossover_hz, 'Hz')}"
               f" crossover (without that capacitance: {bare_margin:.0f}°)")
    def suggestion():
        return _suggest(view, opamp, feedback_resistors, capacitance, warn)

    return view.finding(message, where.origin, elements=elements, severity=severity,
                        measured=margin, limit=warn, unit="°",
                        suggestion=suggestion, feedback_pole_hz=pole_hz,
                        topology=topology.name, loop=opamp.ref, **view.answers("phase-margin"))


def _capacitor_changes(opamp, present, ref: str, farads: float) -> tuple:
    """Cf across the feedback path: the capacitor there raised (any second one taken
    out), or a new one added."""
    if present:
        return (SetValue(present[0].ref, farads),) + tuple(RemovePassive(p.ref)
                                                           for p in present[1:])
    return (AddPassive(ref, "capacitor", opamp.out, opamp.in_neg, farads),)


def _suggest(view, opamp, feedback_resistors, capacitance, warn):
    stage, settings = view.stage, view.settings
    if not feedback_resistors:
        return Suggestion("reduce the resistance at the inverting input or choose a part"
                          " with less input capacitance")
    rf = feedback_resistors[0].value
    if len(feedback_resistors) > 1:
        rf = 1 / sum(1 / r.value for r in feedback_resistors)
    existing = sum(p.value for p in stage.capacitors() if set(p.nets) == {opamp.out, opamp.in_neg})
    present = [p for p in stage.capacitors() if set(p.nets) == {opamp.out, opamp.in_neg}]
    ref = present[0].ref if present else _free_designator(stage)

    def solved(farads):
        variant = with_capacitor(stage, ref, opamp.out, opamp.in_neg, farads)
        result = view.reanalyse(variant)
        return result.loops[opamp.ref].phase_margin_deg, result

    needed_band = stage.require.bandwidth_hz or max(
        (s.band_high_hz or 0.0 for s in stage.sources), default=0.0)
    rg = _ground_resistance(view, opamp, feedback_resistors)
    if rg is not None:
        neutral = rg * capacitance / rf
        chosen = at_least(max(neutral, existing * 1.0001) if existing else neutral, "E12")
        margin, result = solved(chosen)
        band_ok = not needed_band or not result.sources or (
            (result.sources[0].bandwidth_high_hz or float("inf")) >= needed_band)
        if margin is not None and margin >= warn and band_ok:
            return Suggestion(
                f"{_placing(stage, opamp, chosen, ref)} across {feedback_resistors[0].ref}:"
                f" Cf >= Rg*Cin/Rf ="
                f" {format_si(neutral, 'F')}; solved phase margin with it {margin:.0f}°",
                value=chosen, unit="F", element=ref,
                changes=_capacitor_changes(opamp, present, ref, chosen))
    start = max(existing * 1.0001, 0.1e-12)
    values = ladder(start, 10e-6, "E12")
    target = max(settings["target_deg"], warn)
    found = element_search(view.figures, opamp.ref, opamp.out, opamp.in_neg, values,
                           lambda value, s: capacitor(value - existing, s), target)
    if found is None:
        return Suggestion("no feedback capacitor closes the loop: lower the feedback"
                          " resistance or choose a slower part")
    margin, result = solved(found.value)
    bandwidth = result.sources[0].bandwidth_high_hz if result.sources else None
    cost = f"; bandwidth then {format_si(bandwidth, 'Hz')}" if bandwidth else ""
    changes = _capacitor_changes(opamp, present, ref, found.value)
    if found.reaches:
        return Suggestion(
            f"{_placing(stage, opamp, found.value, ref)}: the smallest E12 value whose solved"
            f" phase margin reaches {target:.0f}° ({margin:.0f}°{cost})",
            value=found.value, unit="F", element=ref, changes=changes)
    return Suggestion(
        f"no feedback capacitor reaches {target:.0f}°; the best is to"
        f" {_placing(stage, opamp, found.value, ref)}, for {margin:.0f}°{cost}: the rest of"
        " the margin is lost elsewhere (the load, the part's second pole); lower the feedback"
        " resistance or choose a slower part",
        value=found.value, unit="F", element=ref, changes=changes)


def _ground_resistance(view, opamp, feedback_resistors) -> float | None:
    """Rg of the neutralising formula: the DC resistance from the inverting input to AC
    ground with the feedback resistors taken out (the other op-amps active), so neither
    Rf nor the op-amp's own output resistance hides in it; None where nothing else
    conducts (a follower, a transimpedance stage without a shunt)."""
    stage = view.stage
    removed = {r.ref for r in feedback_resistors}
    copy = replace(stage, passives=tuple(p for p in stage.passives if p.ref not in removed))
    try:
        rg = view.reanalyse(copy).resistance_at(opamp.ref, opamp.in_neg)
    except (SingularCircuit, ValueError):
        return None
    return rg if math.isfinite(rg) and rg > 0 else None


def _placing(stage, opamp, farads: float, ref: str) -> str:
    """'raise C1 to 820 fF' where a capacitor is there already, else 'put ... from ... to'."""
    existing = [p for p in stage.capacitors() if set(p.nets) == {opamp.out, opamp.in_neg}]
    if existing:
        return f"raise {existing[0].ref} to {format_si(farads, 'F')} (E12)"
    return f"put {format_si(farads, 'F')} ({ref}, E12) from {opamp.out} to {opamp.in_neg}"


def _free_designator(stage) -> str:
    used = {p.ref for p in stage.passives}
    n = 1
    while f"C{n}" in used:
        n += 1
    return f"C{n}"
