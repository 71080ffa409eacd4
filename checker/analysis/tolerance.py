"""Transfers of a stage for many sets of resistor values at once (corners, Monte Carlo).

The nominal system Y(s) at one frequency is perturbed by each varied resistor's change of
conductance at the (up to) four entries it touches: Y_s = Y + sum_r (1/R_rs - 1/R_r) P_r,
with P_r the stamp of a unit conductance between the resistor's nodes (C.-W. Ho,
A. E. Ruehli, P. A. Brennan, "The modified nodal approach to network analysis", IEEE
Trans. Circuits and Systems, 1975). Only the (resistors, samples) array of changes is
built, never a dense matrix per resistor, and the samples are solved in chunks of
bounded memory (``BATCH_BYTES``), each sample alone, so a result does not depend on the
chunking.

Two exact solvers share the work:

* few varied resistors against the system's size (k <= ``LOW_RANK_SHARE`` n, or
  k <= ``LOW_RANK_MAX``): the Woodbury identity over their incidence vectors from one
  factorisation of the nominal matrix, a k x k solve per sample (lowrank.py);
* otherwise a sparse LU of every sample at once, its pivots chosen on the nominal matrix
  (batched_lu.py), whose cost is the fill of the elimination: linear in the resistors
  for the chains and ladders of a stage.

A sample whose elimination needed a multiplier beyond ``MULTIPLIER_LIMIT`` (a pivot of
the nominal that did not hold, see batched_lu.py) is solved again densely with partial
pivoting, so every sample is solved as stably as before.
"""

from __future__ import annotations

import functools
import itertools
from checker.record import record

import numpy as np

from checker.analysis.batched_lu import THRESHOLD, BatchedLU
from checker.analysis.lowrank import LowRankSolver
from checker.analysis.mna import SingularCircuit, solve, system_stack

# Bytes of one chunk of samples' working arrays: memory does not grow with the number
# of samples (each sample is solved alone, so the results are the same as in one piece).
BATCH_BYTES = 32 * 1024 * 1024
LOW_RANK_SHARE = 0.25  # Woodbury when the varied resistors are at most this share of n
LOW_RANK_MAX = 12  # ... or at most this many (a k x k solve is then cheap whatever n)
# A sample's factors are trusted while every multiplier stays within this (the nominal's
# threshold pivoting allows 1/THRESHOLD = 10; a little room for the samples' changes).
MULTIPLIER_LIMIT = 1.5 / THRESHOLD


def transfer_samples(figures, values: dict[str, np.ndarray], sources: list[int],
                     nets: list[str], frequency_hz: float = 0.0) -> np.ndarray:
    """Voltages at ``nets`` per unit of each source in ``sources`` for every sample of
    resistor ``values`` (designator -> (S,) ohms). Returns (S, len(sources), len(nets))
    complex (real at 0 Hz)."""
    circuit = figures.circuit
    n = circuit.size
    base = figures.cached(("tolerance-base", frequency_hz),
                          lambda: _base_matrix(figures, frequency_hz))
    count = len(next(iter(values.values()))) if values else 1
    B = np.zeros((n, len(sources)))
    for j, i in enumerate(sources):
        if i in circuit.source_branch:
            B[circuit.row_of_branch(circuit.source_branch[i]), j] = 1.0
        else:
            B[circuit.row_of_node(circuit.source_node[i]), j] = 1.0
    refs = list(values)
    a, b, nominal = figures.cached(("tolerance-elements", tuple(refs)),
                                   lambda: _elements(figures, refs))
    # (resistors, samples) changes of conductance
    changes = 1.0 / np.array([values[ref] for ref in refs], dtype=float).reshape(
        len(refs), count) - nominal[:, None]
    rows = np.array([circuit.node(net) - 1 for net in nets], dtype=np.int64)
    result = np.zeros((count, len(sources), len(nets)), dtype=base.dtype)
    kept = np.flatnonzero(rows >= 0)
    if kept.size == 0:
        return result
    low_rank = len(refs) <= max(LOW_RANK_MAX, LOW_RANK_SHARE * n)
    key = ("tolerance-solver", frequency_hz, tuple(sources), tuple(refs), tuple(rows[kept]),
           low_rank)
    solver = figures.cached(key, lambda: _solver(base, B, a, b, rows[kept], low_rank))
    item = base.itemsize
    per_sample = (len(refs) * (len(refs) + len(sources)) * item if low_rank
                  else (2 * solver.entries + 3 * n * len(sources)) * item)
    batch = max(1, BATCH_BYTES // max(1, per_sample))
    for start in range(0, count, batch):
        stop = min(count, start + batch)
        part = changes[:, start:stop]
        out = (_low_rank_outputs(solver, part.T, rows[kept]) if low_rank
               else _sparse_outputs(solver, base, B, a, b, part, rows[kept]))
        result[start:stop][:, :, kept] = out
    return result


def _elements(figures, refs: list[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each resistor's two rows (-1: ground) and nominal conductance."""
    circuit, stage = figures.circuit, figures.stage
    parts = [stage.element(r) for r in refs]
    return (np.array([circuit.node(p.net_a) - 1 for p in parts], dtype=np.int64),
            np.array([circuit.node(p.net_b) - 1 for p in parts], dtype=np.int64),
            np.array([1.0 / p.value for p in parts], dtype=float))


def _base_matrix(figures, frequency_hz: float) -> np.ndarray:
    if frequency_hz == 0.0:
        return figures.solution.dc_system()
    frequencies = np.array([frequency_hz], dtype=float)
    return system_stack(figures.ac_matrices, figures.open_loop_gains(frequencies),
                        2j * np.pi * frequencies)[0]


def _solver(base, B, a, b, rows, low_rank: bool):
    if low_rank:
        try:
            return LowRankSolver(base, B, a, b)
        except np.linalg.LinAlgError:
            raise SingularCircuit("the stage's equations are singular") from None
    pattern = base != 0
    for i, j in ((a, a), (b, b), (a, b), (b, a)):
        both = (i >= 0) & (j >= 0)
        pattern[i[both], j[both]] = True
    # each resistor's stamp as index arithmetic: its (up to) four stored entries, in
    # layers within which no entry repeats, so each layer is one indexed add
    n = base.shape[0]
    flat, columns, signs = [], [], []
    for k, (i, j) in enumerate(zip(a, b)):
        for r, c, sign in ((i, i, 1.0), (j, j, 1.0), (i, j, -1.0), (j, i, -1.0)):
            if r >= 0 and c >= 0:
                flat.append(r * n + c)
                columns.append(k)
                signs.append(sign)
    flat_array = np.array(flat, dtype=np.int64)
    _unique, first_at = np.unique(flat_array, return_index=True)
    firsts = np.sort(first_at)  # each touched entry stored first: diagonals (+), then -
    signs_first = np.array(signs)[firsts]
    leading = flat_array[np.concatenate([firsts[signs_first > 0], firsts[signs_first < 0]])]
    try:
        solver = BatchedLU(base, pattern, np.unique(rows), (leading // n, leading % n))
    except np.linalg.LinAlgError:
        raise SingularCircuit("the stage's equations are singular") from None
    stored = solver.index(flat_array // n, flat_array % n)
    seen: dict[int, int] = {}
    layers: list[list[int]] = []
    order = np.argsort(stored, kind="stable")  # within a layer, in storage order
    for position in order.tolist():
        entry = int(stored[position])
        layer = seen.get(entry, 0)
        seen[entry] = layer + 1
        if layer == len(layers):
            layers.append([])
        layers[layer].append(position)
    columns_array, signs_array = np.array(columns, dtype=np.int64), np.array(signs)
    stamps = []
    for members in layers:
        chosen = np.array(members, dtype=np.int64)
        for sign in (1.0, -1.0):  # an add and a subtract: no multiply by the sign
            part = chosen[signs_array[chosen] == sign]
            touched = stored[part]
            entries: np.ndarray | slice = touched
            # the first layer touches each touched entry once, stored first: slices
            if touched.size and np.array_equal(touched, np.arange(touched[0],
                                                                  touched[0] + touched.size)):
                entries = slice(int(touched[0]), int(touched[0]) + touched.size)
            if part.size:
                stamps.append((entries, columns_array[part], sign))
    position = {int(unknown): at for at, unknown in enumerate(solver.wanted_order)}
    return _Sparse(solver, solver.gather(base), tuple(stamps),
                   np.array([position[int(r)] for r in rows], dtype=np.int64))


@record(frozen=True)
class _Sparse:
    lu: BatchedLU
    base_values: np.ndarray  # (entries,) the nominal matrix's stored entries
    stamps: tuple  # per layer and sign: (stored entries, resistor columns, +1 or -1)
    picks: np.ndarray  # where each wanted row is among the solve's returned unknowns

    @property
    def entries(self) -> int:
        return self.lu.entries


def _low_rank_outputs(solver: LowRankSolver, delta, rows) -> np.ndarray:
    try:
        out = solver.outputs(delta, rows)
    except np.linalg.LinAlgError:
        raise SingularCircuit("the stage's equations are singular") from None
    if not np.all(np.isfinite(out)):
        raise SingularCircuit("the stage's equations are singular")
    return out


def _sparse_outputs(solver: _Sparse, base, B, a, b, changes, rows) -> np.ndarray:
    """(S, m, len(rows)) by the batched sparse LU for ``changes`` (k, S), a sample whose
    pivots did not hold solved again densely."""
    values = np.repeat(solver.base_values[:, None], changes.shape[1], axis=1)
    for entries, columns, sign in solver.stamps:
        if sign > 0:
            values[entries] += changes[columns]
        else:
            values[entries] -= changes[columns]
    with np.errstate(all="ignore"):
        X = solver.lu.solve(values, B)[solver.picks]  # (rows, m, S); values: the factors
        bad = ~(solver.lu.largest_multiplier(values) <= MULTIPLIER_LIMIT)
        bad |= ~np.isfinite(X).all(axis=(0, 1))
    out = np.moveaxis(X, 2, 0).swapaxes(1, 2)  # (S, m, rows)
    if bad.any():
        out[bad] = np.swapaxes(_dense(base, B, a, b, changes[:, bad].T)[:, rows, :], 1, 2)
    return out


def _dense(base, B, a, b, delta) -> np.ndarray:
    """Dense solves with partial pivoting of the given samples: (S, n, m)."""
    Y = np.broadcast_to(base, (delta.shape[0],) + base.shape).copy()
    for k, (i, j) in enumerate(zip(a, b)):
        if i >= 0:
            Y[:, i, i] += delta[:, k]
        if j >= 0:
            Y[:, j, j] += delta[:, k]
        if i >= 0 and j >= 0:
            Y[:, i, j] -= delta[:, k]
            Y[:, j, i] -= delta[:, k]
    return solve(Y, np.broadcast_to(B, (delta.shape[0],) + B.shape))


def corner_values(refs: list[str], nominal: dict[str, float], tolerance: dict[str, float]
                  ) -> dict[str, np.ndarray]:
    """Every combination of each resistor at R(1 - t) and R(1 + t): 2^len(refs) samples."""
    corners = np.array(list(itertools.product((-1.0, 1.0), repeat=len(refs))))
    return {ref: nominal[ref] * (1 + corners[:, i] * tolerance[ref])
            for i, ref in enumerate(refs)}


def uniform_values(refs: list[str], nominal: dict[str, float], tolerance: dict[str, float],
                   samples: int, seed: int) -> dict[str, np.ndarray]:
    """Each resistor drawn uniformly within its tolerance (a conservative shape for a
    tolerance band; common practice), reproducibly from ``seed``."""
    draws = _uniform_draws(tuple(refs), int(samples), int(seed))
    return {ref: nominal[ref] * (1 + tolerance[ref] * draws[i]) for i, ref in enumerate(refs)}


@functools.lru_cache(maxsize=4)
def _uniform_draws(refs: tuple[str, ...], samples: int, seed: int) -> np.ndarray:
    """(len(refs), samples) uniform on [-1, 1], drawn resistor after resistor from
    ``seed``: the same for every tolerance, so a fix's tighter tolerances re-use them
    (read-only)."""
    generator = np.random.default_rng(seed)
    draws = np.array([generator.uniform(-1, 1, samples) for _ref in refs]).reshape(
        len(refs), samples)
    draws.flags.writeable = False
    return draws
