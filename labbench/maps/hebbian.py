"""Hebbian feature extraction, trained for a stack of members at once.

For a row x (scaled inputs; the rules assume centred data, which the standard scaling gives) and
weights W (c rows of length d), the outputs are y = W x, and per row:

* ``"hebb"``: the plain Hebbian rule w_j += rate * y_j x. It has no decay term, so its weights grow
  without bound (Hertz, Krogh & Palmer, Introduction to the Theory of Neural Computation 1991,
  section 8.2); labbench offers it only to show that, and stops it with a ``DivergenceError``.
* ``"oja"``: Oja's rule (A simplified neuron model as a principal component analyzer, Journal of
  Mathematical Biology 1982), one component: w += rate * y (x - y w). It converges to the unit
  eigenvector of the largest eigenvalue of the rows' covariance.
* ``"sanger"``: Sanger's generalised Hebbian algorithm (Optimal unsupervised learning in a
  single-layer linear feedforward neural network, Neural Networks 1989), c components:
  w_j += rate * y_j (x - sum_{i <= j} y_i w_i). The rows of W converge to the first c principal
  directions, in order. With c = 1 it is Oja's rule.

The rate falls exponentially per row from its initial to its final value; rows come in a fresh
order every epoch and all members step together, one row at a time (the exact sequential rule).
The training loss of an epoch is the share of the rows' energy not rebuilt, sum ||x - W^T y||^2 /
sum ||x||^2, accumulated during the epoch.
"""

from __future__ import annotations

import numpy as np

from labbench.maps.init import random_unit_rows
from labbench.maps.members import MemberRows
from labbench.maps.record import SubspaceRecord
from labbench.maps.schedule import decay

RULES = ("sanger", "oja", "hebb")


class HebbianFeatures:
    family = "hebbian"

    def __init__(self, components: int, *, rule: str = "sanger", learning_rate: float = 0.01,
                 final_learning_rate: float = 0.0001):
        if rule not in RULES:
            raise ValueError(f"rule {rule!r} is not one of {', '.join(RULES)}")
        self.rule = rule
        self.units = 1 if rule == "oja" else int(components)
        if self.units < 1:
            raise ValueError("a Hebbian extractor needs at least one component")
        self.rate0, self.rate1 = float(learning_rate), float(final_learning_rate)
        self.P: np.ndarray | None = None          # (m, c, d) weights

    def start(self, rows: MemberRows) -> None:
        self.P = np.stack([random_unit_rows(rng, self.units, rows.d) for rng in rows.rngs]
                          ).astype(rows.dtype)

    def train_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        W, dt = self.P, rows.dtype
        m, c, d = W.shape
        block = rows.shuffled_block()
        rate = rows.masked(decay(self.rate0, self.rate1, rows.progress(epoch, epochs), "exponential", dt))
        y = np.empty((m, c), dt)
        built = np.empty((m, c, d), dt)
        step = np.empty((m, c, d), dt)
        lost = np.zeros(m, np.float64)
        energy = np.zeros(m, np.float64)
        plain = self.rule == "hebb"
        for s in range(rows.n_max):
            x = block[s]
            np.einsum("mcd,md->mc", W, x, out=y)
            np.multiply(y[:, :, None], W, out=built)
            np.cumsum(built, axis=1, out=built)                  # sum_{i <= j} y_i w_i
            residual = x - built[:, -1]
            lost += np.einsum("md,md->m", residual, residual)
            energy += np.einsum("md,md->m", x, x)
            if plain:
                np.multiply(y[:, :, None], x[:, None, :], out=step)
            else:
                np.subtract(x[:, None, :], built, out=step)
                step *= y[:, :, None]
            step *= rate[s][:, None, None]
            W += step
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(energy > 0, lost / np.where(energy > 0, energy, 1.0), 0.0)

    def record(self, member: int, unit_group=None, extra: dict | None = None) -> SubspaceRecord:
        return SubspaceRecord(self.family, self.P[member].astype(np.float64), self.rule,
                              dict(extra or {}))
