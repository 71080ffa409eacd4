"""What-if figures from one solve: a stage with some elements changed, without a copy.

A two-terminal admittance y between nodes a and b adds y u u^T to the nodal matrix
(u = e_a - e_b), and a new open-loop gain A'(s) of one op-amp adds -(A' - A) e_r w^T
(e_r its gain-block row, w = e_in+ - e_in-). Both are low-rank, so the solution of the
changed system follows from the original one and a few extra columns by the
Sherman-Morrison identity, or for k changes at once the Woodbury identity (G. H. Golub
and C. F. Van Loan, Matrix Computations, section 2.1.4):

    (Y + U D U^T)^-1 b = x0 - Z D (I + U^T Z D)^-1 U^T x0,   Z = Y^-1 U,  x0 = Y^-1 b.

Fix searches use these to read every candidate value from one solve and to confirm the
chosen ones exactly (to rounding) without building and solving a copy of the stage.
"""

from __future__ import annotations

import weakref

import numpy as np

from checker.analysis.figures import Figures
from checker.analysis.grid import pick
from checker.analysis.loop import Margins, return_ratio
from checker.analysis.solution import OUTPUT, Excitation

# Per Figures: the loop column and unit pair currents solved on its own grid, kept
# because a search tries many values of the same element against them.
_PAIR_SOLVES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _opamp(figures: Figures, ref: str):
    return next((k, b) for k, b in enumerate(figures.circuit.gain_blocks) if b.ref == ref)


def _across(X: np.ndarray, plus: int, minus: int) -> np.ndarray:
    """V(plus) - V(minus) for every frequency and column of X (F, n, m): (F, m)."""
    result = np.zeros((X.shape[0], X.shape[2]), dtype=X.dtype)
    if plus:
        result += X[:, plus - 1, :]
    if minus:
        result -= X[:, minus - 1, :]
    return result


def _loop_and_pairs(figures: Figures, ref: str, nodes: list[tuple[int, int]],
                    frequencies: np.ndarray) -> np.ndarray:
    """X (F, n, 1 + k): op-amp ``ref``'s loop column and a unit current between each
    node pair (u = e_a - e_b), solved at ``frequencies`` (kept on the stage's grid)."""
    on_grid = frequencies is figures.frequencies_hz
    cache = _PAIR_SOLVES.setdefault(figures, {})
    key = (ref, tuple(nodes))
    if on_grid and key in cache:
        return cache[key]
    solution = figures.solution
    out = figures.circuit.node(figures.stage.output_net)
    if on_grid and solution.grid_solved and out and all(p == (out, 0) for p in nodes):
        # 1 A into the output net is a column of the grid's solve already
        picked = [solution.column(Excitation.loop(ref))] + \
            [solution.column(OUTPUT)] * len(nodes)
        cache[key] = solution.grid[:, :, picked]
        return cache[key]
    rhs = np.concatenate([solution.excitations([Excitation.loop(ref)]),
                          solution.unit_currents(nodes)], axis=1)
    X = solution.solve(frequencies, rhs)
    if on_grid:
        cache[key] = X
    return X


def loop_with_admittances(figures: Figures, ref: str, changes, frequencies: np.ndarray):
    """(T, beta) of op-amp ``ref`` at ``frequencies`` with admittances added between
    pairs of nets, ``changes`` = [(net_a, net_b, y (F,) complex), ...] (a negative y
    takes an element out): the Woodbury identity over one solve of the loop column and
    the k columns of U."""
    circuit = figures.circuit
    k_opamp, block = _opamp(figures, ref)
    changes = [(circuit.node(a), circuit.node(b), y) for a, b, y in changes]
    changes = [c for c in changes if c[0] != c[1]]  # within one net: no change
    nodes = [(a, b) for a, b, _y in changes]
    X = _loop_and_pairs(figures, ref, nodes, frequencies)
    F, size = frequencies.size, len(changes)
    inputs = _across(X, block.in_pos, block.in_neg)  # (F, 1 + k)
    d = -inputs[:, 0]
    if size:
        rows = np.stack([_across(X, a, b) for a, b in nodes], axis=1)  # (F, k, 1 + k)
        D = np.stack([np.broadcast_to(np.asarray(y, dtype=complex), (F,))
                      for _a, _b, y in changes], axis=1)  # (F, k)
        M = np.eye(size)[None] + rows[:, :, 1:] * D[:, None, :]
        # one change (Sherman-Morrison): a division; a zero M is left to solve to report
        w = rows[:, :, 0] / M[:, :, 0] if size == 1 and M.all() else \
            np.linalg.solve(M, rows[:, :, :1])[:, :, 0]
        d = d + np.einsum("fk,fk->f", inputs[:, 1:], D * w)
    return return_ratio(figures.open_loop_gains(frequencies)[:, k_opamp], d)


def margins_with_admittances(figures: Figures, ref: str, changes) -> Margins:
    """Op-amp ``ref``'s margins (as Figures.margins_of) with admittances added:
    ``changes(frequencies)`` gives [(net_a, net_b, y (F,)), ...]; refined at the
    crossover like any margin, exact to rounding."""
    return figures.margins_from(
        ref, lambda frequencies: loop_with_admittances(figures, ref, changes(frequencies),
                                                       frequencies))


def loop_gain_candidates(figures: Figures, ref: str, net_a: str, net_b: str,
                         added: np.ndarray) -> np.ndarray:
    """Op-amp ``ref``'s loop gain T over the grid for V candidate admittances ``added``
    (V, F) between two nets, all from one solve (Sherman-Morrison): (V, F) complex."""
    circuit = figures.circuit
    k, block = _opamp(figures, ref)
    a, b = circuit.node(net_a), circuit.node(net_b)
    X = _loop_and_pairs(figures, ref, [(a, b)], figures.frequencies_hz)
    u_x0, u_z = _across(X, a, b).T
    d0, dz = -_across(X, block.in_pos, block.in_neg).T
    with np.errstate(divide="ignore", invalid="ignore"):
        d = d0 - added * dz * u_x0 / (1 + added * u_z)
    return return_ratio(figures.open_loop_gains(figures.frequencies_hz)[:, k], d)[0]


def source_gain_candidates(figures: Figures, index: int, ref: str, gains: np.ndarray,
                           frequencies: np.ndarray) -> np.ndarray:
    """Source ``index``'s signal gain (as SourceFigures.gain_from_source) at ``frequencies`` (F,) with
    op-amp ``ref``'s A(s) replaced by each row of ``gains`` (V, F), all from one solve of
    the source and loop columns (Sherman-Morrison): (V, F) complex."""
    circuit = figures.circuit
    k, block = _opamp(figures, ref)
    X = figures.solution.solve_excitations(frequencies, [Excitation.source(index),
                                                         Excitation.loop(ref)])
    delta = -(gains - figures.open_loop_gains(frequencies)[:, k])
    w_x0, w_z = _across(X, block.in_pos, block.in_neg).T
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = delta * w_x0 / (1 + delta * w_z)

    def voltage(net: str) -> np.ndarray:
        node = circuit.node(net)
        return pick(X, node, 0) - factor * pick(X, node, 1)

    return voltage(figures.stage.output_net)


def source_gain_with_each(figures: Figures, index: int, changes,
                          frequency_hz: float) -> np.ndarray:
    """Source ``index``'s signal gain (as SourceFigures.gain_from_source) at one frequency
    (0 Hz: from the DC system) with each of
    ``changes`` = [(net_a, net_b, y), ...] made alone (y the admittance added: 1/R' -
    1/R for a resistor changed from R to R'), all from one solve of the source column
    and a unit current between each pair (Sherman-Morrison): (len(changes),) complex.
    The cost grows linearly with the number of changes, not with a solve per change."""
    circuit = figures.circuit
    if not changes:
        return np.zeros(0, dtype=complex)
    nodes = [(circuit.node(a), circuit.node(b)) for a, b, _y in changes]
    added = np.array([y for _a, _b, y in changes], dtype=complex)
    solution = figures.solution
    rhs = np.concatenate([solution.excitations([Excitation.source(index)]),
                          solution.unit_currents(nodes)], axis=1)
    X = solution.solve(np.array([float(frequency_hz)]), rhs)  # (1, n, 1 + k)
    across = np.stack([_across(X, a, b)[0] for a, b in nodes])  # (k, 1 + k)
    u_x0 = across[:, 0]
    u_z = across[np.arange(len(nodes)), 1 + np.arange(len(nodes))]
    factor = added * u_x0 / (1 + added * u_z)

    def voltage(net: str) -> np.ndarray:
        node = circuit.node(net)
        if not node:
            return np.zeros(len(nodes), dtype=complex)
        return X[0, node - 1, 0] - factor * X[0, node - 1, 1:]

    return voltage(figures.stage.output_net)
