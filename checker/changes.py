"""Changes a fix makes to a stage, as records a program can apply.

A rule's suggested fix carries the changes it proposes (a resistor's new value, an added
capacitor, the input pins exchanged, a part with more GBW); the engine applies them to a
copy of the stage and re-checks the copy with every rule, so the fix is known to clear
its finding and to bring in nothing new. The same records let a program edit the stage
file. :func:`apply_changes` never touches the original: stages are frozen.
"""

from __future__ import annotations

from collections.abc import Set as AbstractSet
from dataclasses import replace
from checker.record import record

from checker.model import OpAmpPart, Passive, Stage


@record(frozen=True)
class SetValue:
    """A resistor, capacitor or inductor takes a new value (SI)."""

    element: str
    value: float


@record(frozen=True)
class SetTolerance:
    """Resistors made to a tighter tolerance (fraction)."""

    elements: tuple[str, ...]
    tolerance: float


@record(frozen=True)
class SetPowerRating:
    element: str
    watts: float


@record(frozen=True)
class AddPassive:
    """A new part between two nets (a net not yet in the stage is created by it)."""

    ref: str
    kind: str  # "resistor" | "capacitor" | "inductor"
    net_a: str
    net_b: str
    value: float
    tolerance: float | None = None  # fraction; None: unstated


@record(frozen=True)
class RemovePassive:
    element: str


@record(frozen=True)
class SwapInputs:
    """An op-amp's in+ and in- exchanged."""

    opamp: str


@record(frozen=True)
class SetLoad:
    """The load on ``net`` takes a new resistance."""

    net: str
    resistance_ohm: float


@record(frozen=True)
class SetPartParameter:
    """An op-amp's part with one parameter changed (a part to choose: the name stays,
    the reports call it adjusted)."""

    opamp: str
    attribute: str  # an OpAmpPart attribute, e.g. "gbw_hz"
    value: float


@record(frozen=True)
class UsePart:
    """An op-amp given another part (a built-in class or one from a library)."""

    opamp: str
    part: OpAmpPart


@record(frozen=True)
class IsolateOutput:
    """A resistor between ``net`` and a new net that takes every load on ``net``; the
    feedback stays on ``net`` (taken before the resistor)."""

    net: str
    ref: str
    ohms: float


@record(frozen=True)
class SeriesAtInput:
    """Op-amp ``opamp``'s non-inverting input moved to a new net that reaches its old net
    through a resistor."""

    opamp: str
    ref: str
    ohms: float


Change = (SetValue | SetTolerance | SetPowerRating | AddPassive | RemovePassive | SwapInputs
          | SetLoad | SetPartParameter | UsePart | IsolateOutput | SeriesAtInput)


def isolated_net(net: str) -> str:
    """The net an isolation resistor on ``net`` hands the loads to."""
    return f"{net}.isolated"


def input_net(opamp: str) -> str:
    """The net a series resistor at ``opamp``'s in+ creates."""
    return f"{opamp}.in+"


def apply_changes(stage: Stage, changes) -> Stage:
    """A copy of ``stage`` with ``changes`` made, in order."""
    for change in changes:
        stage = _apply(stage, change)
    return stage


def _passives(stage: Stage, function) -> Stage:
    return replace(stage, passives=tuple(function(p) for p in stage.passives))


def _opamps(stage: Stage, ref: str, function) -> Stage:
    return replace(stage, opamps=tuple(function(o) if o.ref == ref else o
                                       for o in stage.opamps))


def _apply(stage: Stage, change) -> Stage:
    if isinstance(change, SetValue):
        return _passives(stage, lambda p: replace(p, value=change.value)
                         if p.ref == change.element else p)
    if isinstance(change, SetTolerance):
        return _passives(stage, lambda p: replace(p, tolerance=change.tolerance)
                         if p.ref in change.elements else p)
    if isinstance(change, SetPowerRating):
        return _passives(stage, lambda p: replace(p, power_rating_w=change.watts)
                         if p.ref == change.element else p)
    if isinstance(change, AddPassive):
        added = Passive(ref=change.ref, kind=change.kind, net_a=change.net_a,
                        net_b=change.net_b, value=change.value, origin=stage.origin,
                        tolerance=change.tolerance)
        return replace(stage, passives=stage.passives + (added,))
    if isinstance(change, RemovePassive):
        return replace(stage, passives=tuple(p for p in stage.passives
                                             if p.ref != change.element))
    if isinstance(change, SwapInputs):
        return _opamps(stage, change.opamp,
                       lambda o: replace(o, in_pos=o.in_neg, in_neg=o.in_pos))
    if isinstance(change, SetLoad):
        loads = tuple(replace(load, resistance_ohm=change.resistance_ohm)
                      if load.net == change.net else load for load in stage.loads)
        return replace(stage, loads=loads)
    if isinstance(change, SetPartParameter):
        return _opamps(stage, change.opamp, lambda o: replace(
            o, part=replace(o.part, **{change.attribute: change.value})))
    if isinstance(change, UsePart):
        return _opamps(stage, change.opamp, lambda o: replace(o, part=change.part))
    if isinstance(change, IsolateOutput):
        target = isolated_net(change.net)
        loads = tuple(replace(load, net=target) if load.net == change.net else load
                      for load in stage.loads)
        added = Passive(ref=change.ref, kind="resistor", net_a=change.net, net_b=target,
                        value=change.ohms, origin=stage.origin)
        return replace(stage, loads=loads, passives=stage.passives + (added,))
    if isinstance(change, SeriesAtInput):
        opamp = next(o for o in stage.opamps if o.ref == change.opamp)
        pin = input_net(change.opamp)
        stage = _opamps(stage, change.opamp, lambda o: replace(o, in_pos=pin))
        added = Passive(ref=change.ref, kind="resistor", net_a=pin, net_b=opamp.in_pos,
                        value=change.ohms, origin=opamp.origin)
        return replace(stage, passives=stage.passives + (added,))
    raise TypeError(f"not a stage change: {change!r}")


def like_tolerance(stage: Stage, kind: str = "resistor") -> float | None:
    """The tolerance to give a part a fix adds: the tightest of the stage's own parts of
    that kind (a designer buys the new one from the same reel), None where none states
    one."""
    stated = [p.tolerance for p in stage.passives if p.kind == kind and p.tolerance]
    return min(stated) if stated else None


def free_designator(stage: Stage, letter: str, taken: AbstractSet[str] = frozenset()) -> str:
    """The lowest ``letter`` + number designator the stage (and ``taken``) leaves free."""
    used = {p.ref for p in stage.passives} | {o.ref for o in stage.opamps} | set(taken)
    number = 1
    while f"{letter}{number}" in used:
        number += 1
    return f"{letter}{number}"

