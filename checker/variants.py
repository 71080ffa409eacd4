"""Modified copies of a stage, for verifying a suggested fix with the real solver."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from checker.model import Load, Passive, Stage


def with_capacitor(stage: Stage, ref: str, net_a: str, net_b: str, farads: float) -> Stage:
    """The stage with a capacitor of ``farads`` between two nets, replacing any existing
    capacitor between exactly those nets."""
    kept = [p for p in stage.passives
            if not (p.kind == "capacitor" and set(p.nets) == {net_a, net_b})]
    added = Passive(ref=ref, kind="capacitor", net_a=net_a, net_b=net_b, value=farads,
                    origin=stage.origin)
    return replace(stage, passives=tuple(kept) + (added,))


def without_input_capacitance(stage: Stage, ref: str) -> Stage:
    """The stage with op-amp ``ref``'s input capacitances removed."""
    opamps = tuple(replace(o, part=replace(o.part, input_capacitance_cm_f=None,
                                           input_capacitance_diff_f=None))
                   if o.ref == ref else o for o in stage.opamps)
    return replace(stage, opamps=opamps)


def without_inverting_input_capacitance(stage: Stage, ref: str) -> Stage:
    """The stage with every capacitance at op-amp ``ref``'s inverting input to AC ground
    removed: the part's input capacitances, a sensor's shunt capacitance on that net,
    and capacitors from that net to a rail. (Stray is an analysis option: set it to 0.)"""
    stage = without_input_capacitance(stage, ref)
    net = next(o.in_neg for o in stage.opamps if o.ref == ref)
    rails = set(stage.rail_voltages)
    passives = tuple(p for p in stage.passives
                     if not (p.kind == "capacitor" and net in p.nets and p.other(net) in rails))
    sources = tuple(replace(s, capacitance_f=None) if s.net == net else s for s in stage.sources)
    return replace(stage, passives=passives, sources=sources)


def inverting_input_capacitance_removed(stage: Stage, ref: str, stray_f: float,
                                        frequencies: np.ndarray) -> list[tuple]:
    """The same change as without_inverting_input_capacitance(stage, ref) analysed with
    no stray, as admittances to add to the stage analysed with ``stray_f`` at every
    inverting input: [(net_a, net_b, y (F,)), ...] for updates.margins_with_admittances.
    Each removed capacitance C is y = -sC between the nets it joins (a rail is AC
    ground, as in the solve)."""
    s = 2j * np.pi * np.asarray(frequencies)
    opamp = next(o for o in stage.opamps if o.ref == ref)
    part, ground, net = opamp.part, stage.ground, opamp.in_neg
    changes = []
    if part.input_capacitance_cm_f:
        changes += [(pin, ground, -s * part.input_capacitance_cm_f)
                    for pin in (opamp.in_pos, opamp.in_neg)]
    if part.input_capacitance_diff_f:
        changes.append((opamp.in_pos, opamp.in_neg, -s * part.input_capacitance_diff_f))
    if stray_f:
        changes += [(o.in_neg, ground, -s * stray_f) for o in stage.opamps]
    rails = set(stage.rail_voltages)
    changes += [(p.net_a, p.net_b, -s * p.value) for p in stage.passives
                if p.kind == "capacitor" and net in p.nets and p.other(net) in rails]
    changes += [(net, ground, -s * source.capacitance_f) for source in stage.sources
                if source.net == net and source.kind == "current" and source.capacitance_f]
    return changes


def load_capacitance_removed(stage: Stage, frequencies: np.ndarray) -> list[tuple]:
    """Admittance changes that take every load's capacitance out (as
    without_load_capacitance does), for updates.margins_with_admittances."""
    s = 2j * np.pi * np.asarray(frequencies)
    return [(load.net, stage.ground, -s * load.capacitance_f)
            for load in stage.loads if load.capacitance_f]


def without_second_pole(stage: Stage, ref: str) -> Stage:
    """The stage with op-amp ``ref``'s second pole taken out of its part."""
    return replace(stage, opamps=tuple(replace(o, part=replace(o.part, second_pole_hz=None))
                                       if o.ref == ref else o for o in stage.opamps))


def with_ideal_opamp(stage: Stage, ref: str, gain: float = 1e9) -> Stage:
    """The stage with op-amp ``ref`` made ideal: a flat, very large gain, no poles, no
    input capacitance, no output resistance."""
    def ideal(o):
        return replace(o, part=replace(o.part, open_loop_gain=gain, gbw_hz=None,
                                       second_pole_hz=None, input_capacitance_cm_f=None,
                                       input_capacitance_diff_f=None,
                                       output_resistance_ohm=None))
    return replace(stage, opamps=tuple(ideal(o) if o.ref == ref else o for o in stage.opamps))


def without_passive(stage: Stage, ref: str) -> Stage:
    return replace(stage, passives=tuple(p for p in stage.passives if p.ref != ref))


def without_load_capacitance(stage: Stage) -> Stage:
    """The stage with every load's capacitance removed."""
    return replace(stage, loads=tuple(replace(load, capacitance_f=None) for load in stage.loads))


def without_loads(stage: Stage) -> Stage:
    return replace(stage, loads=tuple(Load(net=load.net, origin=load.origin)
                                      for load in stage.loads))


def with_resistance(stage: Stage, ref: str, ohms: float) -> Stage:
    """The stage with resistor ``ref`` changed to ``ohms``."""
    return replace(stage, passives=tuple(replace(p, value=ohms) if p.ref == ref else p
                                         for p in stage.passives))


def with_isolation_resistor(stage: Stage, net: str, ohms: float, ref: str = "Riso") -> Stage:
    """The stage with a resistor between ``net`` and a new net that now carries every load
    on ``net``; the feedback stays on ``net`` (taken before the resistor)."""
    isolated = f"{net}.isolated"
    loads = tuple(replace(load, net=isolated) if load.net == net else load
                  for load in stage.loads)
    added = Passive(ref=ref, kind="resistor", net_a=net, net_b=isolated, value=ohms,
                    origin=stage.origin)
    return replace(stage, loads=loads, passives=stage.passives + (added,))
