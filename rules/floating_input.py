"""Op-amp inputs with no DC path to a defined potential."""

from __future__ import annotations

import math
from dataclasses import replace

from checker.changes import AddPassive, like_tolerance
from checker.engine import rule
from checker.findings import Suggestion
from checker.model import Passive
from checker.preferred import at_least
from checker.units import format_si


@rule("floating-input", "error",
      "An op-amp input has no DC path to a defined potential: its bias current has"
      " nowhere to go.",
      default_bias_ohm=1e6, source_ratio=10.0, corner_decades=1.0)
def floating_input(view):
    """
    What it checks:
        The solver's structural check lists every net with no conductive path to
        ground at DC (only capacitors, or only op-amp inputs, touch it). An op-amp
        input on such a net is an error, reported at the op-amp: a coupling capacitor
        into a non-inverting input with nothing to ground behind it is the usual case.

    Why it matters:
        An input draws its bias current, however small, and with no DC path that
        current charges the capacitor until the input reaches a rail: the stage works
        on the bench for a while, then drifts off and saturates. The analysis itself
        has to tie such a net with a tiny conductance, so every DC figure of the stage
        is meaningless until the input is biased.

    How the fix is computed:
        For an inverting input with a capacitor to the output (a charge amplifier),
        a resistor across that capacitor, whose corner 1/(2 pi R C) lies
        `corner_decades` decades below the band (the solver then confirms negative
        feedback at DC). Otherwise a bias resistor from the input to ground on a split
        supply, or to mid-supply
        on a single supply (to a supply net near the middle where the stage has one,
        else a divider of two resistors of twice the value from the rails, whose
        Thevenin resistance is the value). The value is the largest of:
        `source_ratio` times the source's impedance (so the resistor does not load
        the source), the value that puts the high-pass corner 1/(2 pi R C) formed with
        the coupling capacitor `corner_decades` decades below the source's band, and
        otherwise `default_bias_ohm`; rounded up to E24. The rule adds it to a copy
        of the stage and checks with the solver that the input then has a DC path.
        A resistor that small loads the source; where the re-check with every rule
        finds that it costs a requirement, ten or a hundred times the value is offered
        instead (the high-pass corner only moves lower).

    Sources:
        Bias current needs a DC return: R. Mancini (ed.), Op Amps for Everyone,
        chapter on single-supply and AC-coupled circuits. High-pass corner of a
        coupling capacitor 1/(2 pi R C) and the decade of margin: common practice.
        1 MOhm as a default bias resistor: common practice.

    Passes:
        (stage hydrophone-buffer (ground gnd) (supply vcc 5V) (supply vee -5V)
          (opamp U1 (part cmos-rrio) (in+ pos) (in- out) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in pos 100n) (resistor R1 pos gnd 1M)
          (source in (amplitude 100mV) (band 10Hz 10kHz) (impedance 1k))
          (load out (resistance 10k)))

    Fails:
        (stage hydrophone-buffer (ground gnd) (supply vcc 5V) (supply vee -5V)
          (opamp U1 (part cmos-rrio) (in+ pos) (in- out) (out out) (v+ vcc) (v- vee))
          (capacitor C1 in pos 100n)
          (source in (amplitude 100mV) (band 10Hz 10kHz) (impedance 1k))
          (load out (resistance 10k)))
    """
    stage, figures = view.stage, view.figures
    floating = figures.floating_nets
    if not floating:
        return
    for opamp in stage.opamps:
        pins = [("in+", opamp.in_pos)]
        if opamp.in_neg != opamp.in_pos:
            pins.append(("in-", opamp.in_neg))
        for pin, net in pins:
            if net not in floating:
                continue
            suggestion: Suggestion | list[Suggestion]
            if pin == "in-" and _feedback_capacitance(stage, opamp):
                suggestion, details = _feedback_path(view, opamp)
            else:
                first, details = _suggest(view, opamp, net)
                suggestion = [first] + _larger(view, opamp, net, first)
            yield view.finding(
                f"{opamp.ref} {pin} (net {net}) has no DC path to a defined potential:"
                f" only capacitors or op-amp inputs touch it, so its bias current charges"
                f" it to a rail", opamp.origin, elements=(opamp.ref,),
                suggestion=suggestion, pin=pin, net=net, **details)


def _feedback_capacitance(stage, opamp) -> float:
    return sum(p.value for p in stage.capacitors() if set(p.nets) == {opamp.in_neg, opamp.out})


def _feedback_path(view, opamp) -> tuple[Suggestion, dict]:
    """A resistor across the feedback capacitor: a DC path that also closes the loop."""
    stage, settings = view.stage, view.settings
    farads = _feedback_capacitance(stage, opamp)
    lows = [s.band_low_hz for s in stage.sources if s.band_low_hz]
    if lows:
        corner = min(lows) / 10 ** settings["corner_decades"]
        ohms = at_least(1 / (2 * math.pi * corner * farads), "E24")
        reason = (f"its corner with the {format_si(farads, 'F')} feedback capacitance at"
                  f" {format_si(corner, 'Hz')}, below the band")
    else:
        ohms = at_least(settings["default_bias_ohm"], "E24")
        reason = "the default bias resistance"
    added = _resistor(next(_free_designators(stage)), opamp.in_neg, opamp.out, ohms, stage)
    solved = view.reanalyse(replace(stage, passives=stage.passives + (added,)))
    closed = solved.loops[opamp.ref].feedback == "negative"
    check = ("the solver then finds negative feedback at DC" if closed else
             "the solver still finds no negative feedback at DC: look for another break")
    text = (f"put {format_si(ohms, 'Ω')} (E24) across the feedback capacitor, from"
            f" {opamp.in_neg} to {opamp.out}: {reason}; {check}")
    details = {"bias": {added.ref: {"nets": list(added.nets), "ohms": ohms}}}
    return Suggestion(text, value=ohms, unit="Ω", element=added.ref,
                      changes=(_adding(added, stage),)), details


def _larger(view, opamp, net: str, first: Suggestion) -> list[Suggestion]:
    """Bias resistors ten and a hundred times larger, for the engine to offer where the
    first loads the source enough to cost a requirement (the corner only moves lower)."""
    ohms = first.value
    assert ohms is not None  # _suggest always gives the resistor's value
    return [_suggest(view, opamp, net, at_least(ohms * factor, "E24"),
                     f"{factor}× the smallest value that fits, so it loads the source"
                     f" {factor}× less")[0]
            for factor in (10, 100) if ohms * factor <= 1e9]


def _suggest(view, opamp, net: str, chosen: float | None = None, why: str | None = None
             ) -> tuple[Suggestion, dict]:
    stage, settings = view.stage, view.settings
    reasons = []
    candidates = []
    for source in stage.sources:
        coupling = [p for p in stage.capacitors() if net in p.nets
                    and p.other(net) == source.net]
        if source.impedance_ohm:
            candidates.append(settings["source_ratio"] * source.impedance_ohm)
            reasons.append(f"{format_si(candidates[-1], 'Ω')} ({settings['source_ratio']:g}×"
                           f" the {format_si(source.impedance_ohm, 'Ω')} of {source.name})")
        if coupling and source.band_low_hz:
            farads = sum(p.value for p in coupling)
            corner = source.band_low_hz / 10 ** settings["corner_decades"]
            candidates.append(1 / (2 * math.pi * corner * farads))
            reasons.append(f"{format_si(candidates[-1], 'Ω')} (a {format_si(corner, 'Hz')}"
                           f" corner with {coupling[0].ref})")
    if not candidates:
        candidates.append(settings["default_bias_ohm"])
        reasons.append(f"{format_si(candidates[-1], 'Ω')} (the default)")
    ohms = at_least(max(candidates), "E24") if chosen is None else chosen
    rails = stage.rail_voltages
    low, high = rails[opamp.v_neg], rails[opamp.v_pos]
    middle = (low + high) / 2
    free = _free_designators(stage)
    if low < 0.0 < high:
        added = [_resistor(next(free), net, stage.ground, ohms, stage)]
        where = f"{format_si(ohms, 'Ω')} (E24) from {net} to {stage.ground}"
        level = 0.0
    else:
        near = [n for n, v in rails.items()
                if abs(v - middle) <= 0.1 * (high - low) and n not in (opamp.v_pos,
                                                                       opamp.v_neg)]
        if near:
            target = min(near, key=lambda n: abs(rails[n] - middle))
            added = [_resistor(next(free), net, target, ohms, stage)]
            where = f"{format_si(ohms, 'Ω')} (E24) from {net} to {target}"
            level = rails[target]
        else:
            half = at_least(2 * ohms, "E24")
            added = [_resistor(next(free), net, opamp.v_pos, half, stage),
                     _resistor(next(free), net, opamp.v_neg, half, stage)]
            where = (f"a divider to mid-supply: {format_si(half, 'Ω')} (E24) from {net} to"
                     f" {opamp.v_pos} and {format_si(half, 'Ω')} from {net} to {opamp.v_neg}")
            level = middle
    variant = replace(stage, passives=stage.passives + tuple(added))
    solved = view.reanalyse(variant)
    still = solved.floating_nets
    check = ("the solver then finds a DC path" if net not in still else
             "the solver still finds no DC path: look for another break")
    because = why or f"the largest of {', '.join(reasons)}, rounded up"
    text = (f"add a bias resistor: {where}, biasing the input at {format_si(level, 'V')};"
            f" the value is {because}; {check}")
    details = {"bias": {p.ref: {"nets": list(p.nets), "ohms": p.value} for p in added}}
    return Suggestion(text, value=ohms, unit="Ω", element=added[0].ref,
                      changes=tuple(_adding(p, stage) for p in added)), details


def _adding(passive: Passive, stage) -> AddPassive:
    return AddPassive(passive.ref, passive.kind, passive.net_a, passive.net_b, passive.value,
                      like_tolerance(stage))


def _resistor(ref: str, net_a: str, net_b: str, ohms: float, stage) -> Passive:
    return Passive(ref=ref, kind="resistor", net_a=net_a, net_b=net_b, value=ohms,
                   origin=stage.origin)


def _free_designators(stage):
    used = {p.ref for p in stage.passives} | {o.ref for o in stage.opamps}
    number = 1
    while True:
        ref = f"R{number}"
        if ref not in used:
            yield ref
        number += 1
