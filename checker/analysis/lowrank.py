"""Solves of a nominal system changed by a few two-terminal conductances, from one
factorisation of the nominal matrix (the Woodbury identity).

Sample s's matrix is Y_s = Y0 + U D_s U^T with U the (n, k) incidence of the k varied
elements (+1 at one terminal's row, -1 at the other's, none for ground) and D_s the
diagonal of their conductance changes. In the form that needs no D^{-1} (so an element
left at its nominal value, a change of 0, is fine):

    (Y0 + U D U^T)^{-1} = Y0^{-1} - Y0^{-1} U (I + D U^T Y0^{-1} U)^{-1} D U^T Y0^{-1}

(Golub & Van Loan, Matrix Computations, 4th ed., §2.1.4, the Sherman-Morrison-Woodbury
formula, with V = U D). So X_s = X0 - Z (I + D_s W)^{-1} D_s (U^T X0) with X0 = Y0^{-1} B,
Z = Y0^{-1} U and W = U^T Z: per sample one k x k solve instead of an n x n one.
"""

from __future__ import annotations

import numpy as np


def incidence_rows(a: np.ndarray, b: np.ndarray, values: np.ndarray) -> np.ndarray:
    """U^T M for the incidence U of elements between rows ``a`` and ``b`` (-1: ground):
    row a minus row b of ``values`` (n, ...) for each element."""
    zero = np.zeros((1,) + values.shape[1:], dtype=values.dtype)
    padded = np.concatenate([values, zero])  # index -1 reads the zero row
    return padded[a] - padded[b]


class LowRankSolver:
    """Outputs of Y_s x = B at chosen rows for many diagonal changes D_s."""

    def __init__(self, base: np.ndarray, B: np.ndarray, a: np.ndarray, b: np.ndarray):
        n, k = base.shape[0], len(a)
        U = np.zeros((n, k))
        for column, (i, j) in enumerate(zip(a, b)):
            if i >= 0:
                U[i, column] += 1.0
            if j >= 0:
                U[j, column] -= 1.0
        solved = np.linalg.solve(base, np.concatenate([B.astype(base.dtype), U], axis=1))
        self.X0, self.Z = solved[:, :B.shape[1]], solved[:, B.shape[1]:]
        self.W = incidence_rows(a, b, self.Z)  # (k, k) U^T Y0^{-1} U
        self.UX0 = incidence_rows(a, b, self.X0)  # (k, m) U^T X0
        self.k = k

    def outputs(self, delta: np.ndarray, rows: np.ndarray) -> np.ndarray:
        """(S, m, len(rows)) of X_s at ``rows`` for changes ``delta`` (S, k)."""
        X0, Z = self.X0[rows], self.Z[rows]  # (r, m), (r, k)
        if self.k == 0:
            return np.broadcast_to(X0.T, (delta.shape[0],) + X0.T.shape).copy()
        M = delta[:, :, None] * self.W[None]
        M[:, np.arange(self.k), np.arange(self.k)] += 1.0
        y = np.linalg.solve(M, delta[:, :, None] * self.UX0[None])  # (S, k, m)
        return np.swapaxes(X0[None] - Z[None] @ y, 1, 2)
