"""A stage with a natural frequency in the right half-plane: it oscillates or runs away."""

from __future__ import annotations

import math

from checker.analysis.poles import stage_poles
from checker.engine import rule
from checker.units import format_si


@rule("unstable-stage", "error",
      "The stage's natural frequencies include a growing one: it oscillates or runs away,"
      " whatever any one loop's margin says.")
def unstable_stage(view):
    """
    What it checks:
        The closed-loop poles of the whole stage: the natural frequencies of its nodal
        equations with every source zeroed, each op-amp's poles carried as states
        (generalised eigenvalues of the G + sC pencil). A complex pair with a positive
        real part makes the stage oscillate near its frequency; a real one makes it run
        away to a rail. A growing real pole where an op-amp's loop is regenerative at
        DC is left to the swapped-inputs and open-loop rules, which name that cause.

    Why it matters:
        A return ratio is taken at one op-amp with the rest of the network working; it
        is a valid stability test only when the rest of the network is stable on its
        own. The poles settle it for the whole stage at once: a stage whose every
        return ratio shows a margin can still oscillate through a loop that no single
        op-amp's return ratio sees alone.

    How the fix is computed:
        Nothing is proposed here: the loop findings for the stage (loop-margin and the
        rules for its causes) name what to change. The finding gives the frequency
        and the growth rate, which is what a bench probe would show.

    Sources:
        Natural frequencies as the zeros of the network determinant, found as the
        generalised eigenvalues of the state-augmented MNA pencil (J. Vlach and K.
        Singhal, Computer Methods for Circuit Analysis and Design, 2nd ed., chapter on
        poles and zeros); a pole in the right half-plane grows without bound (any
        control text, e.g. K. Ogata, Modern Control Engineering, stability chapter).

    Passes:
        (stage siren-buffer (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (params (second-pole 400kHz))
            (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (amplitude 1V) (band 500Hz 3kHz))
          (load out (resistance 1k) (capacitance 1n)))

    Fails:
        (stage siren-buffer (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (params (second-pole 400kHz))
            (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (amplitude 1V) (band 500Hz 3kHz))
          (load out (resistance 1k) (capacitance 100n)))
    """
    stage, figures = view.stage, view.figures
    poles = stage_poles(figures)
    if poles.stable:
        return
    latched = any(figures.loops[o.ref].regenerative_at_dc for o in stage.opamps)
    growing = poles.right_half
    oscillating = growing[abs(growing.imag) > 1e-9 * abs(growing)]
    if not oscillating.size and latched:
        return  # the regenerative loop's own rule names it
    if oscillating.size:
        pole = oscillating[int(abs(oscillating.imag).argmin())]
        frequency = abs(pole.imag) / (2 * math.pi)
        message = (f"the stage oscillates near {format_si(frequency, 'Hz')}: its natural"
                   f" frequencies include a growing pair (it grows by e every"
                   f" {format_si(1 / pole.real, 's')})")
    else:
        pole = growing[int(growing.real.argmax())]
        frequency = 0.0
        message = (f"the stage runs away: a real natural frequency grows by e every"
                   f" {format_si(1 / pole.real, 's')}, so the output goes to a rail")
    yield view.finding(message, stage.origin, elements=tuple(o.ref for o in stage.opamps),
                       measured=frequency, unit="Hz", growth_rate_per_s=float(pole.real),
                       **view.answers("phase-margin", "gain", "gain-tolerance", "bandwidth",
                                      "cmrr"))
