"""Integrators with no DC path across the capacitor: offset and bias drive them to a rail."""

from __future__ import annotations

import math
from dataclasses import replace

from checker.changes import AddPassive, like_tolerance
from checker.engine import rule
from checker.findings import Suggestion
from checker.model import Passive
from checker.preferred import at_least, ladder
from checker.units import format_si


@rule("integrator-drift", "warning",
      "An integrator with no DC path across its capacitor drifts to a rail from offset"
      " and bias current.",
      corner_decades=1.0, max_shunt_ohm=100e6)
def integrator_drift(view):
    """
    What it checks:
        Every op-amp whose solved loop has no feedback at DC (loop gain under 1) but
        closes at higher frequencies, with a capacitor from its output to its
        inverting input: an integrator. Nothing across that capacitor conducts at DC,
        so the offset voltage across the input resistance and the bias current of the
        inverting input charge it without limit. The rule reports the worst-case drift
        rate Vos/(Rin*C) + Ib/C, with Rin the DC resistance the solver finds from the
        inverting input to ground and C the feedback capacitance, and the time the
        output takes to drift half the supply span. An inverting input with no DC path
        at all is left to the `floating-input` rule.

    Why it matters:
        A textbook integrator has infinite gain at DC. Whatever small offset and bias
        current the part has is integrated until the output sits at a rail, within
        seconds to minutes, and the stage stops working with no sign on the bench
        where it was tested briefly. Unless something resets the capacitor, the stage
        needs a finite DC gain.

    How the fix is computed:
        A shunt resistor across the capacitor gives the loop negative feedback at DC
        and the stage a DC gain of Rsh/Rin, while it still integrates above its corner
        1/(2 pi Rsh C). Rsh = 1/(2 pi f C) with f `corner_decades` decades below the
        lowest band edge of the sources (up to `max_shunt_ohm` when the band reaches
        0 Hz), rounded up to E24. The rule adds it to a copy of the stage and checks
        with the solver that the loop then has negative feedback at DC and that the
        output's DC extremes, offset and bias errors included, fit the part's swing;
        where they do not, it steps down the E24 values to the largest that fits and
        reports the corner that costs.

    Sources:
        Integrator drift from offset and bias current and the shunt resistor that
        limits the DC gain: R. Mancini (ed.), Op Amps for Everyone, chapter on active
        filters and integrators; Sedra and Smith, Microelectronic Circuits, op-amp
        chapter (the Miller integrator and its DC problem). Corner a decade below the
        band: common practice.

    Passes:
        (stage rain-integrator (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 fb out 100n) (resistor R1 in fb 100k) (resistor R2 fb out 1.6M)
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k)))

    Fails:
        (stage rain-integrator (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (capacitor C1 fb out 100n) (resistor R1 in fb 100k)
          (source in (amplitude 100mV) (band 10Hz 1kHz))
          (load out (resistance 10k)))
    """
    stage, figures = view.stage, view.figures
    floating = figures.floating_nets
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if loop.feedback != "none" or not loop.closes_anywhere:
            continue
        capacitors = [p for p in stage.capacitors() if set(p.nets) == {opamp.in_neg, opamp.out}]
        if not capacitors or opamp.in_neg in floating:
            continue
        yield from _report(view, opamp, capacitors)


def _report(view, opamp, capacitors):
    stage, figures = view.stage, view.figures
    part = opamp.part
    farads = sum(c.value for c in capacitors)
    rin = figures.resistance_at(opamp.ref, opamp.in_neg)
    offset, bias = part.offset_voltage_v, part.bias_current_a
    elements = (opamp.ref,) + tuple(c.ref for c in capacitors)
    where = capacitors[0].origin
    if offset is None and bias is None:
        yield view.cannot_check(f"the drift rate of {opamp.ref}",
                                f"part {part.name} gives neither offset voltage nor bias"
                                " current", where, elements)
        rate = None
    else:
        rate = 0.0
        if offset is not None and math.isfinite(rin) and rin > 0:
            rate += abs(offset) / (rin * farads)
        if bias is not None:
            rate += abs(bias) / farads
    rails = stage.rail_voltages
    half_span = (rails[opamp.v_pos] - rails[opamp.v_neg]) / 2
    seconds = half_span / rate if rate else None
    text = (f"{opamp.ref} integrates on {format_si(farads, 'F')} with no DC path across it:"
            f" offset and bias current drive its output to a rail")
    if rate:
        text += (f" at up to {format_si(rate, 'V/s')} (Vos/(Rin*C) + Ib/C with Rin"
                 f" {format_si(rin, 'Ω')}), half the supply span in"
                 f" {format_si(seconds, 's')}")
    yield view.finding(text, where, elements=elements, measured=rate,
                       unit="V/s", suggestion=lambda: _shunt(view, opamp, farads, rin),
                       input_resistance_ohm=rin, seconds_to_half_span=seconds)


def _shunt(view, opamp, farads: float, rin: float) -> Suggestion:
    stage, settings = view.stage, view.settings
    lows = [s.band_low_hz for s in stage.sources if s.band_low_hz]
    ref = _free_designator(stage)
    if lows:
        corner = min(lows) / 10 ** settings["corner_decades"]
        start = at_least(1 / (2 * math.pi * corner * farads), "E24")
    else:
        start = settings["max_shunt_ohm"]
    floor = rin if math.isfinite(rin) and rin > 0 else 1e3
    values = [v for v in ladder(min(floor, start), start, "E24") if v <= start * (1 + 1e-9)]
    chosen, solved = _largest_fitting(view, opamp, ref, values)
    if chosen is None:
        return Suggestion(f"no shunt resistor across the capacitor from"
                          f" {format_si(values[0], 'Ω')} to {format_si(start, 'Ω')} keeps the"
                          " output inside its swing: reset the capacitor or lower the gain",
                          element=ref)
    node = solved.node_range(opamp.out)
    corner = 1 / (2 * math.pi * chosen * farads)
    if not lows:
        note = ", the largest E24 value whose DC output fits the swing (the band reaches 0 Hz)"
    elif chosen >= start * (1 - 1e-9):
        note = ", a decade below the band"
    else:
        note = (f" (the {format_si(start, 'Ω')} for a corner a decade below the band lets the"
                " DC output reach a rail; the largest E24 value that fits moves the corner"
                " up)")
    return Suggestion(
        f"put {format_si(chosen, 'Ω')} (E24) across the capacitor, from {opamp.in_neg} to"
        f" {opamp.out}: corner {format_si(corner, 'Hz')}{note}; solved, the loop then has"
        f" negative feedback at DC and the output spans {format_si(node.low, 'V')} to"
        f" {format_si(node.high, 'V')}, offset and bias errors included",
        value=chosen, unit="Ω", element=ref,
        changes=(AddPassive(ref, "resistor", opamp.in_neg, opamp.out, chosen,
                            like_tolerance(stage)),))


def _fits(view, opamp, ref: str, ohms: float):
    stage = view.stage
    added = Passive(ref=ref, kind="resistor", net_a=opamp.in_neg, net_b=opamp.out,
                    value=ohms, origin=stage.origin)
    solved = view.reanalyse(replace(stage, passives=stage.passives + (added,)))
    if solved.loops[opamp.ref].feedback != "negative":
        return False, solved
    node = solved.node_range(opamp.out)
    rails = stage.rail_voltages
    low = node.clip_low if node.clip_low is not None else rails[opamp.v_neg]
    high = node.clip_high if node.clip_high is not None else rails[opamp.v_pos]
    return low <= node.low and node.high <= high, solved


def _largest_fitting(view, opamp, ref: str, values: list[float]):
    """The largest of ascending ``values`` that fits (smaller values fit more easily)."""
    low, high = 0, len(values) - 1
    best = None
    while low <= high:
        middle = (low + high) // 2
        ok, solved = _fits(view, opamp, ref, values[middle])
        if ok:
            best = (values[middle], solved)
            low = middle + 1
        else:
            high = middle - 1
    return best if best else (None, None)


def _free_designator(stage) -> str:
    used = {p.ref for p in stage.passives}
    number = 1
    while f"R{number}" in used:
        number += 1
    return f"R{number}"
