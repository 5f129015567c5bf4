"""The self-organising map orders itself; its start, its groups and the stability measures
against outside references."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import subspace_angles
from sklearn.cluster import AgglomerativeClustering
from sklearn.decomposition import PCA
from sklearn.metrics import adjusted_rand_score

from labbench.maps import (MapTraining, SelfOrganisingMap, adjusted_rand_index, grid_neighbours,
                           grid_positions, layout_agreement, stability_summary, topographic_error,
                           ward_groups)
from labbench.maps.stability import stability_of_records
from labbench.maps.init import pca_plane, random_rows
from labbench.maps.measures import grid_touching


@pytest.mark.parametrize("training,topology", [("online", "rectangular"), ("online", "hexagonal"),
                                               ("batch", "rectangular"), ("batch", "hexagonal")])
def test_a_map_trained_on_a_square_orders_itself(training, topology):
    # source: Kohonen, Self-Organizing Maps (3rd ed. 2001), the classic ordering demonstration: a
    # map trained on points drawn uniformly from a square unfolds into an ordered grid over it.
    # Ordered = held-out topographic error near 0 (tolerance 2 % of rows: rows near a fold line of
    # an imperfect map may still have non-neighbouring best units). The start is random rows,
    # so the order is learned, not given.
    rng = np.random.default_rng(5)
    X, V = rng.random((1500, 2)), rng.random((1000, 2))
    som = SelfOrganisingMap(8, 8, topology=topology, init="random_rows", training=training,
                            learning_rate=0.5, final_learning_rate=0.01, final_radius=0.5)
    t = MapTraining(som, [X] * 2, [V] * 2, seeds=[1, 2], epochs=15, metric="topographic_error")
    nb = grid_neighbours(grid_positions(8, 8, topology), topology)
    start_te = [topographic_error(V, random_rows(np.random.default_rng(s), X, 64), nb) for s in (1, 2)]
    t.run()
    te = t.measures()["topographic_error"]
    assert np.all(te <= 0.02), te
    assert min(start_te) > 0.5                       # a random start is not ordered
    # the map covers the square: every unit's prototype inside it, mean distance to the best
    # unit far below that of the square's centre
    assert np.all((t.method.P > -0.01) & (t.method.P < 1.01))
    assert np.all(t.measures()["relative_error"] < 0.25)


def test_the_pca_plane_start_spans_the_first_two_principal_components():
    # reference: sklearn.decomposition.PCA - the start lies in the plane through the mean spanned
    # by the first two components (Kohonen's linear initialisation), the longer side of the map
    # along the first component, +-1 standard deviation at the edges
    rng = np.random.default_rng(1)
    X = rng.normal(size=(500, 4)) @ np.diag([3.0, 2.0, 0.5, 0.2]) @ np.linalg.qr(rng.normal(size=(4, 4)))[0]
    pca = PCA(2).fit(X)
    P = pca_plane(X, grid_positions(3, 6, "rectangular"))       # 6 columns: the longer side
    assert np.degrees(subspace_angles((P - X.mean(0)).T, pca.components_.T)).max() < 1e-6
    along_first = (P - X.mean(0)) @ pca.components_[0]
    sd = np.sqrt(pca.explained_variance_)
    np.testing.assert_allclose(np.abs(along_first).max(), sd[0], rtol=1e-9)
    np.testing.assert_allclose(np.abs((P - X.mean(0)) @ pca.components_[1]).max(), sd[1], rtol=1e-9)
    cols = along_first.reshape(3, 6)
    assert np.ptp(cols, axis=0).max() < 1e-9                    # constant down each column


@pytest.mark.parametrize("topology", ["rectangular", "hexagonal"])
def test_groups_are_wards_method_over_touching_units(topology):
    # reference: sklearn.cluster.AgglomerativeClustering(linkage="ward", connectivity=...) on the
    # prototypes with the grid's edge-sharing units as the connectivity; same partition (ARI 1)
    rng = np.random.default_rng(2)
    P = rng.normal(size=(6 * 7, 3))
    touching = grid_touching(grid_positions(6, 7, topology), topology)
    for g in (2, 5, 11):
        ours = ward_groups(P, touching, g)
        ref = AgglomerativeClustering(n_clusters=g, linkage="ward",
                                      connectivity=touching.astype(int)).fit_predict(P)
        assert adjusted_rand_score(ours, ref) == 1.0
        assert sorted(set(ours)) == list(range(g)) and ours[0] == 0
    assert np.array_equal(ward_groups(P, touching, 0), np.arange(42))


def test_a_map_record_carries_contiguous_groups():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(300, 3))
    t = MapTraining(SelfOrganisingMap(4, 5, training="batch"), [X], None, seeds=[0], epochs=5, groups=4)
    t.run()
    rec = t.record(0)
    assert rec.n_groups == 4 and rec.shape == (4, 5) and rec.family == "som"
    touching = grid_touching(rec.positions, "rectangular")
    for g in range(4):                       # each group one connected region of the map
        members = set(np.flatnonzero(rec.unit_group == g))
        seen, todo = set(), [min(members)]
        while todo:
            u = todo.pop()
            seen.add(u)
            todo += [v for v in np.flatnonzero(touching[u]) if v in members and v not in seen]
        assert seen == members


def test_adjusted_rand_index_matches_scikit_learn():
    # reference: sklearn.metrics.adjusted_rand_score (Hubert & Arabie 1985)
    rng = np.random.default_rng(4)
    for n, ka, kb in [(50, 3, 3), (200, 5, 2), (10, 10, 1), (300, 7, 9)]:
        a, b = rng.integers(0, ka, n), rng.integers(0, kb, n)
        assert adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
        assert adjusted_rand_index(a, a) == pytest.approx(1.0)
        mixed = np.where(rng.random(n) < 0.3, b, a)
        assert adjusted_rand_index(a, mixed) == pytest.approx(adjusted_rand_score(a, mixed), abs=1e-12)
    assert adjusted_rand_index([0, 0, 1], [5, 5, 9]) == 1.0      # names do not matter


def test_layout_agreement_sees_through_mirrors_but_not_shuffles():
    rng = np.random.default_rng(5)
    pos = grid_positions(6, 6, "rectangular")
    units = rng.integers(0, 36, 500)
    r, c = np.divmod(units, 6)
    mirrored = r * 6 + (5 - c)                     # the same map mirrored left to right
    assert layout_agreement(units, mirrored, pos, pos) == pytest.approx(1.0)
    shuffled = rng.permutation(36)[units]
    assert layout_agreement(units, shuffled, pos, pos) < 0.3


def test_seed_stability_of_a_map_and_its_verdict():
    # the batch map from the principal-component plane uses no random numbers: every seed gives
    # the same map (ARI 1, layout 1); random starts of a small online map on structureless rows
    # give different groups
    rng = np.random.default_rng(6)
    X = rng.normal(size=(400, 2))
    seeds = [1, 2, 3]

    def runs(som):
        t = MapTraining(som, [X] * 3, None, seeds=seeds, epochs=5, groups=4)
        t.run()
        recs = [t.record(i) for i in range(3)]
        summary = stability_of_records(seeds, recs, X)
        assigned = [rec.assign(X) for rec in recs]           # the same, spelled out
        assert summary == stability_summary(seeds, [a[1] for a in assigned],
                                            [a[0] for a in assigned], [r.positions for r in recs])
        return summary

    same = runs(SelfOrganisingMap(4, 4, training="batch", init="pca_plane"))
    assert same["ari_mean"] == 1.0 and same["layout_min"] == pytest.approx(1.0)
    assert same["verdict"] == "reproducible" and same["seeds"] == seeds
    differ = runs(SelfOrganisingMap(4, 4, init="random_rows", learning_rate=0.9, radius=0.5,
                                    final_radius=0.5))
    assert differ["ari_mean"] < 0.9 and differ["verdict"] != "reproducible"
