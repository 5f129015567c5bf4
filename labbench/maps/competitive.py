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

Batch training (``training = "batch"``) replaces the per-row rule by Lloyd's iteration: every
epoch each prototype becomes the mean of the rows it wins (a unit that wins none stays where it
is); no learning rate, no conscience. It is the fixed point the online rule approaches as its rate
falls, computed with one matrix product per member per epoch.

Online steps: all members step together, one row at a time (the exact sequential rule); the
distances come from ||x||^2 - 2 x.w + ||w||^2 with the ||w||^2 kept up to date for the one unit
that moved.
"""

from __future__ import annotations

import numpy as np

from labbench.maps.init import kmeans_plus_plus, random_rows
from labbench.maps.members import MemberRows, masked_mean
from labbench.maps.record import PrototypeRecord, squared_distances
from labbench.maps.schedule import decay

COMPETITIVE_INITS = ("random_rows", "kmeans++")
#: online: the per-row rule above; batch: Lloyd's iteration (each prototype the mean of the rows
#: it wins; Lloyd, Least squares quantization in PCM, IEEE Trans. Information Theory 1982) - the
#: batch form of the same rule, as Kohonen's batch map with no neighbourhood
TRAININGS = ("online", "batch")


_VECDOT = getattr(np, "vecdot", None)        # numpy 2.0 and later


def _rowdot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Dot products along the last axis (numpy.vecdot where numpy has it: less overhead)."""
    if _VECDOT is not None:
        return _VECDOT(a, b)
    return np.einsum("...d,...d->...", a, b)


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
                 conscience: float = 0.0, training: str = "online"):
        if units < 1:
            raise ValueError("competitive learning needs at least one unit")
        if training not in TRAININGS:
            raise ValueError(f"training {training!r} is not one of {', '.join(TRAININGS)}")
        self.training = training
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
        if self.training == "batch":
            return self._batch_epoch(rows)
        P, dt = self.P, rows.dtype
        m, k, d = P.shape
        block = rows.shuffled_block()
        rate = rows.masked(decay(self.rate0, self.rate1, rows.progress(epoch, epochs), "exponential", dt))
        # the winner minimises ||w||^2 / 2 - x.w (= (||x - w||^2 - ||x||^2) / 2); only the winner
        # moves, so only its ||w||^2 changes. Units are addressed in the flat (m * k, d) view:
        # member i's unit c is i * k + c.
        flat = P.reshape(m * k, d)
        flat_half = 0.5 * _rowdot(flat, flat)                # the same sum as after each update
        half = flat_half.reshape(m, k)
        score = np.empty((m, k), dt)
        best = np.empty((rows.n_max, m), dt)
        base = np.arange(m) * k
        step_rate = rate[:, :, None]
        use_conscience = self.conscience > 0
        if use_conscience:
            freq, gain = self._freq, self._gain[:, None] / 2
            flat_freq = freq.reshape(-1)
            step = rows.masked(np.broadcast_to((1.0 / rows.n).astype(dt), (rows.n_max, m)))
            keep = (1 - step).astype(dt)
            bias = np.empty((m, k), dt)
            share = dt.type(1.0 / k)
        for s in range(rows.n_max):
            x = block[s]
            np.subtract(half, _rowdot(P, x[:, None, :]), out=score)
            best[s] = score.min(axis=1)
            if use_conscience:
                # biased competition (DeSieno): d^2 - C s^2 (1/k - p_j), halved like the score
                np.subtract(share, freq, out=bias)
                bias *= gain
                score -= bias
                freq *= keep[s][:, None]
            unit = score.argmin(axis=1)
            unit += base
            if use_conscience:
                flat_freq[unit] += step[s]
            w = flat.take(unit, axis=0)
            w += (x - w) * step_rate[s]
            flat[unit] = w
            flat_half[unit] = 0.5 * _rowdot(w, w)
        # distance to the winner when each row came: ||x||^2 + 2 * (||w||^2 / 2 - x.w)
        d2 = 2.0 * best + _rowdot(block, block)
        return masked_mean(np.sqrt(np.maximum(d2, 0)), rows.mask)

    def _batch_epoch(self, rows: MemberRows) -> np.ndarray:
        """Lloyd's iteration: every prototype becomes the mean of the rows it wins."""
        losses = np.empty(rows.m)
        for i, x in enumerate(rows.X):
            P = self.P[i]
            d2 = squared_distances(x, P)
            unit = d2.argmin(axis=1)
            losses[i] = np.sqrt(d2[np.arange(x.shape[0]), unit]).mean(dtype=np.float64)
            counts = np.bincount(unit, minlength=self.units)
            onehot = np.zeros((x.shape[0], self.units), P.dtype)
            onehot[np.arange(x.shape[0]), unit] = 1
            sums = onehot.T @ x                              # (k, d) sum of the rows each unit wins
            won = counts > 0
            P[won] = sums[won] / counts[won, None].astype(P.dtype)
        return losses

    def record(self, member: int, unit_group: np.ndarray | None = None, extra: dict | None = None
               ) -> PrototypeRecord:
        return PrototypeRecord(self.family, self.P[member].astype(np.float64), unit_group,
                               extra=dict(extra or {}))
