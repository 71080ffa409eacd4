"""What the stage drives: unbuffered sources, capacitive loads, the next stage."""

from __future__ import annotations

import cmath
import math

import numpy as np

from checker.analysis.topology import reached_nets
from checker.analysis.updates import margins_with_admittances
from checker.engine import rule
from checker.rules._isolation import driven_loads, isolation
from checker.findings import Severity, Suggestion
from checker.limits import below, reaches, within
from checker.units import format_si
from checker.variants import (load_capacitance_removed, without_loads)


@rule("load-isolation", "warning",
      "A load the output cannot drive without isolation: an unbuffered source, a"
      " capacitive load, or a heavy next stage.",
      max_loss_db=0.83, warn_below_deg=45.0, error_below_deg=30.0, target_deg=60.0,
      max_interstage_loss_db=0.1, dominant_loss_deg=15.0)
def load_isolation(view):
    """
    What it checks:
        Three ways a load goes wrong. (1) A signal source reaches a load through
        passives only, with no op-amp between: the loss from the source's EMF to the
        load, solved with and without the load, must stay under `max_loss_db`. (2) An
        op-amp output drives a load capacitance, directly or behind one series resistor:
        with the open-loop output resistance it adds a pole to the loop; the rule flags
        a solved phase margin under the stage's `phase-margin` requirement, or without
        one under `warn_below_deg` (error under `error_below_deg`), that the load
        capacitance causes: without it the margin would pass, or it would rise by at
        least `dominant_loss_deg` (the load's share is the largest; the rest of the loss
        is named in the fix). (3) A load that feeds the next stage
        of the file: the divider of this stage's closed-loop output impedance and the
        next stage's input impedance must lose less than `max_interstage_loss_db`.

    Why it matters:
        A sensor with a high source impedance loses signal into any load it drives
        directly. A cable or a large capacitor on an op-amp output forms a pole with the
        output resistance Ro, fp = 1/(2 pi Ro CL), that rings or oscillates the loop. A
        stage whose input resistance is low loads the stage before it.

    How the fix is computed:
        (1) A unity-gain follower between source and load. (2) An isolation resistor
        Riso in series with the output, outside the loop (feedback taken before it):
        its zero at 1/(2 pi Riso CL) restores the phase; the rule searches the E24
        values from 1 ohm (or from the series resistor already there) up to 10 kohm for
        the smallest whose solved margin reaches `target_deg`, and states the DC error
        Riso/(Riso + RL) it costs into a resistive load. A resistor is a rank-one
        change of the nodal matrix (Sherman-Morrison identity), so one solved copy of
        the stage gives every value: all are first read on the grid, then the search
        starts at the first that passes there and confirms it and its neighbour with
        margins refined at the crossover, exact to rounding. The margin need not
        rise with Riso all the way (isolating a resistive load raises the crossover),
        so every value is predicted and the smallest that reaches the target is
        confirmed; where none does, the best reachable margin and the value that gives
        it are stated, with what else holds the margin down.
        (3) Raise the next stage's input resistance or buffer between the stages.

    Sources:
        Capacitive-load pole 1/(2 pi Ro CL) and the isolation-resistor zero
        1/(2 pi Riso CL): R. Mancini (ed.), Op Amps for Everyone, 2nd ed. (Newnes,
        2003), stability chapter, on capacitive loads and out-of-loop compensation.
        Typical Riso of 20 to 100 ohm, the voltage-divider loss and the ten-times rule
        (0.83 dB): common practice.

    Passes:
        (stage logger-driver (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range 0V 5V) (band 0Hz 1kHz))
          (load out (resistance 10k) (capacitance 100p)))

    Fails:
        (stage logger-driver (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range 0V 5V) (band 0Hz 1kHz))
          (load out (resistance 10k) (capacitance 10n)))
    """
    yield from _unbuffered_sources(view)
    yield from _capacitive_loads(view)
    yield from _next_stage(view)


def _unbuffered_sources(view):
    stage, figures, settings = view.stage, view.figures, view.settings
    outputs = {o.out for o in stage.opamps}
    stops = set(stage.rail_voltages) | outputs
    loaded = [load for load in stage.loads if load.resistance_ohm or load.capacitance_f]
    if not loaded or not figures.sources:
        return
    bare = None
    for sf in figures.sources:
        source = sf.source
        if source.kind != "voltage" or not source.impedance_ohm:
            continue
        nets = reached_nets(stage, source.net, stops)
        for load in loaded:
            if load.net not in nets or load.net in outputs:
                continue
            bare = bare or view.reanalyse(without_loads(stage))
            with_load = _response(figures, load.net, sf.index, sf.reference_hz)
            without = _response(bare, load.net, sf.index, sf.reference_hz)
            if not without:
                continue
            loss = -20 * math.log10(max(with_load / without, 1e-30))
            if within(loss, settings["max_loss_db"]):
                continue
            where = (f"before the load on {load.net}" if load.net == source.net
                     else f"between {source.net} and {load.net}")
            yield view.finding(
                f"{source.name} ({format_si(source.impedance_ohm, 'Ω')}) drives the load on"
                f" {load.net} with no buffer: it loses {loss:.2f} dB there",
                load.origin, elements=(source.name, f"load {load.net}"), measured=loss,
                limit=settings["max_loss_db"], unit="dB",
                suggestion=Suggestion(f"buffer the source with a unity-gain follower {where}"))


def _response(figures, net: str, index: int, frequency: float) -> float:
    response = figures.node_response(net, ("source", index))
    at = int(np.argmin(np.abs(figures.frequencies_hz - frequency)))
    return float(abs(response[at]))


def _degrees(margin: float | None) -> str:
    """A margin for a message; None where the loop no longer crosses over."""
    return "no crossover" if margin is None else f"{margin:.0f}°"


def _capacitive_loads(view):
    stage, figures, settings = view.stage, view.figures, view.settings
    if not any(load.capacitance_f for load in stage.loads):
        return
    warn = stage.require.phase_margin_deg if stage.require.phase_margin_deg is not None \
        else settings["warn_below_deg"]
    for opamp in stage.opamps:
        driven = driven_loads(stage, opamp)
        if not driven:
            continue
        loop = figures.loops[opamp.ref]
        margin = loop.phase_margin_deg
        if not loop.negative_somewhere or margin is None or reaches(margin, warn):
            continue
        if opamp.part.output_resistance_ohm is None:
            yield view.cannot_check(f"the capacitive load on {opamp.ref}",
                                    f"part {opamp.part.name} gives no output resistance",
                                    driven[0][0].origin, (opamp.ref,))
            continue
        bare_margin = margins_with_admittances(
            figures, opamp.ref, lambda f: load_capacitance_removed(stage, f)).phase_margin_deg
        shared = bare_margin is not None and below(bare_margin, warn)
        if shared and bare_margin - margin < settings["dominant_loss_deg"]:
            continue  # the load is not what eats the margin: loop-margin names the cause
        load, series = driven[0]
        pole = 1 / (2 * math.pi * opamp.part.output_resistance_ohm * load.capacitance_f) \
            if opamp.part.output_resistance_ohm else None
        severity = Severity.ERROR if below(margin, settings["error_below_deg"]) \
            else Severity.WARNING
        behind = f" behind {series.ref}" if series else ""
        yield view.finding(
            f"{opamp.ref} drives {format_si(load.capacitance_f, 'F')} on {load.net}{behind}:"
            f" with its"
            f" {format_si(opamp.part.output_resistance_ohm, 'Ω')} output resistance that is a"
            f" pole at {format_si(pole, 'Hz')}, and the phase margin falls to {margin:.1f}°"
            f" (without the load capacitance {_degrees(bare_margin)})",
            load.origin, elements=(opamp.ref, f"load {load.net}"), severity=severity,
            measured=margin, limit=warn, unit="°",
            suggestion=lambda: _isolation(view, opamp, load, series, warn,
                                          bare_margin if shared else None),
            load_pole_hz=pole,
            loop=opamp.ref,
            **view.answers("phase-margin"))


_NO_ISOLATION = Suggestion("no isolation resistor up to 10 kΩ closes the loop: reduce"
                           " the load capacitance or choose a part made for capacitive loads")


def _isolation(view, opamp, load, series, warn, bare_margin=None) -> Suggestion:
    target = max(view.settings["target_deg"], warn)
    limited = None if bare_margin is None else \
        f"without any load capacitance the loop has only {bare_margin:.0f}°: the rest of" \
        " the lag is elsewhere in the loop"
    return isolation(view, opamp, load, series, target, limited) or _NO_ISOLATION


def _next_stage(view):
    stage, figures, settings = view.stage, view.figures, view.settings
    for load in stage.loads:
        if not load.feeds_stage or load.feeds_stage not in view.siblings:
            continue
        following = view.siblings[load.feeds_stage]
        targets = [sf for sf in following.sources
                   if load.feeds_net is None or sf.source.net == load.feeds_net][:1]
        if not targets:
            continue
        target = targets[0]
        at = int(np.argmin(np.abs(figures.frequencies_hz - target.reference_hz)))
        z_out = complex(figures.output_impedance[at])
        z_in = target.input_impedance_mid
        if z_in == 0 or not cmath.isfinite(z_in) or not cmath.isfinite(z_out):
            yield view.cannot_check(f"the loading of {load.net} by stage"
                                    f" {following.stage.name}", "its input impedance is zero"
                                    " or not defined (its input net is held by something)",
                                    load.origin, (f"load {load.net}",))
            continue
        ratio = abs(z_in / (z_in + z_out))
        loss = -20 * math.log10(ratio)
        if within(loss, settings["max_interstage_loss_db"]):
            continue
        yield view.finding(
            f"stage {following.stage.name} loads this output: its input"
            f" {format_si(abs(z_in), 'Ω')} against this stage's"
            f" {format_si(abs(z_out), 'Ω')} output impedance loses {loss:.2f} dB",
            load.origin, elements=(f"load {load.net}",), measured=loss,
            limit=settings["max_interstage_loss_db"], unit="dB",
            suggestion=Suggestion(f"raise the input resistance of {following.stage.name} or"
                                  " buffer between the stages"))
