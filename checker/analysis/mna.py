"""Modified nodal analysis: stamp primitives into matrices and solve them in batches.

Unknowns ``x`` (length n): node voltages for nodes 1..N-1 (ground, node 0, is the
reference and has no row), then one current per branch (voltage sources, inductors,
op-amp gain blocks). The system at complex frequency s is

    Y(s) x = b,   Y(s) = G + s C + sum_k A_k(s) E_k

with G and C real (n, n), and E_k the control pattern of op-amp k's gain block
(row of its branch: -1 at in+, +1 at in-). Stamps follow the standard MNA formulation
(C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal approach to network
analysis", IEEE Trans. Circuits and Systems, 1975).

Shapes: ``s`` is (F,), ``Y`` is (F, n, n), right-hand sides are (F, n, m) for m
excitations; one ``np.linalg.solve`` call covers every frequency and excitation.
"""

from __future__ import annotations

from checker.record import record

import numpy as np

from checker.analysis.circuit import Circuit

GMIN_SIEMENS = 1e-12  # tie for nets with no path to ground, as a last resort
# In series with an inductor that closes a loop of inductors, at DC only (inductor_loops):
# far below any winding's resistance, so it only decides that it carries no current.
WINDING_OHMS = 1e-6


class SingularCircuit(Exception):
    """The stage's equations have no unique solution; the message names the culprit."""


@record(frozen=True)
class Matrices:
    G: np.ndarray  # (n, n) conductances and branch incidences
    C: np.ndarray  # (n, n) capacitances and -L of inductor branches
    control_rows: np.ndarray  # (K,) row of each gain block's branch equation
    control_pos: np.ndarray  # (K,) column of its in+ node, -1 for ground
    control_neg: np.ndarray  # (K,) column of its in- node, -1 for ground


def assemble(circuit: Circuit, tie_nodes: tuple[int, ...] = ()) -> Matrices:
    """Stamp every primitive into G and C. ``tie_nodes`` get GMIN to ground."""
    n = circuit.size
    G = np.zeros((n, n))
    C = np.zeros((n, n))

    def stamp(matrix: np.ndarray, a: int, b: int, value: float) -> None:
        ra, rb = a - 1, b - 1
        if a:
            matrix[ra, ra] += value
        if b:
            matrix[rb, rb] += value
        if a and b:
            matrix[ra, rb] -= value
            matrix[rb, ra] -= value

    for item in circuit.conductances:
        stamp(G, item.a, item.b, item.siemens)
    for capacitance in circuit.capacitances:
        stamp(C, capacitance.a, capacitance.b, capacitance.farads)
    for node in tie_nodes:
        stamp(G, node, 0, GMIN_SIEMENS)
    for k, branch in enumerate(circuit.branches):
        row = circuit.row_of_branch(k)
        if branch.a:
            G[branch.a - 1, row] += 1.0
            G[row, branch.a - 1] += 1.0
        if branch.b:
            G[branch.b - 1, row] -= 1.0
            G[row, branch.b - 1] -= 1.0
        if branch.henries:
            C[row, row] -= branch.henries
    rows, pos, neg = [], [], []
    for block in circuit.gain_blocks:
        rows.append(circuit.row_of_branch(circuit.gain_branch[block.ref]))
        pos.append(block.in_pos - 1)
        neg.append(block.in_neg - 1)
    return Matrices(G, C, np.array(rows, dtype=int), np.array(pos, dtype=int),
                    np.array(neg, dtype=int))


def with_ties(matrices: Matrices, tie_nodes: tuple[int, ...]) -> Matrices:
    """``matrices`` (assembled with no ties) with GMIN from each of ``tie_nodes`` to
    ground: the same numbers as assemble(circuit, tie_nodes), whose ties touch only the
    diagonal of node rows, where no branch stamp lands."""
    if not tie_nodes:
        return matrices
    G = matrices.G.copy()
    for node in tie_nodes:
        G[node - 1, node - 1] += GMIN_SIEMENS
    return Matrices(G, matrices.C, matrices.control_rows, matrices.control_pos,
                    matrices.control_neg)


def without_rails(matrices: Matrices, circuit: Circuit
                  ) -> tuple[Matrices, np.ndarray, np.ndarray]:
    """The AC system with the supply rails taken out, the kept unknowns' indices and the
    dropped ones'.

    A rail is an ideal DC source to ground, so in AC its node sits at 0 V: its voltage
    unknown and its branch equation drop out, and the rail node's current equation
    only gives the supply's current, which no AC figure reads. Eliminating the known
    unknowns leaves an exact smaller system (standard MNA reduction of grounded
    sources), which matters because each frequency's solve costs about n^3."""
    drop = set()
    for net, branch in circuit.supply_branch.items():
        drop.add(circuit.row_of_node(circuit.node(net)))
        drop.add(circuit.row_of_branch(branch))
    keep = np.array([i for i in range(circuit.size) if i not in drop], dtype=int)
    dropped = np.array(sorted(drop), dtype=int)
    if not drop:
        return matrices, keep, dropped
    new_index = np.full(circuit.size, -1, dtype=int)
    new_index[keep] = np.arange(keep.size)

    def column(old: np.ndarray) -> np.ndarray:
        return np.where(old >= 0, new_index[np.maximum(old, 0)], -1)

    return Matrices(matrices.G[keep][:, keep], matrices.C[keep][:, keep],
                    new_index[matrices.control_rows], column(matrices.control_pos),
                    column(matrices.control_neg)), keep, dropped


def system_stack(matrices: Matrices, gains: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Y(s) for every frequency: (F, n, n) complex.

    ``gains`` is (F, K): A_k(s) of each gain block at each frequency. On the j omega
    axis (every AC solve) G and omega C are written straight into the real and imaginary
    parts, the same numbers as G + s C without a complex product.
    """
    s = np.asarray(s)
    if not s.real.any():
        Y = np.empty((s.size,) + matrices.C.shape, dtype=complex)
        Y.real[...] = matrices.G
        np.multiply(s.imag[:, None, None], matrices.C, out=Y.imag)
    else:
        Y = s.astype(complex)[:, None, None] * matrices.C  # one pass to a fresh stack
        Y += matrices.G
    for k, (row, pos, neg) in enumerate(zip(matrices.control_rows.tolist(),
                                            matrices.control_pos.tolist(),
                                            matrices.control_neg.tolist())):
        if pos >= 0:
            Y[:, row, pos] -= gains[:, k]
        if neg >= 0:
            Y[:, row, neg] += gains[:, k]
    return Y


def solve(Y: np.ndarray, B: np.ndarray) -> np.ndarray:
    """Solve Y X = B for a stack: Y (F, n, n), B (F, n, m) or (1, n, m) for the same
    right-hand sides at every frequency -> X (F, n, m)."""
    try:
        X = np.linalg.solve(Y, B)
    except np.linalg.LinAlgError:
        raise SingularCircuit("the stage's equations are singular") from None
    if not np.all(np.isfinite(X)):
        raise SingularCircuit("the stage's equations are singular")
    return X


class _Sets:
    """Union-find over node indices."""

    def __init__(self, count: int):
        self.parent = list(range(count))

    def find(self, i: int) -> int:
        while self.parent[i] != i:
            self.parent[i] = self.parent[self.parent[i]]
            i = self.parent[i]
        return i

    def union(self, a: int, b: int) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def unreferenced_nodes(circuit: Circuit, at_dc: bool) -> list[int]:
    """Nodes with no conductive path to ground (capacitors count only when not at DC).

    An op-amp's own input resistance is no path: it leads only to the other input.
    """
    at_dc_nodes, ac_nodes = unreferenced_at_dc_and_ac(circuit)
    return at_dc_nodes if at_dc else ac_nodes


def unreferenced_at_dc_and_ac(circuit: Circuit) -> tuple[list[int], list[int]]:
    """unreferenced_nodes at DC and in AC from one pass: the capacitors joined last."""
    sets = _Sets(circuit.node_count)
    for item in circuit.conductances:
        if not item.element.endswith(".Rin"):
            sets.union(item.a, item.b)
    for branch in circuit.branches:
        sets.union(branch.a, branch.b)
    nodes = range(1, circuit.node_count)
    ground = sets.find(0)
    at_dc = [node for node in nodes if sets.find(node) != ground]
    if not at_dc or not circuit.capacitances:
        return at_dc, list(at_dc)
    for capacitance in circuit.capacitances:
        sets.union(capacitance.a, capacitance.b)
    ground = sets.find(0)
    return at_dc, [node for node in at_dc if sets.find(node) != ground]


def inductor_loops(circuit: Circuit) -> list[int]:
    """Branches (indices) of inductors that close a loop of inductors alone: parallel
    inductors, or a ring of them. At DC each inductor is a short, so the loop's node
    voltages are set but the split of its current is not (ideal inductors have no
    resistance to share it by); with_winding_resistance gives each of these a tiny
    resistance at DC, which carries no current, so every voltage is exact."""
    sets = _Sets(circuit.node_count)
    closing = []
    for k, branch in enumerate(circuit.branches):
        if branch.henries and not sets.union(branch.a, branch.b):
            closing.append(k)
    return closing


def source_loops(circuit: Circuit) -> list[str]:
    """Elements closing a loop of voltage sources and inductors that holds at least one
    source (singular at DC: the loop fixes a net at two voltages, or shorts a source);
    loops of inductors alone are left to inductor_loops."""
    sets = _Sets(circuit.node_count)
    culprits = []
    skipped = set(inductor_loops(circuit))
    for k, branch in enumerate(circuit.branches):
        if k not in skipped and not sets.union(branch.a, branch.b):
            culprits.append(branch.element)
    return culprits


def with_winding_resistance(matrices: Matrices, circuit: Circuit, branches: list[int]
                            ) -> Matrices:
    """``matrices`` with WINDING_OHMS in series with each inductor branch of
    ``branches`` (its equation v_a - v_b - (R + sL) i = 0), for the DC system."""
    if not branches:
        return matrices
    G = matrices.G.copy()
    for k in branches:
        row = circuit.row_of_branch(k)
        G[row, row] -= WINDING_OHMS
    return Matrices(G, matrices.C, matrices.control_rows, matrices.control_pos,
                    matrices.control_neg)
