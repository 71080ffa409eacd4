"""Transfers of a stage for many sets of resistor values at once (corners, Monte Carlo).

The nominal system Y(s) at one frequency is perturbed by each resistor's change of
conductance times its stamp pattern, giving a (S, n, n) stack for S samples that one
batched solve handles: Y_s = Y + sum_r (1/R_rs - 1/R_r) P_r.
"""

from __future__ import annotations

import itertools

import numpy as np

from checker.analysis.mna import solve, system_stack


# Bytes of one batch of sample matrices: the (S, n, n) stack is built and solved in
# batches of at most this size, so memory does not grow with the number of samples
# (each matrix is solved alone, so the results are the same as in one piece).
BATCH_BYTES = 16 * 1024 * 1024


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
        base = figures.solution.dc_system()
    else:
        base = system_stack(figures.ac_matrices, figures.open_loop_gains(frequencies),
                            2j * np.pi * frequencies)[0]
    count = len(next(iter(values.values()))) if values else 1
    B = np.zeros((n, len(sources)))
    for j, i in enumerate(sources):
        if i in circuit.source_branch:
            B[circuit.row_of_branch(circuit.source_branch[i]), j] = 1.0
        else:
            B[circuit.row_of_node(circuit.source_node[i]), j] = 1.0
    # Each resistor's change of conductance, stamped at its (up to) four entries.
    stamps = []
    for ref, ohms in values.items():
        resistor = stage.element(ref)
        a, b = circuit.node(resistor.net_a), circuit.node(resistor.net_b)
        stamps.append((a, b, 1.0 / np.asarray(ohms, dtype=float) - 1.0 / resistor.value))
    rows = [circuit.node(net) - 1 for net in nets]
    result = np.zeros((count, len(sources), len(nets)), dtype=base.dtype)
    batch = max(1, BATCH_BYTES // max(1, n * n * base.itemsize))
    for start in range(0, count, batch):
        stop = min(count, start + batch)
        Y = np.broadcast_to(base, (stop - start, n, n)).copy()
        for a, b, delta in stamps:
            part = delta[start:stop]
            if a:
                Y[:, a - 1, a - 1] += part
            if b:
                Y[:, b - 1, b - 1] += part
            if a and b:
                Y[:, a - 1, b - 1] -= part
                Y[:, b - 1, a - 1] -= part
        X = solve(Y, np.broadcast_to(B, (stop - start,) + B.shape))
        for k, row in enumerate(rows):
            if row >= 0:
                result[start:stop, :, k] = X[:, row, :]
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
