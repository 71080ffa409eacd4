"""Transfers of a stage for many sets of resistor values at once (corners, Monte Carlo).

The nominal system Y(s) at one frequency is perturbed by each resistor's change of
conductance times its stamp pattern, giving a (S, n, n) stack for S samples that one
batched solve handles: Y_s = Y + sum_r (1/R_rs - 1/R_r) P_r.
"""

from __future__ import annotations

import itertools

import numpy as np

from checker.analysis.mna import solve, system_stack


def _pattern(n: int, a: int, b: int) -> np.ndarray:
    """The conductance stamp of a unit conductance between nodes a and b: (n, n)."""
    pattern = np.zeros((n, n))
    if a:
        pattern[a - 1, a - 1] += 1
    if b:
        pattern[b - 1, b - 1] += 1
    if a and b:
        pattern[a - 1, b - 1] -= 1
        pattern[b - 1, a - 1] -= 1
    return pattern


def transfer_samples(figures, values: dict[str, np.ndarray], sources: list[int],
                     nets: list[str], frequency_hz: float = 0.0) -> np.ndarray:
    """Voltages at ``nets`` per unit of each source in ``sources`` for every sample of
    resistor ``values`` (designator -> (S,) ohms). Returns (S, len(sources), len(nets))
    complex (real at 0 Hz)."""
    circuit = figures.circuit
    stage = figures.stage
    n = circuit.size
    frequencies = np.array([frequency_hz], dtype=float)
    if frequency_hz == 0.0:
        base = figures._dc_system()
    else:
        base = system_stack(figures.ac_matrices, figures.open_loop_gains(frequencies),
                            2j * np.pi * frequencies)[0]
    count = len(next(iter(values.values()))) if values else 1
    Y = np.broadcast_to(base, (count, n, n)).copy()
    for ref, ohms in values.items():
        resistor = stage.element(ref)
        a, b = circuit.node(resistor.net_a), circuit.node(resistor.net_b)
        delta = 1.0 / np.asarray(ohms, dtype=float) - 1.0 / resistor.value
        Y += delta[:, None, None] * _pattern(n, a, b)[None]
    B = np.zeros((n, len(sources)))
    for j, i in enumerate(sources):
        if i in circuit.source_branch:
            B[circuit.row_of_branch(circuit.source_branch[i]), j] = 1.0
        else:
            B[circuit.row_of_node(circuit.source_node[i]), j] = 1.0
    X = solve(Y, np.broadcast_to(B, (count,) + B.shape))
    rows = [circuit.node(net) - 1 for net in nets]
    result = np.zeros((count, len(sources), len(nets)), dtype=X.dtype)
    for k, row in enumerate(rows):
        if row >= 0:
            result[:, :, k] = X[:, row, :]
    return result


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
    generator = np.random.default_rng(seed)
    return {ref: nominal[ref] * (1 + tolerance[ref] * generator.uniform(-1, 1, samples))
            for ref in refs}
