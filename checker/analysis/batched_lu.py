"""Sparse LU of many matrices of one sparsity pattern at once, with the pivots chosen
once on a nominal member.

Circuit matrices are sparse: a chain of resistors fills only a band. The elimination
order is chosen on the nominal matrix by Markowitz's criterion (the pivot of least
(r - 1)(c - 1), r and c the counts of its row and column) among the entries within a
threshold of their column's largest (threshold partial pivoting; Duff, Erisman & Reid,
Direct Methods for Sparse Matrices, 2nd ed., §7.8 and §5.4). The filled pattern of that
elimination is stored as an (entries, S) array, so each elimination step is a few
vector operations over all S samples: the cost per sample is the fill, linear in the
elements for the ladders and chains of a stage, not n^3 (the ordering itself, once per
stage and frequency, is n steps of n x n vector work).

The samples' matrices differ from the nominal only by small conductance changes, so the
nominal's pivots stay good. Whether they held is read from the multipliers: threshold
pivoting keeps every |l_ij| <= 1/THRESHOLD, which bounds the growth of the factors as
partial pivoting's |l_ij| <= 1 does (Duff, Erisman & Reid, §5.4; Golub & Van Loan, 4th
ed., §3.4; section numbers from memory); :meth:`BatchedLU.largest_multiplier` gives each sample's, so a caller can
re-solve any sample whose pivots did not hold.
"""

from __future__ import annotations

import numpy as np

THRESHOLD = 0.1  # a pivot within this share of its column's largest (common practice)


def _order(matrix: np.ndarray, pattern: np.ndarray, last: np.ndarray
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(pivot rows, pivot columns, filled pattern) of the threshold-Markowitz
    elimination of ``matrix`` whose structural nonzeros are ``pattern``, the columns
    ``last`` eliminated last."""
    n = matrix.shape[0]
    early = np.ones(n, bool)
    early[last] = False
    work, filled = matrix.astype(complex if np.iscomplexobj(matrix) else float), \
        pattern.copy()
    active_rows, active_cols = np.ones(n, bool), np.ones(n, bool)
    rows, cols = [], []
    for _step in range(n):
        live = filled & active_rows[:, None] & active_cols[None, :]
        size = np.abs(work) * live
        largest = size.max(axis=0)
        eligible = live & (size >= THRESHOLD * largest[None, :]) & (size > 0)
        if (active_cols & early).any():
            eligible &= early[None, :]
        if not eligible.any():
            raise np.linalg.LinAlgError("no pivot")
        counts = (live.sum(axis=1)[:, None] - 1) * (live.sum(axis=0)[None, :] - 1)
        cost = np.where(eligible, counts, np.iinfo(np.int64).max)
        best = np.flatnonzero(cost == cost.min())
        relative = (size / np.where(largest > 0, largest, 1.0)[None, :]).ravel()[best]
        i, j = divmod(int(best[np.argmax(relative)]), n)
        rows.append(i)
        cols.append(j)
        active_rows[i] = active_cols[j] = False
        below = np.flatnonzero(live[:, j] & active_rows)
        if below.size:
            factors = work[below, j] / work[i, j]
            work[below] -= factors[:, None] * work[i][None, :]
            filled[below] |= filled[i][None, :] & active_cols[None, :]
    return np.array(rows), np.array(cols), filled


class BatchedLU:
    """The elimination program of one pattern; :meth:`solve` runs it over samples."""

    def __init__(self, nominal: np.ndarray, pattern: np.ndarray, wanted: np.ndarray,
                 first: tuple[np.ndarray, np.ndarray] | None = None):
        """``wanted``: the unknowns a solve returns; they are eliminated last, so the
        back substitution stops at them. ``first``: (rows, columns) of distinct
        positions stored first, in that order (a caller's slice of the storage)."""
        n = nominal.shape[0]
        self.n = n
        self.rows, self.cols, filled = _order(nominal, pattern, wanted)
        self.tail = n - len(wanted)
        self.wanted_order = self.cols[self.tail:]  # the unknowns a solve returns, in order
        permuted = filled[self.rows][:, self.cols]  # pivot p on the diagonal at (p, p)
        where = np.full((n, n), -1, dtype=np.int64)
        positions = np.flatnonzero(permuted)
        if first is not None:
            inverse_rows, inverse_cols = np.empty(n, np.int64), np.empty(n, np.int64)
            inverse_rows[self.rows] = np.arange(n)
            inverse_cols[self.cols] = np.arange(n)
            leading = inverse_rows[first[0]] * n + inverse_cols[first[1]]
            positions = np.concatenate([leading, np.setdiff1d(positions, leading)])
        where.flat[positions] = np.arange(positions.size)
        self.entries = positions.size
        self._where_permuted = where
        self.steps = []
        for p in range(n):
            below = np.flatnonzero(permuted[p + 1:, p]) + p + 1
            right = np.flatnonzero(permuted[p, p + 1:]) + p + 1
            self.steps.append((int(where[p, p]), below, where[below, p], right,
                               where[p, right], where[np.ix_(below, right)].ravel()))
        self.flops = sum(len(s[1]) * len(s[3]) for s in self.steps)
        # the steps with work, so a solve loops over those alone
        self._eliminating = [(s[0], s[2], s[4], s[5]) for s in self.steps if s[2].size]
        self._forward = [(p, s[1], s[2]) for p, s in enumerate(self.steps) if s[1].size]
        self._lower = np.concatenate([step[2] for step in self.steps] + [np.zeros(0, int)])

    def index(self, row: np.ndarray, col: np.ndarray) -> np.ndarray:
        """Storage entries of the original (row, col) positions (-1: not stored)."""
        inverse_rows, inverse_cols = np.empty(self.n, np.int64), np.empty(self.n, np.int64)
        inverse_rows[self.rows] = np.arange(self.n)
        inverse_cols[self.cols] = np.arange(self.n)
        return self._where_permuted[inverse_rows[row], inverse_cols[col]]

    def gather(self, matrix: np.ndarray) -> np.ndarray:
        """The stored entries of one dense matrix: (entries,)."""
        permuted = matrix[self.rows][:, self.cols]
        flat = np.zeros(self.entries, dtype=matrix.dtype)
        mask = self._where_permuted >= 0
        flat[self._where_permuted[mask]] = permuted[mask]
        return flat

    def largest_multiplier(self, factors: np.ndarray) -> np.ndarray:
        """Each sample's largest |l_ij| of the factors :meth:`solve` left in its
        ``values``: at most 1/THRESHOLD when the nominal's pivots held."""
        if self._lower.size == 0:
            return np.zeros(factors.shape[1])
        return np.abs(factors[self._lower]).max(axis=0)

    def solve(self, values: np.ndarray, B: np.ndarray) -> np.ndarray:
        """Solve every sample's system: ``values`` (entries, S) of the matrices, B (n, m)
        the same right-hand sides for all. Returns X (len(wanted), m, S) of the unknowns
        ``wanted_order``; ``values`` is overwritten with the factors."""
        samples = values.shape[1]
        for pivot, lower, upper, targets in self._eliminating:
            values[lower] /= values[pivot]
            if upper.size:
                values[targets] -= (values[lower][:, None, :] * values[upper][None, :, :]
                                    ).reshape(-1, samples)
        y = np.repeat(B[self.rows].astype(values.dtype)[:, :, None], samples, axis=2)
        for p, below, lower in self._forward:
            y[below] -= values[lower][:, None, :] * y[p][None]
        for p in range(self.n - 1, self.tail - 1, -1):  # unknown cols[p] is the p-th
            pivot, _below, _lower, right, upper, _targets = self.steps[p]
            if right.size:
                y[p] -= np.einsum("cs,cms->ms", values[upper], y[right])
            y[p] /= values[pivot]
        return y[self.tail:]
