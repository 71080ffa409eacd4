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

The k x k systems I + D_s W of all samples are eliminated together, each step one array
operation over the samples (:func:`near_identity_solve`), instead of one library call
per sample.
"""

from __future__ import annotations

import numpy as np


def incidence_rows(a: np.ndarray, b: np.ndarray, values: np.ndarray) -> np.ndarray:
    """U^T M for the incidence U of elements between rows ``a`` and ``b`` (-1: ground):
    row a minus row b of ``values`` (n, ...) for each element."""
    zero = np.zeros((1,) + values.shape[1:], dtype=values.dtype)
    padded = np.concatenate([values, zero])  # index -1 reads the zero row
    return padded[a] - padded[b]


def near_identity_solve(delta: np.ndarray, W: np.ndarray, R: np.ndarray) -> np.ndarray:
    """y_s = (I + D_s W)^{-1} D_s R for every row d_s of ``delta`` (S, k), D_s = diag(d_s),
    W (k, k), R (k, m): (k, m, S).

    Gaussian elimination without row exchanges, every sample at once. Where each
    multiplier of a sample is at most 1 in magnitude, its diagonal pivot is the largest
    of its column at every step, so the elimination is the one partial pivoting would
    choose (Golub & Van Loan, 4th ed., §3.4) and as stable; a tolerance's small change
    keeps I + D W near the identity, so that is the usual case. A sample with a larger
    multiplier, or a result that is not finite, is solved again with partial pivoting
    (numpy.linalg.solve, which raises LinAlgError on a singular one)."""
    S, k = delta.shape
    dtype = np.result_type(delta, W, R)
    columns = delta.T.astype(dtype)  # (k, S)
    A = columns[:, None, :] * W.astype(dtype)[:, :, None]  # A[i, j, s] = d_si W_ij
    A[np.arange(k), np.arange(k)] += 1.0
    b = columns[:, None, :] * R.astype(dtype)[:, :, None]  # (k, m, S)
    largest = np.zeros(S)
    with np.errstate(all="ignore"):
        for p in range(k - 1):
            f = A[p + 1:, p] / A[p, p]  # (k - p - 1, S) multipliers
            np.maximum(largest, np.abs(f).max(axis=0), out=largest)
            A[p + 1:, p + 1:] -= f[:, None, :] * A[p, p + 1:][None]
            b[p + 1:] -= f[:, None, :] * b[p][None]
        for p in range(k - 1, -1, -1):
            for j in range(p + 1, k):  # term by term: each sample's sum in a fixed order
                b[p] -= A[p, j] * b[j]
            b[p] /= A[p, p]
        bad = ~(largest <= 1.0) | ~np.isfinite(b).all(axis=(0, 1))
    if bad.any():
        d = delta[bad]
        M = d[:, :, None] * W[None]
        M[:, np.arange(k), np.arange(k)] += 1.0
        b[:, :, bad] = np.moveaxis(np.linalg.solve(M, d[:, :, None] * R[None]), 0, -1)
    return b


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
        y = near_identity_solve(delta, self.W, self.UX0)  # (k, m, S)
        # Z y term by term, not as one matrix product, whose blocking (and so its last
        # bits) would depend on how many samples a chunk holds
        moved = Z[:, 0, None, None] * y[0][None]  # (r, m, S)
        for j in range(1, self.k):
            moved += Z[:, j, None, None] * y[j][None]
        return X0.T[None] - np.moveaxis(moved, 2, 0).swapaxes(1, 2)
