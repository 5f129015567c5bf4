"""The numbers behind the map views (labbench.gui.map_numbers; no Qt needed)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from labbench.gui import map_numbers as mn
from labbench.maps.record import PrototypeRecord


def test_u_matrix_by_hand_on_a_2x2_grid():
    # a 2 x 2 rectangular grid: every unit touches the other three (Chebyshev distance 1)
    P = np.array([[0.0, 0.0], [3.0, 0.0], [0.0, 4.0], [3.0, 4.0]])
    u = mn.u_matrix(P, (2, 2), "rectangular")
    # unit 0: distances 3 (to 1), 4 (to 2), 5 (to 3, the 3-4-5 diagonal) -> mean 4, by hand
    assert u == pytest.approx([4.0, 4.0, 4.0, 4.0])
    P2 = np.array([[0.0], [1.0], [3.0], [6.0]])
    # unit 0: |0-1|, |0-3|, |0-6| -> 10/3; unit 1: 1, 2, 5 -> 8/3; unit 2: 3, 2, 3 -> 8/3;
    # unit 3: 6, 5, 3 -> 14/3 (by hand)
    assert mn.u_matrix(P2, (2, 2), "rectangular") == pytest.approx([10 / 3, 8 / 3, 8 / 3, 14 / 3])


def test_u_matrix_by_hand_on_a_hexagonal_row_pair():
    # 2 x 2 hexagonal grid, odd rows shifted right by half a unit: unit 0 (0, 0) touches 1 (1, 0)
    # and 2 (0.5, 0.87); unit 3 (1.5, 0.87) touches 1 and 2 but not 0 (distance sqrt(3))
    pairs = {tuple(p) for p in mn.neighbour_pairs((2, 2), "hexagonal")}
    assert pairs == {(0, 1), (0, 2), (1, 2), (1, 3), (2, 3)}
    P = np.array([[0.0], [1.0], [3.0], [6.0]])
    u = mn.u_matrix(P, (2, 2), "hexagonal")
    # unit 0: 1, 3 -> 2; unit 1: 1, 2, 5 -> 8/3; unit 2: 3, 2, 3 -> 8/3; unit 3: 5, 3 -> 4 (by hand)
    assert u == pytest.approx([2.0, 8 / 3, 8 / 3, 4.0])


def test_u_matrix_matches_minisom_distance_map_on_a_rectangular_grid():
    # minisom (registry package, a general-purpose SOM library): distance_map(scaling="mean") is
    # each unit's mean distance to its 8 surrounding units, divided by the largest value
    minisom = pytest.importorskip("minisom")
    rng = np.random.default_rng(3)
    rows, cols, d = 4, 5, 3
    P = rng.normal(size=(rows * cols, d))
    som = minisom.MiniSom(rows, cols, d, topology="rectangular", random_seed=0)
    som._weights = P.reshape(rows, cols, d).copy()
    theirs = som.distance_map(scaling="mean").ravel()
    ours = mn.u_matrix(P, (rows, cols), "rectangular")
    assert ours / ours.max() == pytest.approx(theirs, rel=1e-12)


def test_neighbour_counts_on_a_larger_grid():
    rect = mn.neighbour_pairs((4, 5), "rectangular")
    hexa = mn.neighbour_pairs((4, 5), "hexagonal")
    deg_r = np.bincount(rect.ravel(), minlength=20)
    deg_h = np.bincount(hexa.ravel(), minlength=20)
    assert deg_r.max() == 8 and deg_r.min() == 3      # inner units 8, corners 3
    assert deg_h.max() == 6 and deg_h.min() == 2      # inner units 6, the unshifted corner 2
    mesh = mn.mesh_pairs((4, 5), "rectangular")
    assert len(mesh) == 4 * 4 + 3 * 5                 # straight links only


def test_hexagon_cells_touch_their_neighbours():
    cells = mn.cell_polygons((3, 3), "hexagonal")
    assert cells.shape == (9, 6, 2)
    # every neighbour pair shares two corners (an edge)
    for i, j in mn.neighbour_pairs((3, 3), "hexagonal"):
        shared = np.isclose(cells[i][:, None, :], cells[j][None, :, :], atol=1e-9).all(axis=2).sum()
        assert shared == 2
    squares = mn.cell_polygons((2, 3), "rectangular")
    assert squares.shape == (6, 4, 2)
    assert squares[5].min(axis=0) == pytest.approx([1.5, 0.5])


def test_projection_matches_sklearn_pca_up_to_sign():
    # scikit-learn's PCA as the outside reference (sklearn.decomposition.PCA, 2 components)
    from sklearn.datasets import load_wine
    from sklearn.decomposition import PCA

    X = load_wine().data
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    P = X[:7] + 0.1
    rows, (protos,), share = mn.projection(X, P)
    pca = PCA(n_components=2).fit(X)
    ref = pca.transform(X)
    ref_p = pca.transform(P)
    for axis in range(2):
        sign = np.sign(np.dot(rows[:, axis], ref[:, axis]))
        assert rows[:, axis] == pytest.approx(sign * ref[:, axis], abs=1e-9)
        assert protos[:, axis] == pytest.approx(sign * ref_p[:, axis], abs=1e-9)
    assert share == pytest.approx(pca.explained_variance_ratio_, rel=1e-9)


def test_hits_groups_profiles_and_label_mix():
    record = PrototypeRecord("som", [[0.0, 0.0], [10.0, 0.0], [0.0, 10.0], [10.0, 10.0]],
                             unit_group=[0, 0, 1, 1], shape=(2, 2), topology="rectangular")
    X = np.array([[0.1, 0.0], [9.0, 1.0], [9.5, 0.2], [0.0, 9.0], [1.0, 11.0]])
    unit, group, _dist = record.assign(X)
    # rows 4 and 5 are both nearest (0, 10): unit 3 has no row
    assert mn.hit_counts(unit, 4).tolist() == [1, 2, 2, 0]
    assert mn.group_sizes(group, 2).tolist() == [3, 2]
    frame = pd.DataFrame({"heat": [1.0, 2.0, 3.0, 10.0, 20.0], "mode": ["a", "b", "b", "c", "c"]})
    prof = mn.group_profiles(frame, group, 2)
    assert prof[0]["groups"] == pytest.approx([2.0, 15.0]) and prof[0]["all"] == pytest.approx(7.2)
    assert prof[1]["groups"] == ["b", "c"] and prof[1]["share"] == pytest.approx([2 / 3, 1.0])
    mix = mn.label_mix(["x", "x", "y", "y", "y"], group, 2)
    assert mix[0] == ("x", pytest.approx(2 / 3)) and mix[1] == ("y", 1.0)
    # an empty group says so instead of inventing a mean
    assert mn.group_profiles(frame, group, 3)[0]["groups"][2] is None


def test_planes_are_in_the_columns_own_units():
    from labbench.data import Preprocessor

    frame = pd.DataFrame({"t": [10.0, 20.0, 30.0, 40.0], "p": [1.0, 1.0, 3.0, 3.0]})
    pre = Preprocessor(["t", "p"], []).fit(frame)
    X = pre.transform(frame)
    names, centre, scale = mn.unscaling(pre)
    assert names == ("t", "p")
    record = PrototypeRecord("competitive", X[[0, 3]])
    data = mn.MapData(record, X, frame, names, centre, scale)
    assert data.plane(0) == pytest.approx([10.0, 40.0])
    assert data.plane(1) == pytest.approx([1.0, 3.0])


def test_ramp_runs_from_first_to_last_stop():
    out = mn.ramp(np.array([0.0, 0.5, 1.0, np.nan]), ("#000000", "#ffffff"))
    assert out.tolist() == [[0, 0, 0], [128, 128, 128], [255, 255, 255], [0, 0, 0]]
    assert len(set(mn.group_colours(12, False))) == 12


def test_group_borders_outline_the_regions():
    # 2 x 3 rectangular grid, left column group 0, the rest group 1: two vertical edges at x = 0.5
    groups = np.array([0, 1, 1, 0, 1, 1])
    edges = mn.group_borders((2, 3), "rectangular", groups)
    assert edges.shape == (2, 2, 2)
    assert np.allclose(edges[:, :, 0], 0.5)
    # hexagonal 2 x 2, unit 3 alone: its edges with units 1 and 2
    assert mn.group_borders((2, 2), "hexagonal", np.array([0, 0, 0, 1])).shape == (2, 2, 2)


def test_assignment_in_blocks_is_the_records_own(monkeypatch):
    rng = np.random.default_rng(5)
    X = rng.normal(size=(250, 3))
    record = PrototypeRecord("competitive", rng.normal(size=(7, 3)), unit_group=[0, 0, 1, 1, 2, 2, 2])
    monkeypatch.setattr(mn, "ASSIGN_BLOCK", 40)             # 7 blocks, the last one short
    data = mn.MapData(record, X, pd.DataFrame(X), ("a", "b", "c"))
    unit, group, dist = data.assignment()
    ref = record.assign(X)
    assert np.array_equal(unit, ref[0]) and np.array_equal(group, ref[1]) and np.allclose(dist, ref[2])
    assert data.assignment()[0] is unit                      # worked out once
