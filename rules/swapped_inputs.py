"""An op-amp whose inputs look swapped: a regenerative loop where a linear one is meant."""

from __future__ import annotations

from checker.analysis.figures import signed_gain
from checker.analysis.mna import SingularCircuit
from checker.analysis.signal import stage_signals
from checker.changes import SwapInputs, apply_changes
from checker.engine import rule
from checker.findings import Suggestion
from checker.rules._feedback import CLOSED_LOOP_REQUIREMENTS, looks_swapped
from checker.units import format_gain


@rule("swapped-inputs", "error",
      "An op-amp's loop is regenerative on a stage meant to be linear: in+ and in- look"
      " swapped.")
def swapped_inputs(view):
    """
    What it checks:
        Every op-amp whose solved loop is regenerative (positive feedback of loop gain 1
        or more at DC, or, where the network is AC-coupled, in a source's band) on a
        stage that means to be linear: one that states a closed-loop requirement
        (`gain`, `gain-tolerance`, `bandwidth`, `phase-margin` or `cmrr`), or a
        follower whose output is wired straight to its non-inverting input. No
        closed-loop figure (gain, bandwidth, phase margin) is reported for such a
        loop: it has none.

    Why it matters:
        With the inputs the wrong way round the feedback network feeds the output back
        in phase: the output runs to a rail and latches there. On the schematic it
        looks like the amplifier it was meant to be, and a glance at the resistor ratio
        still gives the intended gain. A comparator with hysteresis is wired this way
        on purpose; a stage that states a gain or a bandwidth is not one.

    How the fix is computed:
        The rule swaps the two input pins on a copy of the stage and solves it again:
        it reports the loop gain at DC the swapped stage then has (negative feedback)
        and its gain from the source, to compare with the requirement.

    Sources:
        Negative feedback needs the fed-back signal at the inverting input; the sign
        of the return ratio tells which (H. W. Bode, Network Analysis and Feedback
        Amplifier Design, 1945). Hysteresis comparators use positive feedback on
        purpose: common practice.

    Passes:
        (stage staff-gauge-gain (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range 0V 0.4V) (band 0Hz 10Hz))
          (load out (resistance 100k))
          (require (gain -10)))

    Fails:
        (stage staff-gauge-gain (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (in+ fb) (in- gnd) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range 0V 0.4V) (band 0Hz 10Hz))
          (load out (resistance 100k))
          (require (gain -10)))
    """
    stage, figures = view.stage, view.figures
    for opamp in stage.opamps:
        if not looks_swapped(stage, figures, opamp):
            continue
        loop = figures.loops[opamp.ref]
        stated = [k for k in CLOSED_LOOP_REQUIREMENTS if k in stage.require.stated()]
        why = (f"the stage states {', '.join(stated)}" if stated
               else f"its output is wired straight to in+ ({opamp.in_pos})")
        yield view.finding(
            f"{opamp.ref}'s loop is regenerative (loop gain at DC {format_gain(loop.loop_gain_dc, 3)}:"
            f" positive feedback), but {why}: in+ ({opamp.in_pos}) and in- ({opamp.in_neg})"
            " look swapped; the output will latch at a rail",
            opamp.origin, elements=(opamp.ref,), measured=loop.loop_gain_dc, limit=1.0,
            unit="V/V", suggestion=lambda: _swap(view, opamp),
            **view.answers(*CLOSED_LOOP_REQUIREMENTS))


def _swap(view, opamp) -> Suggestion:
    text = (f"swap {opamp.ref}'s inputs: in+ to {opamp.in_neg}, in- to {opamp.in_pos}")
    changes = (SwapInputs(opamp.ref),)
    try:
        result = view.reanalyse(apply_changes(view.stage, changes))
        loop = result.loops[opamp.ref]
        if not loop.negative_somewhere:
            return Suggestion(text + "; solved, the loop still has no negative feedback:"
                              " look for another wiring mistake", element=opamp.ref)
        text += f"; solved, the loop then has negative feedback (loop gain at DC {format_gain(loop.loop_gain_dc, 3)})"
        signals = stage_signals(result)
        if signals and signals[0].unit == "V/V":
            text += f" and the gain from {signals[0].label} is {signed_gain(signals[0].gain):.4g}"
            if view.stage.require.gain is not None:
                text += f" (required {view.stage.require.gain:.4g})"
    except SingularCircuit:
        text += "; the swapped stage cannot be solved: check the wiring by hand"
        return Suggestion(text, element=opamp.ref)
    return Suggestion(text, element=opamp.ref, changes=changes)
