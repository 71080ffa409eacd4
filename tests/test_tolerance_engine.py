"""The tolerance engine's fast paths (Woodbury updates, the batched sparse LU, the dense
re-solve) against a direct dense solve of every sample.

The reference stacks each sample's MNA matrix in full (the nominal DC or AC system with
every resistor's conductance change stamped at its four entries) and solves it with
numpy.linalg.solve (LU with partial pivoting); the engine must agree to 1e-9 relative
(both are backward stable and the stage is well conditioned: common practice).
"""

from __future__ import annotations

import random

import numpy as np
import pytest
from rule_helpers import build, mesh_stage

from checker.analysis import AnalysisOptions, analyse, lowrank, tolerance
from checker.analysis.mna import system_stack

OPAMP = "(part gp-bipolar)"


def random_stage(seed: int, resistors: int = 18) -> str:
    """An inverting stage whose input and feedback sides are random resistor meshes."""
    rng = random.Random(seed)
    nets = ["in", "fb", "out"] + [f"n{k}" for k in range(6)]
    parts = ["(resistor R1 in fb 10k)", "(resistor R2 fb out 47k)"]
    for k in range(3, resistors + 1):
        a, b = rng.sample(nets + ["gnd"], 2)
        ohms = rng.choice([1, 2.2, 4.7, 10, 22, 47, 100]) * 1e3
        parts.append(f"(resistor R{k} {a} {b} {ohms:g})")
    parts += [f"(resistor R{resistors + 1 + k} n{k} gnd 100k)" for k in range(6)]
    parts += [f"(resistor R{resistors + 7 + k} n{k} {('in', 'fb')[k % 2]} 22k)"
              for k in range(6)]  # no net left dangling
    return mesh_stage(OPAMP, parts)


def dense_reference(figures, values, sources, nets, frequency_hz):
    circuit, stage = figures.circuit, figures.stage
    if frequency_hz == 0.0:
        base = figures.solution.dc_system()
    else:
        f = np.array([frequency_hz])
        base = system_stack(figures.ac_matrices, figures.open_loop_gains(f), 2j * np.pi * f)[0]
    count = len(next(iter(values.values())))
    Y = np.repeat(base[None], count, axis=0)
    for ref, ohms in values.items():
        part = stage.element(ref)
        a, b = circuit.node(part.net_a) - 1, circuit.node(part.net_b) - 1
        change = 1.0 / ohms - 1.0 / part.value
        for i, j, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if i >= 0 and j >= 0:
                Y[:, i, j] += sign * change
    B = np.zeros((circuit.size, len(sources)))
    for column, index in enumerate(sources):
        if index in circuit.source_branch:
            B[circuit.row_of_branch(circuit.source_branch[index]), column] = 1.0
        else:
            B[circuit.row_of_node(circuit.source_node[index]), column] = 1.0
    X = np.linalg.solve(Y, np.repeat(B[None], count, axis=0))
    rows = [circuit.node(net) - 1 for net in nets]
    return np.stack([X[:, row, :] for row in rows], axis=2)


def case(seed: int, varied: int | None = None, count: int = 300):
    stage = build(random_stage(seed))[0]
    figures = analyse(stage, AnalysisOptions())
    refs = [p.ref for p in stage.resistors()][:varied]
    nominal = {p.ref: p.value for p in stage.resistors()}
    values = tolerance.uniform_values(refs, nominal, dict.fromkeys(refs, 0.2), count, seed)
    return figures, values, ["out", "fb"]


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("frequency_hz", [0.0, 2e3])
@pytest.mark.parametrize("varied", [3, None])  # Woodbury (3 of 30), batched LU (all 30)
def test_engine_matches_a_dense_solve_of_every_sample(seed, frequency_hz, varied):
    figures, values, nets = case(seed, varied)
    got = tolerance.transfer_samples(figures, values, [0], nets, frequency_hz)
    expected = dense_reference(figures, values, [0], nets, frequency_hz)
    assert got.shape == expected.shape == (300, 1, 2)
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-12 * np.abs(expected).max())


def test_both_solvers_agree_on_the_same_samples(monkeypatch):
    figures, values, nets = case(4)
    sparse = tolerance.transfer_samples(figures, values, [0], nets)
    monkeypatch.setattr(tolerance, "LOW_RANK_MAX", 100)
    low_rank = tolerance.transfer_samples(figures, values, [0], nets)
    np.testing.assert_allclose(low_rank, sparse, rtol=1e-9)


def test_a_sample_whose_pivots_do_not_hold_is_solved_densely(monkeypatch):
    figures, values, nets = case(5)
    monkeypatch.setattr(tolerance, "MULTIPLIER_LIMIT", 0.0)  # every sample re-solved
    got = tolerance.transfer_samples(figures, values, [0], nets)
    np.testing.assert_allclose(got, dense_reference(figures, values, [0], nets, 0.0),
                               rtol=1e-9)


def test_chunking_does_not_change_a_sample(monkeypatch):
    figures, values, nets = case(6, count=1000)
    whole = tolerance.transfer_samples(figures, values, [0], nets)
    monkeypatch.setattr(tolerance, "BATCH_BYTES", 4096)  # a few boards per chunk
    fresh = analyse(figures.stage, AnalysisOptions())
    np.testing.assert_array_equal(tolerance.transfer_samples(fresh, values, [0], nets), whole)


def _reference_near_identity(delta, W, R):
    """(I + D_s W)^{-1} D_s R by numpy.linalg.solve (LU with partial pivoting), (k, m, S)."""
    M = delta[:, :, None] * W[None] + np.eye(W.shape[0])
    return np.moveaxis(np.linalg.solve(M, delta[:, :, None] * R[None]), 0, -1)


@pytest.mark.parametrize("k", [1, 2, 4, 7, 12])
@pytest.mark.parametrize("complex_", [False, True])
def test_the_samples_eliminated_together_match_a_pivoted_solve(k, complex_):
    rng = np.random.default_rng(k)
    W = rng.standard_normal((k, k)) * 1e3 + (1j * rng.standard_normal((k, k)) * 1e3
                                              if complex_ else 0)
    R = rng.standard_normal((k, 2))
    delta = 1e-4 * rng.uniform(-1, 1, (500, k))  # tolerance-sized changes: near I
    got = lowrank.near_identity_solve(delta, W, R)
    np.testing.assert_allclose(got, _reference_near_identity(delta, W, R), rtol=1e-10,
                               atol=1e-14)


def test_a_sample_that_needs_a_row_exchange_is_solved_with_pivoting():
    # I + D W = [[0, 1], [1, 1]] for the first sample: a zero leading pivot, which the
    # elimination without row exchanges cannot pass; the second sample is near I
    W = np.array([[-1.0, 1.0], [1.0, 0.0]])
    delta = np.array([[1.0, 1.0], [1e-3, 2e-3]])
    R = np.array([[1.0], [2.0]])
    got = lowrank.near_identity_solve(delta, W, R)
    np.testing.assert_allclose(got, _reference_near_identity(delta, W, R), rtol=1e-12)
    np.testing.assert_allclose(got[:, 0, 0], [1.0, 1.0])  # [[0,1],[1,1]] y = [1, 2]


def test_a_singular_sample_is_refused():
    W = np.array([[-1.0, 0.0], [0.0, 0.0]])  # I + D W = [[0, 0], [0, 1]]
    with pytest.raises(np.linalg.LinAlgError):
        lowrank.near_identity_solve(np.array([[1.0, 0.5]]), W, np.ones((2, 1)))


def test_a_sample_solved_alone_is_bit_identical_to_it_among_many():
    rng = np.random.default_rng(9)
    W, R = rng.standard_normal((5, 5)) * 1e3, rng.standard_normal((5, 2))
    delta = 1e-4 * rng.uniform(-1, 1, (3000, 5))
    together = lowrank.near_identity_solve(delta, W, R)
    alone = lowrank.near_identity_solve(delta[1234:1235], W, R)
    assert np.array_equal(together[:, :, 1234:1235], alone)
