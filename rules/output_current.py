"""The current an op-amp's output must deliver against the part's output-current limit."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from checker.analysis.grid import band_peak, band_points
from checker.analysis.topology import classify
from checker.changes import SetLoad, SetValue
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import within
from checker.preferred import at_least, ladder, smallest_passing
from checker.rules._shorted_output import shorted_by_load
from checker.units import format_si


@rule("output-current", "error",
      "The load, the feedback network and any capacitance on the output ask for more"
      " current than the op-amp can deliver.")
def output_current(view):
    """
    What it checks:
        For every op-amp with negative feedback, the largest current its output pin
        sources or sinks: the solved DC current into the load and the feedback network
        at the extremes of the sources' ranges, plus the current that capacitance on
        the output takes from a signal at the top of its band, C x 2 pi f x Vpeak, with
        Vpeak the solved swing of the capacitor's net (the source's half-span times
        |transfer| there). Capacitance counts where it hangs on the output net or behind
        one series resistor from it: a load's capacitance, or a capacitor to ground or a
        rail. An op-amp whose loop closes only above DC (an integrator with nothing
        across its capacitor) has no defined DC output, and the rule says it could not
        check it. The two parts are added, a worst case (they peak a quarter cycle apart for
        a pure sine, but not for every waveform). The total must not exceed the part's
        output current. A load so low that, against the part's output resistance, it
        pulls the loop gain below 1 (the loop closes once the stage's loads are taken
        away) is reported as a short of the output, with the current the unloaded
        stage's swing would drive into it; the open-loop rule then stays quiet. A
        source that swings over a band (an amplitude, or a range with a band) counts at
        its band's largest current into the load and feedback network, read from the
        AC solution (the output pin's current less what the capacitances above take),
        so a coupling capacitor or a band-pass that passes more than DC is counted.

    Why it matters:
        At its output-current limit an op-amp stops following its input: the output
        clips short of the rails, a capacitive load turns a sine into a ramp, and a
        part driven into its limit for long runs hot. Low-value feedback resistors draw
        current too, which a glance at the load alone misses.

    How the fix is computed:
        Each candidate is solved again. First the load: the smallest E24 load
        resistance, up from the one drawn, whose solved total fits (the least the output
        can drive). Where no load value fits, the feedback network: the smallest E24
        value of the feedback resistor, up from the one drawn, with every resistor at
        the inverting input (and a T-network's) scaled by the same factor so the gain
        stays, whose solved total fits. Otherwise, or where the capacitive current
        alone is too much, a buffer (or a part) rated for the total, rounded up to an
        E12 figure.

    Sources:
        Ohm's law and Kirchhoff's current law on the solved operating point and the
        solved AC currents; the
        capacitor current C dV/dt, 2 pi f C Vpeak for a sine (C. K. Alexander and
        M. N. O. Sadiku, Fundamentals of Electric Circuits, chapter on capacitors and
        inductors; from memory). Adding
        the resistive and capacitive peaks: common practice for a worst case.

    Passes:
        (stage level-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz) (impedance 10k))
          (load out (resistance 10k)))

    Fails:
        (stage level-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz) (impedance 10k))
          (load out (resistance 47)))
    """
    stage, figures = view.stage, view.figures
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if loop.feedback == "none" and loop.closes_anywhere:
            yield view.cannot_check(f"the output current of {opamp.ref}",
                                    "its loop has no feedback at DC (an integrator), so the"
                                    " circuit does not set its output's DC level",
                                    opamp.origin, (opamp.ref,))
            continue
        if loop.feedback != "negative":
            shorted = shorted_by_load(view, opamp)
            if shorted is not None:
                yield _shorted(view, opamp, *shorted)
            continue  # otherwise, without negative feedback: the open-loop rule
        part = opamp.part
        if part.output_current_a is None:
            yield view.cannot_check(f"the output current of {opamp.ref}",
                                    f"part {part.name} gives no output-current limit",
                                    opamp.origin, (opamp.ref,))
            continue
        resistive, capacitive = _drawn(figures, opamp)
        total = resistive + capacitive
        limit = part.output_current_a
        if within(total, limit):
            continue
        message = (f"{opamp.ref} must deliver {format_si(total, 'A')} but its part is"
                   f" limited to {format_si(limit, 'A')}: {format_si(resistive, 'A')} into"
                   f" the load and feedback network at the output's extremes")
        if capacitive:
            message += (f", plus {format_si(capacitive, 'A')} into the capacitance on the"
                        f" output where the band swings it fastest")
        yield view.finding(message, opamp.origin, elements=(opamp.ref,), measured=total,
                           limit=limit, unit="A",
                           suggestion=lambda: _suggest(view, opamp, total, capacitive,
                                                       limit),
                           resistive_a=resistive, capacitive_a=capacitive)


# Beyond this a "load" is a short or a wiring slip: no signal buffer drives it (common
# practice: power buffers of signal stages stop at amperes).
BUFFER_LIMIT_A = 100.0


def _shorted(view, opamp, loads, unloaded):
    """The finding for an output all but shorted by its load (rules/_shorted_output.py):
    the current the unloaded stage's output swing would drive into the load."""
    part = opamp.part
    swing = unloaded.node_range(opamp.out)
    volts = max(abs(swing.nominal_low), abs(swing.nominal_high)) + swing.error
    resistive = [load for load in loads if load.resistance_ohm]
    load = min(resistive, key=lambda item: item.resistance_ohm) if resistive else loads[0]
    where = (f"{format_si(load.resistance_ohm, 'Ω')} load" if load.resistance_ohm
             else "load")
    current = volts / load.resistance_ohm if load.resistance_ohm else None
    asked = (f"; the {format_si(volts, 'V')} the stage should put there would take"
             f" {format_si(current, 'A')}" if current is not None and volts else "")
    limit = part.output_current_a
    message = (f"the {where} on {opamp.out} all but shorts {opamp.ref}'s output: against the"
               f" part's {format_si(part.output_resistance_ohm or 0.0, 'Ω')} output"
               f" resistance it pulls the loop gain at DC down to"
               f" {view.figures.loops[opamp.ref].loop_gain_dc:.3g} (without the load"
               f" {unloaded.loops[opamp.ref].loop_gain_dc:.3g}), so the output does not"
               f" follow{asked}" + (f", against the part's {format_si(limit, 'A')}"
                                    if limit else ""))
    rated = at_least(current, "E12") if current and current <= BUFFER_LIMIT_A else None
    text = f"check the load on {opamp.out}: a short there destroys the output stage"
    text += (f"; a real load this low needs a buffer rated for {format_si(rated, 'A')}"
             if rated else "; no buffer drives it, so correct the load or the wiring")
    suggestion = Suggestion(text, value=rated, unit="A" if rated else None,
                            element=opamp.ref)
    return view.finding(message, load.origin, elements=(opamp.ref,), measured=current,
                        limit=limit, unit="A" if current is not None else None,
                        suggestion=suggestion, shorted=True)


def _capacitances(stage, opamp) -> list[tuple[str, float]]:
    """(net, farads) of capacitance to a fixed net on the output or behind one series
    resistor from it."""
    rails = set(stage.rail_voltages)
    nets = {opamp.out}
    nets.update(p.other(opamp.out) for p in stage.resistors()
                if opamp.out in p.nets and p.other(opamp.out) not in rails
                and p.other(opamp.out) != opamp.in_neg)
    found = [(load.net, load.capacitance_f) for load in stage.loads
             if load.net in nets and load.capacitance_f]
    found += [(net, p.value) for p in stage.capacitors() for net in nets
              if net in p.nets and p.other(net) in rails]
    return found


def _slope(figures, net: str) -> float:
    """Largest dV/dt of ``net`` a sine at each source's band asks for, 2 pi f Vpeak with
    Vpeak the half-span times the solved |transfer| (the band's top unless the response
    peaks inside it), summed over the sources."""
    frequencies = figures.frequencies_hz
    total = 0.0
    for index, source in enumerate(figures.stage.sources):
        if not source.band_high_hz or source.low is None:
            continue
        half = (source.high - source.low) / 2
        band = band_points(frequencies, source)
        if half <= 0 or band is None:
            continue
        at, value = figures.band_peak(net, ("source", index), band,
                                      weight=lambda f: 2 * np.pi * f)
        total += 2 * np.pi * at * half * abs(value)
    return total


def _drawn(figures, opamp) -> tuple[float, float]:
    """(resistive peak, capacitive peak C 2 pi f Vpeak) in A. The resistive peak is the
    DC solution's, with each source that swings over a band counted at its band's
    largest current into the load and feedback network instead (_band_resistive)."""
    capacitances = _capacitances(figures.stage, opamp)
    resistive = figures.output_currents[opamp.ref].peak_a
    for index, source in enumerate(figures.stage.sources):
        band = band_points(figures.frequencies_hz, source)
        if source.low is None or band is None or source.high == source.low:
            continue
        half = (source.high - source.low) / 2
        dc, ac = _band_resistive(figures, opamp, index, capacitances)
        _freqs, values, at = band_peak(
            figures.frequencies_hz, ac, band,
            lambda f, i=index: _band_resistive(figures, opamp, i, capacitances, f)[1])
        resistive += half * (max(float(abs(values[at])), abs(dc)
                                 if not source.band_low_hz else 0.0) - abs(dc))
    capacitive = sum((farads * _slope(figures, net) for net, farads in capacitances), 0.0)
    return max(resistive, 0.0), capacitive


def _band_resistive(figures, opamp, index: int, capacitances, frequencies=None
                    ) -> tuple[float, np.ndarray]:
    """The output pin's current per unit of source ``index`` less what the capacitances
    on the output take (C s V, Kirchhoff's current law): (at DC, over the grid, or at
    ``frequencies`` when given). The DC solution counts the source at its DC transfer;
    a coupling capacitor passes it only in its band, where this reads it."""
    column = ("source", index)
    dc, ac = figures.output_current_transfer(opamp.ref, column)
    on_grid = frequencies is None
    if on_grid:
        frequencies = figures.frequencies_hz
    else:
        ac = figures.output_current_at(opamp.ref, column, frequencies)
    s = 2j * np.pi * frequencies
    for net, farads in capacitances:
        voltage = figures.node_response(net, column) if on_grid \
            else figures.node_response_at(net, column, frequencies)
        ac = ac - s * farads * voltage
    return dc, ac


def _fits(view, opamp, stage) -> bool:
    result = view.reanalyse(stage)
    return sum(_drawn(result, opamp)) <= opamp.part.output_current_a


def _suggest(view, opamp, total, capacitive, limit) -> Suggestion:
    stage = view.stage
    rated = at_least(total, "E12")
    buffer = Suggestion(f"buffer the output of {opamp.ref} with a stage rated for at least"
                        f" {format_si(rated, 'A')}, or choose a part for {opamp.ref} with that"
                        " output current", value=rated, unit="A", element=opamp.ref)
    if capacitive >= limit:
        return buffer
    loads = [load for load in stage.loads if load.resistance_ohm
             and load.net in {opamp.out} | {n for n, _c in _capacitances(stage, opamp)}
             | _series_nets(stage, opamp)]
    if loads:
        load = loads[0]

        def with_load(ohms):
            changed = tuple(replace(item, resistance_ohm=ohms) if item is load else item
                            for item in stage.loads)
            return replace(stage, loads=changed)

        values = ladder(load.resistance_ohm * 1.0001, 1e9, "E24")
        best = smallest_passing(values, lambda ohms: _fits(view, opamp, with_load(ohms)))
        if best is not None:
            return Suggestion(
                f"{opamp.ref} can drive no less than {format_si(best, 'Ω')} (E24) on"
                f" {load.net}: raise the load to that, or buffer it with a stage rated for"
                f" {format_si(total, 'A')}", value=best, unit="Ω", element=f"load {load.net}",
                changes=(SetLoad(load.net, best),))
    network = _network(stage, opamp)
    if network:
        feedback, scaled = network

        def with_feedback(ohms):
            factor = ohms / feedback.value
            changed = tuple(replace(p, value=p.value * factor) if p.ref in scaled else p
                            for p in stage.passives)
            return replace(stage, passives=changed)

        values = ladder(feedback.value * 1.0001, feedback.value * 1000, "E24")
        best = smallest_passing(values,
                                lambda ohms: _fits(view, opamp, with_feedback(ohms)))
        if best is not None:
            others = sorted(scaled - {feedback.ref})
            also = (f" and scale {', '.join(others)} by the same factor"
                    f" ({best / feedback.value:.3g}) so the gain stays" if others else "")
            return Suggestion(
                f"the feedback network draws the current: raise {feedback.ref} to"
                f" {format_si(best, 'Ω')} (E24){also}", value=best, unit="Ω",
                element=feedback.ref,
                changes=tuple(SetValue(p.ref, p.value * best / feedback.value)
                              for p in stage.passives if p.ref in scaled))
    return buffer


def _series_nets(stage, opamp) -> set[str]:
    rails = set(stage.rail_voltages)
    return {p.other(opamp.out) for p in stage.resistors()
            if opamp.out in p.nets and p.other(opamp.out) not in rails | {opamp.in_neg}}


def _network(stage, opamp):
    """(the feedback resistor, the refs of every resistor to scale with it) or None."""
    topology = classify(stage, opamp)
    resistors = {p.ref: p for p in stage.resistors()}
    feedback = [resistors[r] for r in topology.feedback_elements if r in resistors]
    if not feedback and topology.tee_elements:
        feedback = [resistors[topology.tee_elements[1]]]
    if not feedback:
        return None
    scaled = {p.ref for p in stage.resistors() if opamp.in_neg in p.nets}
    scaled.update(topology.tee_elements)
    scaled.add(feedback[0].ref)
    return feedback[0], scaled
