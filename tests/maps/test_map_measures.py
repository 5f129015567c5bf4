"""Held-out measures of labbench.maps against minisom (an independent SOM library, used here only
as a reference) and against the published definitions on hand-checkable cases."""

from __future__ import annotations

import numpy as np
import pytest
from minisom import MiniSom

from labbench.maps import (PrototypeRecord, SubspaceRecord, grid_neighbours, grid_positions,
                           quantisation_error, reconstruction_error, record_measures,
                           topographic_error)
from labbench.maps.measures import grid_touching


def _minisom_with(prototypes: np.ndarray, rows: int, cols: int, topology: str) -> MiniSom:
    """A minisom map holding labbench's prototypes: labbench's unit r * cols + c goes to minisom's
    (x, y) = (c, r). minisom's hexagonal grid shifts every other row counted from the LAST row,
    labbench's from the first; with an even number of rows that is the mirror image, so the
    columns are mirrored. The placement is checked against labbench's grid before it is used."""
    d = prototypes.shape[1]
    som = MiniSom(cols, rows, d, sigma=1.0, topology=topology, random_seed=0)
    mirror = topology == "hexagonal" and rows % 2 == 0
    place = [(cols - 1 - c if mirror else c, r) for r, c in (divmod(u, cols) for u in range(rows * cols))]
    W = np.empty((cols, rows, d))
    for unit, (x, y) in enumerate(place):
        W[x, y] = prototypes[unit]
    som._weights = W
    # the two grids agree: every pair of units is equally far apart in both
    # (minisom.get_euclidean_coordinates gives the (xx, yy) of every (x, y))
    xx, yy = som.get_euclidean_coordinates()
    theirs = np.array([[xx[x, y], yy[x, y]] for x, y in place])
    ours = grid_positions(rows, cols, topology)
    dist = lambda p: np.linalg.norm(p[:, None] - p[None], axis=-1)   # noqa: E731
    np.testing.assert_allclose(dist(theirs), dist(ours), atol=1e-12)
    return som


@pytest.mark.parametrize("topology,rows,cols", [("rectangular", 4, 5), ("rectangular", 1, 7),
                                                ("hexagonal", 5, 4), ("hexagonal", 4, 6)])
def test_qe_and_te_agree_with_minisom_on_the_same_prototypes(topology, rows, cols):
    # reference: minisom 2.3 quantization_error / topographic_error (minisom.py: rectangular TE
    # counts a pair as an error when their grid distance exceeds 1.42, hexagonal when it is not 1)
    rng = np.random.default_rng(4)
    k = rows * cols
    P = rng.normal(size=(k, 3))
    X = rng.normal(size=(400, 3))
    som = _minisom_with(P, rows, cols, topology)
    np.testing.assert_allclose(quantisation_error(X, P), som.quantization_error(X), rtol=1e-12)
    te = topographic_error(X, P, grid_neighbours(grid_positions(rows, cols, topology), topology))
    assert 0.0 < te < 1.0                     # random prototypes: some rows are errors, not all
    assert te == pytest.approx(som.topographic_error(X), abs=1e-12)


def test_the_definitions_on_a_hand_checkable_map():
    # Published definitions: QE = mean distance to the best-matching unit (Kohonen 2001);
    # TE = share of rows whose best and second-best units are not grid neighbours (Kiviluoto 1996).
    # A 1 x 3 map with prototypes at 0, 1, 10 on a line.
    P = np.array([[0.0], [1.0], [10.0]])
    X = np.array([[0.2], [0.9], [9.0], [4.0]])
    # best units 0, 1, 2, 1 at distances 0.2, 0.1, 1.0, 3.0 -> QE = 4.3 / 4
    assert quantisation_error(X, P) == pytest.approx(4.3 / 4)
    # second-best units 1, 0, 1, 0: pairs (0,1), (1,0), (2,1), (1,0) all neighbours on a 1 x 3 line
    nb = grid_neighbours(grid_positions(1, 3, "rectangular"), "rectangular")
    assert topographic_error(X, P, nb) == 0.0
    # prototypes reordered 0, 10, 1: row 0.2 has best 0, second 2 (not neighbours: 2 apart)
    P2 = P[[0, 2, 1]]
    # best/second: 0.2 -> (0, 2) error; 0.9 -> (2, 0) error; 9.0 -> (1, 2) fine; 4.0 -> (2, 0) error
    assert topographic_error(X, P2, nb) == pytest.approx(3 / 4)


def test_grid_neighbours_count_8_around_on_a_rectangle_and_6_on_hexagons():
    # minisom's definition: rectangular neighbours are the 8 surrounding units (grid distance up
    # to 1.42), hexagonal the 6 at distance 1; an inner unit of a 5 x 5 map has exactly those
    rect = grid_neighbours(grid_positions(5, 5, "rectangular"), "rectangular")
    hexa = grid_neighbours(grid_positions(5, 5, "hexagonal"), "hexagonal")
    assert rect[12].sum() == 8 and hexa[12].sum() == 6 and rect[0].sum() == 3
    # groups use edge-sharing units: 4 on a rectangle, 6 on hexagons
    assert grid_touching(grid_positions(5, 5, "rectangular"), "rectangular")[12].sum() == 4
    assert grid_touching(grid_positions(5, 5, "hexagonal"), "hexagonal")[12].sum() == 6


def test_reconstruction_error_of_a_known_projection():
    # numpy.linalg reference: projecting on the first k right singular vectors leaves the energy
    # of the remaining singular values (Eckart-Young), so the error is their share
    rng = np.random.default_rng(2)
    X = rng.normal(size=(200, 5)) * np.array([5.0, 3.0, 2.0, 1.0, 0.5])
    _, s, vt = np.linalg.svd(X, full_matrices=False)
    expected = (s[2:] ** 2).sum() / (s ** 2).sum()
    assert reconstruction_error(X, vt[:2]) == pytest.approx(expected, rel=1e-10)


def test_record_measures_relative_and_penalised_error():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(300, 2))
    mean = np.array([0.1, -0.2])
    P = rng.normal(size=(6, 2))
    rec = PrototypeRecord("som", P, shape=(2, 3), topology="rectangular",
                          extra={"train_mean": mean.tolist()})
    got = record_measures(rec, X, unit_cost=0.01)
    qe0 = np.linalg.norm(X - mean, axis=1).mean()    # one prototype at the training mean
    assert got["relative_error"] == pytest.approx(got["quantisation_error"] / qe0)
    assert got["penalised_error"] == pytest.approx(got["relative_error"] + got["topographic_error"]
                                                   + 0.01 * 6)
    assert got["units"] == 6 and got["reconstruction_error"] is None
    sub = record_measures(SubspaceRecord("hebbian", np.eye(2)[:1]), X, unit_cost=0.02)
    assert sub["penalised_error"] == pytest.approx(sub["reconstruction_error"] + 0.02)
    assert sub["quantisation_error"] is None and sub["units"] == 1
