"""A decompensated op-amp run at a noise gain below its minimum stable gain."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from checker.analysis.topology import classify
from checker.changes import AddPassive, like_tolerance
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import below, reaches
from checker.model import Passive
from checker.preferred import at_least, ladder
from checker.units import format_si


@rule("stable-gain", "error",
      "A decompensated op-amp runs at a noise gain below its minimum stable gain where its"
      " loop crosses over.",
      zero_below_crossover=10.0)
def stable_gain(view):
    """
    What it checks:
        For every op-amp whose part states a minimum stable gain (a decompensated
        part), the magnitude of the solved noise gain 1/beta at the frequency where its
        loop gain crosses 1 (log-log interpolation on the analysis grid). Below the
        minimum stable gain it is flagged: a follower, an integrator, or a feedback
        capacitor that brings the noise gain down towards 1 at high frequency all do
        this, though their gain at DC may look high. Where the part gives no GBW (no
        crossover), the check still passes a noise gain that stays above the minimum
        at every frequency, and otherwise says it could not check. A part that states
        no minimum stable gain is taken as stable at unity gain (the format gives the
        parameter for decompensated parts only).

    Why it matters:
        A decompensated part buys bandwidth and slew rate by moving its second pole
        close to where a unity-gain loop would cross over; the maker promises a usable
        phase margin only when the feedback factor keeps the crossover low, that is at
        a noise gain of at least the stated minimum. Below it the loop rings or
        oscillates. What counts is the noise gain at the crossover, not the signal gain
        in the band.

    How the fix is computed:
        Raise the noise gain at high frequency without touching the signal gain: a
        resistor Rs in series with a capacitor Cs from the inverting input to the
        non-inverting input (an AC ground in an inverting stage). The rule tries the
        E24 values of Rs from ten times the feedback resistor down and keeps the
        largest (the least extra noise) whose solved noise gain at the new crossover
        reaches the minimum; Cs puts the RC zero `zero_below_crossover` times below the
        crossover a single-pole part would have at the minimum gain (GBW / minimum
        gain), rounded up to E12. Where there is no feedback resistor (a follower with
        its output tied to in-, an integrator), a unity-stable part is the fix.

    Sources:
        Minimum stable gain of decompensated op-amps and noise-gain shaping with a
        series RC across the inputs: common practice (R. Mancini (ed.), Op Amps for
        Everyone, 2nd ed. (Newnes, 2003), stability chapter, on noise gain and the
        feedback factor).

    Passes:
        (stage doppler-echo-gain (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part decomp-bipolar-g5) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 10k)
          (source in (amplitude 50mV) (band 10kHz 500kHz) (impedance 50))
          (load out (resistance 10k)))

    Fails:
        (stage doppler-echo-gain (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part decomp-bipolar-g5) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 1k)
          (source in (amplitude 50mV) (band 10kHz 500kHz) (impedance 50))
          (load out (resistance 10k)))
    """
    stage, figures = view.stage, view.figures
    for opamp in stage.opamps:
        minimum = opamp.part.min_stable_gain
        if minimum is None:
            continue
        loop = figures.loops[opamp.ref]
        if not (loop.feedback == "negative" or (loop.feedback == "none"
                                                and loop.closes_anywhere)):
            continue  # without negative feedback: the open-loop rule
        crossover = _crossover(figures, opamp.ref)
        if crossover is None:
            lowest = float(np.min(np.abs(loop.noise_gain)))
            if reaches(lowest, minimum):
                continue
            why = (f"part {opamp.part.name} gives no GBW" if opamp.part.gbw_hz is None
                   else "its loop gain never falls through 1 on the analysis grid")
            yield view.cannot_check(f"the noise gain of {opamp.ref} at crossover",
                                    f"{why}, and its noise gain falls to {lowest:.3g}"
                                    " somewhere", opamp.origin, (opamp.ref,))
            continue
        noise_gain = _noise_gain_at(figures, opamp.ref, crossover)
        if reaches(noise_gain, minimum):
            continue
        topology = classify(stage, opamp)
        dc = loop.noise_gain_dc
        at_dc = f" (at DC {dc:.3g})" if dc is not None and abs(dc - noise_gain) > 0.05 * dc \
            else ""
        suggestion, shaping = _suggest(view, opamp, topology, minimum)
        yield view.finding(
            f"{opamp.ref} ({topology.name}) uses part {opamp.part.name}, stable only at a"
            f" noise gain of {minimum:.3g} or more, but its noise gain where the loop"
            f" crosses over ({format_si(crossover, 'Hz')}) is {noise_gain:.3g}{at_dc}",
            opamp.origin, elements=(opamp.ref,), measured=noise_gain, limit=minimum,
            unit="V/V", suggestion=suggestion, crossover_hz=crossover, loop=opamp.ref,
            topology=topology.name, **shaping)


def _crossover(figures, ref: str) -> float | None:
    """The loop's crossover: the solved margins' where there is one, else the highest
    frequency where |T| falls through 1 on the grid (a loop with no DC path, such as
    an integrator, starts below 1)."""
    loop = figures.loops[ref]
    if loop.crossover_hz is not None:
        return loop.crossover_hz
    if next(o for o in figures.stage.opamps if o.ref == ref).part.gbw_hz is None:
        return None  # no GBW: the gain is flat, so |T| tells nothing about a crossover
    magnitude = np.log(np.maximum(np.abs(loop.loop_gain), np.finfo(float).tiny))  # 0: no log
    above = magnitude >= 0.0
    falls = np.nonzero(above[:-1] & ~above[1:])[0]
    if not falls.size:
        return None
    i = int(falls[-1])
    f = np.log(figures.frequencies_hz)
    fraction = magnitude[i] / (magnitude[i] - magnitude[i + 1])
    return float(math.exp(f[i] + fraction * (f[i + 1] - f[i])))


def _noise_gain_at(figures, ref: str, frequency: float) -> float:
    """|1/beta| at ``frequency``: the solved value at the loop's own crossover (refined
    there by the analysis core), else interpolated log-log on the grid."""
    margins = figures.loops[ref].margins
    if margins.crossover_hz == frequency and margins.noise_gain_at_crossover is not None:
        return margins.noise_gain_at_crossover
    magnitude = np.abs(figures.loops[ref].noise_gain)
    return float(np.exp(np.interp(math.log(frequency), np.log(figures.frequencies_hz),
                                  np.log(magnitude))))


def _free(stage, letter: str) -> str:
    used = {p.ref for p in stage.passives} | {o.ref for o in stage.opamps}
    n = 1
    while f"{letter}{n}" in used:
        n += 1
    return f"{letter}{n}"


def _with_shaping(stage, opamp, ohms: float, farads: float, refs: tuple[str, str]):
    """The stage with Rs from in- to a new net and Cs from there to in+."""
    middle = f"{opamp.in_neg}.shaping"
    added = (Passive(ref=refs[0], kind="resistor", net_a=opamp.in_neg, net_b=middle,
                     value=ohms, origin=stage.origin),
             Passive(ref=refs[1], kind="capacitor", net_a=middle, net_b=opamp.in_pos,
                     value=farads, origin=stage.origin))
    return replace(stage, passives=stage.passives + added)


def _suggest(view, opamp, topology, minimum: float) -> tuple[Suggestion, dict]:
    """The suggestion, and the shaping network's values (empty where there is none)."""
    stage = view.stage
    unity = f"or choose a unity-stable part for {opamp.ref}"
    resistors = [stage.element(r) for r in topology.feedback_elements
                 if stage.element(r).kind == "resistor"]
    if topology.tee_elements:
        resistors = resistors or [stage.element(topology.tee_elements[0])]
    if not resistors or opamp.part.gbw_hz is None:
        return Suggestion(f"choose a part for {opamp.ref} that is stable at unity gain: with"
                          " no feedback resistor the noise gain cannot be raised without"
                          " changing the circuit", element=opamp.ref), {}
    rf = resistors[0].value
    target_crossover = opamp.part.gbw_hz / minimum  # single pole: GBW / noise gain
    refs = (_free(stage, "R"), _free(stage, "C"))

    def solved(ohms):
        farads = at_least(view.settings["zero_below_crossover"]
                          / (2 * math.pi * ohms * target_crossover), "E12")
        result = view.reanalyse(_with_shaping(stage, opamp, ohms, farads, refs))
        crossover = _crossover(result, opamp.ref)
        gain = _noise_gain_at(result, opamp.ref, crossover) if crossover else math.inf
        return farads, gain, result

    values = ladder(1.0, rf * 10, "E24")[::-1]  # largest first: the least added noise
    # The noise gain at crossover rises as Rs falls: bisect for the largest that passes.
    low, high = 0, len(values) - 1
    if not values or below(solved(values[high])[1], minimum):
        return Suggestion(f"no series RC across the inputs brings the noise gain up to"
                          f" {minimum:.3g}: {unity}", element=opamp.ref), {}
    while low < high:
        middle = (low + high) // 2
        if reaches(solved(values[middle])[1], minimum):
            high = middle
        else:
            low = middle + 1
    ohms = values[low]
    farads, gain, result = solved(ohms)
    margin = result.loops[opamp.ref].phase_margin_deg
    margin_text = f", phase margin {margin:.0f}°" if margin is not None else ""
    return Suggestion(
        f"raise the noise gain at high frequency: {format_si(ohms, 'Ω')} ({refs[0]}, E24) in"
        f" series with {format_si(farads, 'F')} ({refs[1]}, E12) from {opamp.in_neg} to"
        f" {opamp.in_pos}; solved noise gain at crossover then {gain:.3g}{margin_text};"
        f" {unity}", value=ohms, unit="Ω", element=refs[0],
        changes=(AddPassive(refs[0], "resistor", opamp.in_neg, f"{opamp.in_neg}.shaping", ohms,
                            like_tolerance(stage)),
                 AddPassive(refs[1], "capacitor", f"{opamp.in_neg}.shaping", opamp.in_pos,
                            farads))), \
        {"shaping_resistor_ohm": ohms, "shaping_capacitor_f": farads}
