"""Name each op-amp's topology from the stage graph, for messages and suggestions only.

No rule takes a number from here; the numbers come from the solver. Names: inverting,
non-inverting, follower, T-network inverting, difference, summing, integrator,
transimpedance, composite (a loop closed through other op-amps), open loop, positive
feedback.
"""

from __future__ import annotations

from collections import deque
from checker.record import record

from checker.model import OpAmp, Passive, Stage


@record(frozen=True)
class Topology:
    name: str
    feedback_elements: tuple[str, ...] = ()  # passives from the output to the inverting input
    ground_elements: tuple[str, ...] = ()  # passives from the inverting input to a fixed net
    tee_elements: tuple[str, ...] = ()  # R2, R3, R4 of a T-network (in-/tee, tee/out, tee/rail)


def reached_nets(stage: Stage, start: str, stops: set[str]) -> set[str]:
    """Nets reachable from ``start`` through passives without crossing ``stops``."""
    seen = {start}
    queue = deque([start])
    while queue:
        net = queue.popleft()
        if net in stops and net != start:
            continue
        for passive in stage.passives:
            if net in passive.nets:
                other = passive.other(net)
                if other not in seen:
                    seen.add(other)
                    queue.append(other)
    return seen


def _between(stage: Stage, a: str, b: str) -> list[Passive]:
    return [p for p in stage.passives if set(p.nets) == {a, b}]


def _tee(stage: Stage, opamp: OpAmp, rails: set[str]) -> tuple[str, ...]:
    """(R2, R3, R4) when in- -R2- tee -R3- out and tee -R4- rail, else ()."""
    for r2 in stage.resistors():
        if opamp.in_neg not in r2.nets:
            continue
        tee = r2.other(opamp.in_neg)
        if tee in rails or tee in (opamp.out, opamp.in_pos):
            continue
        r3 = [p for p in _between(stage, tee, opamp.out) if p.kind == "resistor"]
        r4 = [p for p in stage.resistors() if tee in p.nets and p.other(tee) in rails]
        if r3 and r4:
            return (r2.ref, r3[0].ref, r4[0].ref)
    return ()


def classify(stage: Stage, opamp: OpAmp, feedback: str = "negative") -> Topology:
    """The topology of ``opamp``; ``feedback`` is the solved loop's sign at DC."""
    rails = set(stage.rail_voltages)
    outputs = {o.out for o in stage.opamps}
    stops = rails | outputs
    feedback_parts = tuple(p.ref for p in _between(stage, opamp.out, opamp.in_neg))
    ground_parts = tuple(p.ref for p in stage.passives
                         if opamp.in_neg in p.nets and p.other(opamp.in_neg) in rails)
    positive_parts = _between(stage, opamp.out, opamp.in_pos)
    tee = _tee(stage, opamp, rails)

    origins = [s.net for s in stage.sources] + [o.out for o in stage.opamps if o is not opamp]
    driven_pos = driven_neg = 0
    current_at_neg = False
    for i, origin in enumerate(origins):
        nets = reached_nets(stage, origin, stops - {origin})
        if opamp.in_pos in nets and opamp.in_pos not in rails:
            driven_pos += 1
        if opamp.in_neg in nets and opamp.in_neg not in rails and origin != opamp.out:
            driven_neg += 1
            if i < len(stage.sources) and stage.sources[i].kind == "current" \
                    and origin == opamp.in_neg:
                current_at_neg = True

    def result(name: str) -> Topology:
        return Topology(name, feedback_parts, ground_parts, tee)

    if feedback == "positive" or (positive_parts and not feedback_parts and not tee
                                  and opamp.in_neg != opamp.out):
        return result("positive feedback")
    if opamp.in_neg == opamp.out:
        return result("follower")
    kinds = {stage.element(ref).kind for ref in feedback_parts}
    if not feedback_parts and not tee:
        # no part from its own output to in-: open, unless the solved loop closes
        # through the network and other op-amps (a composite stage)
        return result("composite" if feedback == "negative" else "open loop")
    if current_at_neg:
        return result("transimpedance")
    if kinds == {"capacitor"} and not tee:
        return result("integrator")
    if driven_pos and driven_neg:
        return result("difference")
    if driven_neg >= 2:
        return result("summing")
    if driven_neg:
        return result("T-network inverting" if tee else "inverting")
    if driven_pos:
        if not ground_parts and not tee and "resistor" in kinds:
            return result("follower")
        return result("non-inverting")
    return result("other")
