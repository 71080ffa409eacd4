"""What the feedback network shows an op-amp's inverting input: the resistance there and
the capacitance, and the pole they make.

The pole fp = 1/(2 pi R C) of the resistance at the inverting input with the
capacitance there (R. Mancini (ed.), Op Amps for Everyone, 2nd ed., Newnes 2003,
stability chapter). Ohms, farads, hertz.
"""

from __future__ import annotations

import math

import numpy as np

from checker.analysis.circuit import Circuit
from checker.analysis.mna import SingularCircuit, assemble, solve, system_stack, unreferenced_nodes
from checker.analysis.solution import Solution


def resistance_at(solution: Solution, ref: str, net: str) -> float:
    """DC resistance from ``net`` to AC ground with op-amp ``ref``'s output held at 0 V
    (its source zeroed, other op-amps active) and its input resistance removed (inf
    where nothing conducts)."""
    circuit = solution.circuit
    node = circuit.node(net)
    if node == 0:
        return 0.0
    skip = {f"{ref}.Rin"}
    pruned = Circuit(node_names=circuit.node_names,
                     conductances=[c for c in circuit.conductances if c.element not in skip],
                     capacitances=[], branches=circuit.branches,
                     gain_blocks=[b for b in circuit.gain_blocks if b.ref != ref],
                     gain_branch={r: i for r, i in circuit.gain_branch.items() if r != ref})
    tie = tuple(unreferenced_nodes(pruned, at_dc=True))
    matrices = assemble(pruned, tie)
    gains = np.array([[b.open_loop_gain for b in pruned.gain_blocks]])
    Y = system_stack(matrices, gains, np.zeros(1)).real
    B = np.zeros((1, circuit.size, 1))
    B[0, node - 1, 0] = 1.0
    try:
        X = solve(Y, B)
    except SingularCircuit:
        return math.inf
    if node in tie:
        return math.inf
    return float(X[0, node - 1, 0])


def inverting_inputs(solution: Solution) -> dict[str, tuple[float, float, float | None]]:
    """Per op-amp: (resistance seen at in-, capacitance at in-, feedback pole Hz). The
    capacitance is the part's Ccm + Cdiff, the stray, capacitors from that net to a
    fixed net and a sensor's capacitance on it."""
    solution.require_solvable()
    stage = solution.stage
    rails = set(stage.rail_voltages)
    result = {}
    for opamp in stage.opamps:
        resistance = resistance_at(solution, opamp.ref, opamp.in_neg)
        part = opamp.part
        capacitance = (part.input_capacitance_cm_f or 0.0) + \
            (part.input_capacitance_diff_f or 0.0) + solution.options.stray_capacitance_f
        for passive in stage.capacitors():
            if opamp.in_neg in passive.nets and passive.other(opamp.in_neg) in rails:
                capacitance += passive.value
        for source in stage.sources:
            if source.net == opamp.in_neg and source.capacitance_f:
                capacitance += source.capacitance_f
        pole = None
        if resistance and capacitance and math.isfinite(resistance):
            pole = 1.0 / (2 * math.pi * resistance * capacitance)
        result[opamp.ref] = (resistance, capacitance, pole)
    return result
