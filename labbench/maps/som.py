"""The self-organising map (Kohonen, Self-organized formation of topologically correct feature
maps, Biological Cybernetics 1982; Self-Organizing Maps, 3rd ed. 2001), trained for a stack of
members at once.

Units sit on a rectangular or hexagonal grid (``labbench.maps.record.grid_positions``); for a row
x the best-matching unit c is the nearest prototype, and unit j moves toward x by
``rate * h(c, j)``, where h is the neighbourhood on the grid at radius sigma:

* gaussian: h = exp(-g^2 / (2 sigma^2)) with g the grid distance of c and j;
* bubble:   h = 1 for g <= sigma, else 0.

Online training (Kohonen 1982): every epoch each member's rows in a fresh order from its
generator; rate and radius follow their schedules (``labbench.maps.schedule``) per row, from the
initial to the final value over all of a member's updates. The stack steps one row at a time for
ALL members together (one (m, k, d) array operation per step): exactly the published sequential
rule for every member, no mini-batch approximation; a member's result is the one it gets alone.

Batch training (Kohonen's batch map, Self-Organizing Maps 2001, section 3.14): every epoch each
prototype becomes the neighbourhood-weighted mean of the rows, w_j = sum_i h(c_i, j) x_i /
sum_i h(c_i, j), with the best units c_i found before the update; the radius follows its schedule
per epoch and there is no learning rate. A unit no row reaches (bubble) keeps its prototype.
"""

from __future__ import annotations

import numpy as np

from labbench.maps.init import pca_plane, random_rows
from labbench.maps.members import MemberRows, epoch_fraction, masked_mean
from labbench.maps.record import PrototypeRecord, grid_positions, squared_distances
from labbench.maps.schedule import decay

NEIGHBOURHOODS = ("gaussian", "bubble")
SOM_INITS = ("random_rows", "pca_plane")
TRAININGS = ("online", "batch")
#: a bubble's edge is inclusive: hexagonal grid distances of 1 come out a hair above or below 1,
#: so the squared radius is widened by this share (above float32's rounding)
BUBBLE_EDGE = 1e-6


def neighbourhood(grid_d2: np.ndarray, sigma: np.ndarray | float, kind: str) -> np.ndarray:
    """h for squared grid distances ``grid_d2`` at radius ``sigma`` (broadcast)."""
    sigma = np.asarray(sigma, dtype=np.float64)
    if kind == "gaussian":
        return np.exp(-grid_d2 / (2.0 * sigma * sigma))
    if kind == "bubble":
        return (grid_d2 <= sigma * sigma * (1 + BUBBLE_EDGE)).astype(np.float64)
    raise ValueError(f"neighbourhood {kind!r} is not one of {', '.join(NEIGHBOURHOODS)}")


class SelfOrganisingMap:
    family = "som"

    def __init__(self, rows: int, cols: int, *, topology: str = "rectangular",
                 learning_rate: float = 0.5, final_learning_rate: float = 0.01,
                 radius: float = 0.0, final_radius: float = 0.5, decay: str = "exponential",
                 neighbourhood: str = "gaussian", init: str = "pca_plane",
                 training: str = "online"):
        if rows < 1 or cols < 1 or rows * cols < 2:
            raise ValueError(f"a map needs at least two units (got {rows} x {cols})")
        if neighbourhood not in NEIGHBOURHOODS or init not in SOM_INITS or training not in TRAININGS:
            raise ValueError(f"unknown neighbourhood/init/training: {neighbourhood}/{init}/{training}")
        self.rows, self.cols, self.topology = int(rows), int(cols), topology
        self.units = self.rows * self.cols
        self.positions = grid_positions(self.rows, self.cols, topology)
        diff = self.positions[:, None, :] - self.positions[None, :, :]
        self.grid_d2 = (diff * diff).sum(-1)
        self.rate0, self.rate1 = float(learning_rate), float(final_learning_rate)
        #: radius 0 = half the longer side of the map (at least 1)
        self.radius0 = float(radius) if radius > 0 else max(1.0, max(self.rows, self.cols) / 2.0)
        self.radius1 = float(final_radius)
        self.decay, self.kind, self.init, self.training = decay, neighbourhood, init, training
        self.P: np.ndarray | None = None

    # ---- start

    def start(self, rows: MemberRows) -> None:
        P = np.empty((rows.m, self.units, rows.d), rows.dtype)
        for i, (x, rng) in enumerate(zip(rows.X, rows.rngs)):
            P[i] = pca_plane(x, self.positions) if self.init == "pca_plane" else random_rows(rng, x, self.units)
        self.P = P

    # ---- one epoch

    def train_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        if self.training == "batch":
            return self._batch_epoch(rows, epoch, epochs)
        return self._online_epoch(rows, epoch, epochs)

    def _online_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        P, dt = self.P, rows.dtype
        block = rows.shuffled_block()
        frac = rows.progress(epoch, epochs)
        rate = rows.masked(decay(self.rate0, self.rate1, frac, self.decay, dt))
        sigma = decay(self.radius0, self.radius1, frac, self.decay, np.float64)
        gaussian = self.kind == "gaussian"
        # gaussian: h = exp(g2 * coef), coef = -1 / (2 sigma^2); bubble: h = (g2 <= sigma^2)
        if gaussian:
            coef = (-0.5 / (sigma * sigma)).astype(dt)
        else:
            coef = (sigma * sigma * (1 + BUBBLE_EDGE)).astype(dt)
        grid = self.grid_d2.astype(dt)
        m, k, _ = P.shape
        diff, d2 = np.empty_like(P), np.empty((m, k), dt)
        h = np.empty((m, k), dt)
        hit = np.empty((m, k), bool)
        best_d2 = np.empty((rows.n_max, m), dt)
        members = np.arange(m)
        for s in range(rows.n_max):
            np.subtract(block[s][:, None, :], P, out=diff)           # x - w for every unit
            np.einsum("mkd,mkd->mk", diff, diff, out=d2)
            c = d2.argmin(axis=1)
            best_d2[s] = d2[members, c]
            g = grid[c]
            if gaussian:
                np.multiply(g, coef[s][:, None], out=h)
                np.exp(h, out=h)
            else:
                np.less_equal(g, coef[s][:, None], out=hit)
                np.copyto(h, hit)
            h *= rate[s][:, None]
            diff *= h[:, :, None]
            P += diff
        return masked_mean(np.sqrt(best_d2), rows.mask)

    def _batch_epoch(self, rows: MemberRows, epoch: int, epochs: int) -> np.ndarray:
        sigma = float(decay(self.radius0, self.radius1, epoch_fraction(epoch, epochs), self.decay))
        H = neighbourhood(self.grid_d2, sigma, self.kind).astype(rows.dtype)
        losses = np.empty(rows.m)
        k = self.units
        for i, x in enumerate(rows.X):
            P = self.P[i]
            d2 = squared_distances(x, P)
            c = d2.argmin(axis=1)
            losses[i] = np.sqrt(d2[np.arange(x.shape[0]), c]).mean(dtype=np.float64)
            counts = np.bincount(c, minlength=k).astype(rows.dtype)
            onehot = np.zeros((x.shape[0], k), rows.dtype)
            onehot[np.arange(x.shape[0]), c] = 1
            sums = onehot.T @ x                                    # (k, d) sum of rows per unit
            weight = H @ counts
            reached = weight > 0
            P[reached] = (H @ sums)[reached] / weight[reached, None]
        return losses

    # ---- results

    def record(self, member: int, unit_group: np.ndarray | None = None, extra: dict | None = None
               ) -> PrototypeRecord:
        return PrototypeRecord("som", self.P[member].astype(np.float64), unit_group,
                               (self.rows, self.cols), self.topology, dict(extra or {}))
