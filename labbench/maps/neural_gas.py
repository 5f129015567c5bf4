"""Neural gas (Martinetz, Berkovich & Schulten, "Neural-gas" network for vector quantization and
its application to time-series prediction, IEEE Transactions on Neural Networks 1993): soft
competitive learning, winner takes most. For each row x the units are ranked by their distance
to x (rank 0 = nearest) and every unit moves by w_j += rate * exp(-rank_j / lambda) * (x - w_j).
The rate and the neighbourhood range lambda fall exponentially per row from their initial to their
final values (the schedule of the paper: v(t) = v_i (v_f / v_i)^(t / t_max)). Rows come in a fresh
order every epoch; all members step together, one row at a time (the exact sequential rule).
"""

from __future__ import annotations

import numpy as np

from labbench.maps.competitive import start_prototypes
from labbench.maps.members import MemberRows, masked_mean
from labbench.maps.record import PrototypeRecord
from labbench.maps.schedule import decay


class NeuralGas:
    family = "neural_gas"

    def __init__(self, units: int, *, learning_rate: float = 0.5, final_learning_rate: float = 0.005,
                 neighbourhood_range: float = 5.0, final_neighbourhood_range: float = 0.01,
                 init: str = "random_rows"):
        if units < 1:
            raise ValueError("neural gas needs at least one unit")
        self.units = int(units)
        self.rate0, self.rate1 = float(learning_rate), float(final_learning_rate)
        self.range0, self.range1 = float(neighbourhood_range), float(final_neighbourhood_range)
        self.init = init
        self.P: np.ndarray | None = None

    def start(self, rows: MemberRows) -> None:
        self.P = start_prototypes(rows, self.units, self.init)

    def train_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        P, dt = self.P, rows.dtype
        m, k, _ = P.shape
        block = rows.shuffled_block()
        frac = rows.progress(epoch, epochs)
        rate = rows.masked(decay(self.rate0, self.rate1, frac, "exponential", dt))
        coef = (-1.0 / decay(self.range0, self.range1, frac, "exponential")).astype(dt)
        diff, d2 = np.empty_like(P), np.empty((m, k), dt)
        ranks, h = np.empty((m, k), dt), np.empty((m, k), dt)
        best_d2 = np.empty((rows.n_max, m), dt)
        members = np.arange(m)[:, None]
        ladder = np.broadcast_to(np.arange(k, dtype=dt), (m, k))
        for s in range(rows.n_max):
            np.subtract(block[s][:, None, :], P, out=diff)
            np.einsum("mkd,mkd->mk", diff, diff, out=d2)
            order = d2.argsort(axis=1, kind="stable")
            ranks[members, order] = ladder                           # rank of every unit
            best_d2[s] = d2[members[:, 0], order[:, 0]]
            np.multiply(ranks, coef[s][:, None], out=h)
            np.exp(h, out=h)
            h *= rate[s][:, None]
            diff *= h[:, :, None]
            P += diff
        return masked_mean(np.sqrt(best_d2), rows.mask)

    def record(self, member: int, unit_group: np.ndarray | None = None, extra: dict | None = None
               ) -> PrototypeRecord:
        return PrototypeRecord(self.family, self.P[member].astype(np.float64), unit_group,
                               extra=dict(extra or {}))
