"""Oja's rule and Sanger's generalised Hebbian algorithm against scikit-learn's PCA; the plain
Hebbian rule's unbounded growth caught as a divergence."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import subspace_angles
from sklearn.datasets import load_iris, load_wine
from sklearn.decomposition import PCA
from sklearn.preprocessing import StandardScaler

from labbench.errors import DivergenceError
from labbench.maps import HebbianFeatures, MapTraining

#: Tolerance for the angles, in degrees. A stochastic rule with its rate falling to 1e-4 still
#: jitters by about the square root of the rate around the eigenvectors; where neighbouring
#: eigenvalues are well apart (wine: 4.7, 2.5, 1.5, 0.9; iris: 2.9, 0.9, 0.15) that is well below
#: 2 degrees, while a wrong direction (another eigenvector) is tens of degrees off.
ANGLE_DEG = 2.0


def _train(X, rule, c, seed=0, epochs=20):
    t = MapTraining(HebbianFeatures(c, rule=rule, learning_rate=0.01, final_learning_rate=1e-4),
                    [X], [X], seeds=[seed], epochs=epochs, metric="reconstruction_error")
    t.run()
    return t


@pytest.mark.parametrize("loader,rule,c", [(load_wine, "oja", 1), (load_wine, "sanger", 3),
                                           (load_iris, "sanger", 2)],
                         ids=["wine-oja", "wine-sanger3", "iris-sanger2"])
def test_the_learned_subspace_is_pcas(loader, rule, c):
    # reference: sklearn.decomposition.PCA components; scipy.linalg.subspace_angles between the
    # learned and the principal subspaces. Oja 1982: one unit converges to the first principal
    # direction with length 1; Sanger 1989: row j converges to the j-th principal direction.
    X = StandardScaler().fit_transform(loader().data)
    pca = PCA(c).fit(X)
    W = _train(X, rule, c).record(0).components
    assert np.degrees(subspace_angles(W.T, pca.components_.T)).max() < ANGLE_DEG
    for j in range(c):                     # in order, each row its own component (sign free)
        cos = abs(W[j] @ pca.components_[j]) / np.linalg.norm(W[j])
        assert np.degrees(np.arccos(min(cos, 1.0))) < ANGLE_DEG
    # W W^T near the identity: unit length, orthogonal rows (tolerance: the same jitter)
    np.testing.assert_allclose(W @ W.T, np.eye(c), atol=0.02)


def test_the_reconstruction_error_reaches_pcas():
    # reference: PCA's own reconstruction (inverse_transform of transform) leaves the least error
    # of any c-dimensional projection (Eckart-Young); the Hebbian one comes within 1 % of it
    X = StandardScaler().fit_transform(load_wine().data)
    pca = PCA(3).fit(X)
    rebuilt = pca.inverse_transform(pca.transform(X)) - pca.mean_
    best = ((X - pca.mean_ - rebuilt) ** 2).sum() / (X ** 2).sum()
    got = _train(X, "sanger", 3).measures()["reconstruction_error"][0]
    assert best <= got + 1e-12 and got < best * 1.01


def test_the_plain_hebbian_rule_diverges_with_a_plain_explanation():
    # source: Hertz, Krogh & Palmer 1991, section 8.2 - w += rate * y x has no decay term, so
    # |w| grows without bound along the first principal direction
    X = StandardScaler().fit_transform(load_wine().data)
    with pytest.raises(DivergenceError) as info:
        _train(X, "hebb", 2, epochs=5)
    message = str(info.value)
    assert "no decay term" in message and "use oja or sanger" in message and "\n" not in message
    assert info.value.epoch == 1 and info.value.member == 0


def test_too_large_a_rate_diverges_and_says_to_lower_it():
    X = StandardScaler().fit_transform(load_wine().data)
    t = MapTraining(HebbianFeatures(2, rule="sanger", learning_rate=1.0, final_learning_rate=1.0),
                    [X], [X], seeds=[0], epochs=3)
    with pytest.raises(DivergenceError, match="lower the learning rate"):
        t.run()
