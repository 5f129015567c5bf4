"""One update of every rule, written out by hand from its published formula, against the engine;
and a member of a stack trains exactly as it does alone."""

from __future__ import annotations

import numpy as np
import pytest

from labbench.maps import (CompetitiveLearning, HebbianFeatures, MapTraining, NeuralGas,
                           SelfOrganisingMap, grid_positions)
from labbench.maps.init import pca_plane, random_unit_rows


def _one_step(method, x, start, seed=3):
    """Train ``method`` from ``start`` on the single row x for one epoch: one update, at the
    initial rate and radius."""
    t = MapTraining(method, [x[None, :]], None, seeds=[seed], epochs=1)
    t.set_start(start[None])
    t.run()
    return t.method.P[0]


def test_one_som_update_is_kohonens_rule():
    # Kohonen 1982/2001: w_j += rate * exp(-g(c, j)^2 / (2 sigma^2)) * (x - w_j), c = best unit
    rng = np.random.default_rng(0)
    x = rng.normal(size=3)
    rows, cols, rate, sigma = 3, 4, 0.4, 1.5
    start = rng.normal(size=(rows * cols, 3))
    method = SelfOrganisingMap(rows, cols, learning_rate=rate, radius=sigma, init="random_rows")
    got = _one_step(method, x, start)
    c = np.argmin(((start - x) ** 2).sum(1))
    g2 = ((grid_positions(rows, cols, "rectangular") - grid_positions(rows, cols, "rectangular")[c]) ** 2).sum(1)
    expected = start + rate * np.exp(-g2 / (2 * sigma ** 2))[:, None] * (x - start)
    np.testing.assert_allclose(got, expected, rtol=1e-14, atol=1e-14)


def test_one_winner_takes_all_update_moves_only_the_winner():
    # Rumelhart & Zipser 1985: w_c += rate * (x - w_c) for the nearest unit c only
    rng = np.random.default_rng(1)
    X = rng.normal(size=(1, 4))
    start = rng.normal(size=(5, 4))
    got = _one_step(CompetitiveLearning(5, learning_rate=0.3, init="random_rows"), X[0], start)
    c = np.argmin(((start - X[0]) ** 2).sum(1))
    expected = start.copy()
    expected[c] += 0.3 * (X[0] - start[c])
    np.testing.assert_allclose(got, expected, rtol=1e-14)


def test_one_neural_gas_update_is_rank_based():
    # Martinetz, Berkovich & Schulten 1993: w_j += rate * exp(-rank_j / lambda) * (x - w_j)
    rng = np.random.default_rng(2)
    X = rng.normal(size=(1, 3))
    start = rng.normal(size=(4, 3))
    got = _one_step(NeuralGas(4, learning_rate=0.5, neighbourhood_range=2.0), X[0], start)
    ranks = np.argsort(np.argsort(((start - X[0]) ** 2).sum(1)))
    expected = start + 0.5 * np.exp(-ranks / 2.0)[:, None] * (X[0] - start)
    np.testing.assert_allclose(got, expected, rtol=1e-14)


@pytest.mark.parametrize("rule", ["sanger", "hebb"])
def test_one_hebbian_update_is_sangers_rule(rule):
    # Sanger 1989: w_j += rate * y_j (x - sum_{i<=j} y_i w_i); plain Hebb: w_j += rate * y_j x
    rng = np.random.default_rng(4)
    x = rng.normal(size=5)
    W = random_unit_rows(rng, 3, 5)
    got = _one_step(HebbianFeatures(3, rule=rule, learning_rate=0.05), x, W)
    y = W @ x
    expected = W.copy()
    for j in range(3):
        target = x - (y[: j + 1, None] * W[: j + 1]).sum(0) if rule == "sanger" else x
        expected[j] = W[j] + 0.05 * y[j] * target
    np.testing.assert_allclose(got, expected, rtol=1e-13, atol=1e-15)


def test_the_batch_map_is_the_neighbourhood_weighted_mean():
    # Kohonen's batch map (2001, section 3.14): w_j = sum_i h(c_i, j) x_i / sum_i h(c_i, j)
    rng = np.random.default_rng(5)
    X = rng.normal(size=(40, 2))
    method = SelfOrganisingMap(2, 3, radius=1.0, training="batch", init="pca_plane")
    t = MapTraining(method, [X], None, seeds=[0], epochs=1)
    start = pca_plane(X, grid_positions(2, 3, "rectangular"))
    t.run()
    c = np.argmin(((X[:, None, :] - start[None]) ** 2).sum(-1), axis=1)
    pos = grid_positions(2, 3, "rectangular")
    h = np.exp(-((pos[c][:, None, :] - pos[None]) ** 2).sum(-1) / 2.0)     # (rows, units)
    expected = (h.T @ X) / h.sum(0)[:, None]
    np.testing.assert_allclose(t.method.P[0], expected, rtol=1e-12)


def test_batch_competitive_learning_is_lloyds_iteration():
    # reference: scikit-learn's KMeans with the same starting centres, algorithm="lloyd",
    # n_init=1: after the same number of iterations the centres agree (Lloyd 1982)
    from sklearn.cluster import KMeans

    rng = np.random.default_rng(7)
    X = np.concatenate([rng.normal(loc, 0.7, size=(100, 2)) for loc in ([0, 0], [4, 0], [0, 4])])
    start = X[[0, 1, 150, 250]]
    t = MapTraining(CompetitiveLearning(4, training="batch"), [X], None, seeds=[0], epochs=5)
    t.set_start(start[None])
    t.run()
    km = KMeans(4, init=start, n_init=1, max_iter=5, tol=0.0, algorithm="lloyd").fit(X)
    np.testing.assert_allclose(t.method.P[0], km.cluster_centers_, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("dtype", ["float64", "float32"])
@pytest.mark.parametrize("make", [
    lambda: SelfOrganisingMap(4, 5, init="random_rows"),
    lambda: SelfOrganisingMap(3, 4, topology="hexagonal", training="batch", neighbourhood="bubble"),
    lambda: CompetitiveLearning(6, conscience=1.0),
    lambda: CompetitiveLearning(6, training="batch"),
    lambda: NeuralGas(6, init="kmeans++"),
    lambda: HebbianFeatures(3),
], ids=["som-online", "som-batch", "competitive", "competitive-batch", "neural-gas", "sanger"])
def test_a_member_of_a_stack_trains_exactly_as_alone(make, dtype):
    # members with different row counts, each with its own seed: member i of the stack must be
    # bit for bit the same as that seed trained alone on its rows (the stack only batches)
    rng = np.random.default_rng(6)
    X = [rng.normal(size=(n, 5)) for n in (120, 131, 97)]
    V = [rng.normal(size=(30, 5)) for _ in X]
    stacked = MapTraining(make(), X, V, seeds=[7, 8, 9], epochs=3, dtype=dtype)
    stacked.run()
    for i in range(3):
        alone = MapTraining(make(), [X[i]], [V[i]], seeds=[7 + i], epochs=3, dtype=dtype)
        alone.run()
        np.testing.assert_array_equal(alone.method.P[0], stacked.method.P[i])
        assert alone.best_val_metric[0] == stacked.best_val_metric[i]
