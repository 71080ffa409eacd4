"""Expand a Stage into stamped primitives: the op-amp macro-model lives here.

The primitives are plain records that mna.assemble stamps into the matrices. Node 0 is
the ground net; every other net, and each op-amp's internal output node, gets an index.
Each voltage source, inductor and op-amp gain block adds a branch-current unknown.

Op-amp macro-model (per op-amp, after the common textbook model; e.g. Sedra and Smith,
Microelectronic Circuits, op-amp chapter): differential input resistance Rin between the
inputs, common-mode capacitance Ccm from each input to ground, differential capacitance
Cdiff between the inputs, a voltage-controlled voltage source
``A(s) = A0 / ((1 + s/p1)(1 + s/p2))`` with ``p1 = 2*pi*GBW/A0`` driving an internal node,
and the open-loop output resistance Ro from that node to the output pin. Input offset
voltage sits in series with the non-inverting input; bias currents flow into each input.
"""

from __future__ import annotations

from dataclasses import field, replace
from checker.record import record

import numpy as np

from checker.model import OpAmp, Stage

DEFAULT_OPEN_LOOP_GAIN = 1e6  # used only where a part gives none


@record(frozen=True)
class Conductance:
    a: int
    b: int
    siemens: float
    element: str  # designator or a label such as "U1.Rin"


@record(frozen=True)
class Capacitance:
    a: int
    b: int
    farads: float
    element: str


@record(frozen=True)
class Branch:
    """A branch-current unknown: a voltage source (``henries`` 0) or an inductor."""

    a: int
    b: int
    element: str
    henries: float = 0.0


@record(frozen=True)
class GainBlock:
    """An op-amp's controlled source: V(out_int) = A(s) * (V(in+) - V(in-) + Vos)."""

    ref: str
    out_int: int
    in_pos: int
    in_neg: int
    out: int
    v_pos: int
    v_neg: int
    open_loop_gain: float
    pole1_hz: float | None  # None: no frequency dependence (part lacks GBW)
    pole2_hz: float | None
    output_resistance_ohm: float

    def with_gbw(self, gbw_hz: float) -> GainBlock:
        """The same block with another GBW, A0 and the second pole kept (p1 = GBW/A0)."""
        return replace(self, pole1_hz=gbw_hz / self.open_loop_gain)

    def gain(self, s: np.ndarray) -> np.ndarray:
        """A(s) = A0 / ((1 + s/p1)(1 + s/p2)); shape of ``s``, complex."""
        s = np.asarray(s, dtype=complex)
        gain = np.full(s.shape, self.open_loop_gain, dtype=complex)
        for pole_hz in (self.pole1_hz, self.pole2_hz):
            if pole_hz:
                gain = gain / (1 + s / (2 * np.pi * pole_hz))
        return gain


@record
class Circuit:
    """A stage as primitives over numbered nodes, ready to stamp."""

    node_names: list[str]  # index -> net name; 0 is ground
    conductances: list[Conductance] = field(default_factory=list)
    capacitances: list[Capacitance] = field(default_factory=list)
    branches: list[Branch] = field(default_factory=list)
    gain_blocks: list[GainBlock] = field(default_factory=list)
    gain_branch: dict[str, int] = field(default_factory=dict)  # op-amp ref -> branch index
    supply_branch: dict[str, int] = field(default_factory=dict)  # net -> branch index
    source_branch: dict[int, int] = field(default_factory=dict)  # source index -> branch
    source_node: dict[int, int] = field(default_factory=dict)  # source index -> its net

    @property
    def node_count(self) -> int:
        return len(self.node_names)

    def node(self, net: str) -> int:
        """The index of ``net`` (ValueError if the stage has no such net)."""
        index = self.__dict__.get("_node_index")
        if index is None or len(index) != len(self.node_names):
            index = {name: i for i, name in enumerate(self.node_names)}
            self.__dict__["_node_index"] = index
        try:
            return index[net]
        except KeyError:
            raise ValueError(f"{net!r} is not a net of the stage") from None

    @property
    def size(self) -> int:
        """Unknowns: node voltages (ground excluded) then branch currents."""
        return self.node_count - 1 + len(self.branches)

    def row_of_node(self, node: int) -> int:
        return node - 1

    def row_of_branch(self, branch: int) -> int:
        return self.node_count - 1 + branch


def build_circuit(stage: Stage, stray_capacitance_f: float = 0.0) -> Circuit:
    """Expand ``stage`` into primitives. ``stray_capacitance_f`` is added from every
    op-amp's inverting input to ground (layout stray)."""
    names = [stage.ground] + [net for net in stage.nets if net != stage.ground]
    circuit = Circuit(node_names=list(names))
    index = {name: i for i, name in enumerate(circuit.node_names)}

    for net, _volts in sorted(stage.rail_voltages.items()):
        if net == stage.ground:
            continue
        circuit.supply_branch[net] = len(circuit.branches)
        circuit.branches.append(Branch(index[net], 0, f"supply {net}"))

    for passive in stage.passives:
        a, b = index[passive.net_a], index[passive.net_b]
        if passive.kind == "resistor":
            circuit.conductances.append(Conductance(a, b, 1.0 / passive.value, passive.ref))
        elif passive.kind == "capacitor":
            circuit.capacitances.append(Capacitance(a, b, passive.value, passive.ref))
        else:
            circuit.branches.append(Branch(a, b, passive.ref, henries=passive.value))

    for i, source in enumerate(stage.sources):
        node = index[source.net]
        circuit.source_node[i] = node
        label = source.name
        if source.kind == "voltage":
            if source.impedance_ohm:
                inner = len(circuit.node_names)
                circuit.node_names.append(f"{label}.emf")
                circuit.conductances.append(Conductance(inner, node, 1 / source.impedance_ohm,
                                                        f"{label} impedance"))
                node = inner
            circuit.source_branch[i] = len(circuit.branches)
            circuit.branches.append(Branch(node, 0, label))
        else:
            if source.impedance_ohm:
                circuit.conductances.append(Conductance(node, 0, 1 / source.impedance_ohm,
                                                        f"{label} impedance"))
            if source.capacitance_f:
                circuit.capacitances.append(Capacitance(node, 0, source.capacitance_f,
                                                        f"{label} capacitance"))

    for load in stage.loads:
        node = index[load.net]
        if load.resistance_ohm:
            circuit.conductances.append(Conductance(node, 0, 1 / load.resistance_ohm,
                                                    f"load {load.net}"))
        if load.capacitance_f:
            circuit.capacitances.append(Capacitance(node, 0, load.capacitance_f,
                                                    f"load {load.net}"))

    for opamp in stage.opamps:
        _expand_opamp(circuit, index, opamp, stray_capacitance_f)
    return circuit


def _expand_opamp(circuit: Circuit, index: dict[str, int], opamp: OpAmp,
                  stray_capacitance_f: float) -> None:
    part = opamp.part
    in_pos, in_neg, out = index[opamp.in_pos], index[opamp.in_neg], index[opamp.out]
    if part.input_resistance_ohm:
        circuit.conductances.append(Conductance(in_pos, in_neg, 1 / part.input_resistance_ohm,
                                                f"{opamp.ref}.Rin"))
    if part.input_capacitance_cm_f:
        for node, pin in ((in_pos, "+"), (in_neg, "-")):
            circuit.capacitances.append(Capacitance(node, 0, part.input_capacitance_cm_f,
                                                    f"{opamp.ref}.Ccm{pin}"))
    if part.input_capacitance_diff_f:
        circuit.capacitances.append(Capacitance(in_pos, in_neg, part.input_capacitance_diff_f,
                                                f"{opamp.ref}.Cdiff"))
    if stray_capacitance_f:
        circuit.capacitances.append(Capacitance(in_neg, 0, stray_capacitance_f,
                                                f"{opamp.ref}.stray"))
    # A part without an open-loop gain is taken at DEFAULT_OPEN_LOOP_GAIN; one without a
    # GBW has a flat gain, so no loop figures (the rules that need them say so).
    open_loop_gain = part.open_loop_gain if part.open_loop_gain is not None \
        else DEFAULT_OPEN_LOOP_GAIN
    resistance = part.output_resistance_ohm or 0.0
    if resistance > 0:
        out_int = len(circuit.node_names)
        circuit.node_names.append(f"{opamp.ref}.out_int")
        circuit.conductances.append(Conductance(out_int, out, 1 / resistance, f"{opamp.ref}.Ro"))
    else:  # no output resistance: the gain block drives the output pin itself
        out_int = out
    circuit.gain_branch[opamp.ref] = len(circuit.branches)
    circuit.branches.append(Branch(out_int, 0, f"{opamp.ref} gain block"))
    block = GainBlock(
        ref=opamp.ref, out_int=out_int, in_pos=in_pos, in_neg=in_neg, out=out,
        v_pos=index[opamp.v_pos], v_neg=index[opamp.v_neg], open_loop_gain=open_loop_gain,
        pole1_hz=None, pole2_hz=part.second_pole_hz if part.gbw_hz else None,
        output_resistance_ohm=resistance)
    circuit.gain_blocks.append(block.with_gbw(part.gbw_hz) if part.gbw_hz else block)
