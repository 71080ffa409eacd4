"""An op-amp with no negative feedback: a comparator in disguise."""

from __future__ import annotations

import math

from checker.analysis.topology import classify
from checker.engine import rule
from checker.findings import Suggestion
from checker.preferred import nearest
from checker.rules._feedback import looks_swapped
from checker.rules._shorted_output import shorted_by_load
from checker.units import format_gain, format_si


@rule("open-loop", "warning",
      "An op-amp without negative feedback is being used as a comparator.",
      hysteresis_fraction=0.01)
def open_loop(view):
    """
    What it checks:
        The solved return ratio of every op-amp: it flags an op-amp whose loop gain
        never exceeds 1 with negative sign at any frequency (no negative feedback), or
        whose loop is positive at DC (positive feedback only). An integrator, whose
        loop closes above DC, is not flagged here, and neither is a regenerative loop
        on a stage meant to be linear (the `swapped-inputs` rule reports it). The
        finding answers the stage's closed-loop requirements, which such a stage
        cannot meet.

    Why it matters:
        Without negative feedback the output is the open-loop gain times the input
        difference, and that gain varies by large factors between devices and over
        temperature: the output slams into a rail, recovers slowly from saturation,
        does not swing to logic levels, and the inputs of many op-amps do not tolerate
        a large differential voltage. A comparator is made for this job: fast from
        overdrive, with an output meant for logic.

    How the fix is computed:
        Use a comparator part. Where the input is slow or noisy, add hysteresis: a
        resistor from the output to the non-inverting input, sized against the
        resistance already at that input (Rth) for a hysteresis band of
        `hysteresis_fraction` of the supply span, Rh = Rth * (Vswing/dV - 1), rounded
        to E24.

    Sources:
        Open-loop gain varies widely, so an op-amp without negative feedback is a
        comparator in disguise: common practice. Hysteresis divider: superposition
        on the non-inverting input (common practice).

    Passes:
        (stage level-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz) (impedance 10k))
          (load out (resistance 100k)))

    Fails:
        (stage flood-alarm (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- ref) (out out) (v+ vcc) (v- gnd))
          (resistor R1 vcc ref 100k) (resistor R2 ref gnd 47k)
          (source in (range 0V 3.3V) (band 0Hz 1Hz) (impedance 10k))
          (load out (resistance 1M)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    rails = stage.rail_voltages
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if loop.negative_somewhere or looks_swapped(stage, figures, opamp):
            continue  # swapped inputs on a stage meant to be linear: swapped-inputs
        if shorted_by_load(view, opamp) is not None:
            continue  # a load that all but shorts the output: the output-current rule
        kind = "positive feedback only" if loop.feedback == "positive" else "no negative feedback"
        span = rails[opamp.v_pos] - rails[opamp.v_neg]
        step = settings["hysteresis_fraction"] * span
        thevenin = figures.resistance_at(opamp.ref, opamp.in_pos)
        text = f"use a comparator part in place of {opamp.ref}"
        value = None
        if loop.feedback != "positive" and math.isfinite(thevenin) and thevenin > 0:
            value = nearest(thevenin * (span / step - 1), "E24")
            text += (f"; for hysteresis of about {format_si(step, 'V')} put"
                     f" {format_si(value, 'Ω')} from {opamp.out} to {opamp.in_pos}"
                     f" (Rth there {format_si(thevenin, 'Ω')})")
        elif loop.feedback == "positive":
            text += "; keep the hysteresis network on the comparator"
        topology = classify(stage, opamp, loop.feedback)
        yield view.finding(
            f"{opamp.ref} has {kind} (loop gain at DC {format_gain(loop.loop_gain_dc, 3)}): it is used as"
            f" a comparator ({topology.name}); its output will sit at a rail, recover slowly,"
            " and is not a logic level",
            opamp.origin, elements=(opamp.ref,), measured=loop.loop_gain_dc, limit=1.0,
            unit="V/V", suggestion=Suggestion(text, value=value, unit="Ω" if value else None),
            **view.answers("gain", "gain-tolerance", "bandwidth", "phase-margin", "cmrr"))
