"""Hard competitive learning (winner takes all), trained for a stack of members at once.

For each row x only the best-matching unit c moves: w_c += rate * (x - w_c) (the standard
competitive learning rule; Rumelhart & Zipser, Feature discovery by competitive learning,
Cognitive Science 1985). With a rate falling to zero this is online k-means (MacQueen 1967), which
is why its held-out quantisation error is checked against scikit-learn's KMeans. The rate decays
exponentially per row from its initial to its final value; rows come in a fresh order every epoch.

Dead units - units that never win and so never learn - are the known weakness. The remedy offered
is the "conscience" of DeSieno (Adding a conscience to competitive learning, ICNN 1988): each unit
keeps a running estimate p_j of how often it wins, p_j += B (y_j - p_j) with y_j = 1 for the
winner, and the winner is chosen by the biased distance ||x - w_j||^2 - b_j with the bias
b_j = C * s^2 * (1/k - p_j): a unit that wins more than its share 1/k is handicapped, one that
wins less is helped. C is the ``conscience`` setting (0 = off, plain winner takes all). labbench's
choices (DeSieno gives B and C for his own scaling): s^2 is the member's mean squared distance of
its training rows to their mean, so C does not depend on the number or scale of the columns, and
B = 1 / n (n = the member's training rows: the frequencies remember about one epoch).
"""

from __future__ import annotations

import numpy as np

from labbench.maps.init import kmeans_plus_plus, random_rows
from labbench.maps.members import MemberRows, masked_mean
from labbench.maps.record import PrototypeRecord
from labbench.maps.schedule import decay

COMPETITIVE_INITS = ("random_rows", "kmeans++")


def start_prototypes(rows: MemberRows, units: int, init: str) -> np.ndarray:
    """(m, k, d) starting prototypes: ``random_rows`` or ``kmeans++``, per member."""
    if init not in COMPETITIVE_INITS:
        raise ValueError(f"init {init!r} is not one of {', '.join(COMPETITIVE_INITS)}")
    pick = kmeans_plus_plus if init == "kmeans++" else random_rows
    return np.stack([pick(rng, x, units) for x, rng in zip(rows.X, rows.rngs)]).astype(rows.dtype)


class CompetitiveLearning:
    family = "competitive"

    def __init__(self, units: int, *, learning_rate: float = 0.5,
                 final_learning_rate: float = 0.01, init: str = "kmeans++",
                 conscience: float = 0.0):
        if units < 1:
            raise ValueError("competitive learning needs at least one unit")
        self.units = int(units)
        self.rate0, self.rate1 = float(learning_rate), float(final_learning_rate)
        self.init, self.conscience = init, float(conscience)
        self.P: np.ndarray | None = None
        self._freq: np.ndarray | None = None

    def start(self, rows: MemberRows) -> None:
        self.P = start_prototypes(rows, self.units, self.init)
        self._freq = np.full((rows.m, self.units), 1.0 / self.units, rows.dtype)
        spread = [np.mean(((x - x.mean(axis=0)) ** 2).sum(axis=1)) for x in rows.X]
        self._gain = (self.conscience * np.asarray(spread)).astype(rows.dtype)     # C * s^2

    def train_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        P, dt = self.P, rows.dtype
        m, k, _ = P.shape
        block = rows.shuffled_block()
        rate = rows.masked(decay(self.rate0, self.rate1, rows.progress(epoch, epochs), "exponential", dt))
        diff, d2 = np.empty_like(P), np.empty((m, k), dt)
        best_d2 = np.empty((rows.n_max, m), dt)
        members = np.arange(m)
        use_conscience = self.conscience > 0
        if use_conscience:
            freq, gain = self._freq, self._gain[:, None]
            step = rows.masked(np.broadcast_to((1.0 / rows.n).astype(dt), (rows.n_max, m)))
            keep = (1 - step).astype(dt)
            score = np.empty((m, k), dt)
            share = dt.type(1.0 / k)
        for s in range(rows.n_max):
            np.subtract(block[s][:, None, :], P, out=diff)
            np.einsum("mkd,mkd->mk", diff, diff, out=d2)
            if use_conscience:
                # biased competition: d^2 - C s^2 (1/k - p_j)
                np.subtract(share, freq, out=score)
                score *= gain
                np.subtract(d2, score, out=score)
                c = score.argmin(axis=1)
                freq *= keep[s][:, None]
                freq[members, c] += step[s]
                best_d2[s] = d2.min(axis=1)
            else:
                c = d2.argmin(axis=1)
                best_d2[s] = d2[members, c]
            P[members, c] += rate[s][:, None] * diff[members, c]
        return masked_mean(np.sqrt(best_d2), rows.mask)

    def record(self, member: int, unit_group: np.ndarray | None = None, extra: dict | None = None
               ) -> PrototypeRecord:
        return PrototypeRecord(self.family, self.P[member].astype(np.float64), unit_group,
                               extra=dict(extra or {}))
