"""``MapTraining``: a stack of members (folds, or seeds x folds) of one map or group method,
trained together and scored on each member's held-out rows after every epoch.

It is what the map families' ``stack(...)`` returns (the ``labbench.families.base.Training``
protocol): ``run(on_epoch)`` trains the settings' epochs and calls ``on_epoch`` with a
``labbench.nets.EpochScores`` after each one -

* ``train_loss``: the training error seen during the epoch (prototype methods: the mean distance
  of each row to its winner when it was processed; Hebbian: the share of the rows' energy not
  rebuilt),
* ``val_loss``: the held-out quantisation error (Hebbian: reconstruction error),
* ``val_metric``: the chosen metric (``labbench.maps.measures``) on the held-out rows.

Schedules anneal to the last epoch, so there is no patience: the kept epoch is the last one run
(``best_epoch``), and ``best_val_metric`` / ``measures()`` describe it. Non-finite weights, or
Hebbian weights whose length passes ``NORM_BOUND``, raise ``DivergenceError``.
"""

from __future__ import annotations

import logging
from typing import Any, Callable, Sequence

import numpy as np

from labbench.errors import DivergenceError
from labbench.maps import measures as ms
from labbench.maps.groups import ward_groups
from labbench.maps.members import MemberRows
from labbench.maps.record import squared_distances
from labbench.nets.blas import one_thread
from labbench.nets.config import EpochScores

log = logging.getLogger("labbench.maps.training")

#: Hebbian weight vectors settle at length 1 (Oja, Sanger); one this long has diverged.
NORM_BOUND = 100.0

#: the metrics each family is scored by (names of labbench.maps.measures)
METRICS_OF = {
    "som": (ms.PEN, ms.QE, ms.TE),
    "competitive": (ms.PEN, ms.QE),
    "neural_gas": (ms.PEN, ms.QE),
    "hebbian": (ms.PEN, ms.REC),
}


class MapTraining:
    """Train ``method`` (a SelfOrganisingMap, CompetitiveLearning, NeuralGas or HebbianFeatures)
    on every member's rows; score on ``X_val`` when given."""

    def __init__(self, method: Any, X_train: Sequence[np.ndarray],
                 X_val: Sequence[np.ndarray] | None = None, *, seeds: Sequence[int],
                 epochs: int, metric: str | None = None, unit_cost: float = 0.01,
                 groups: int = 0, dtype: str | np.dtype = "float64"):
        self.method = method
        self.rows = MemberRows(X_train, seeds, dtype)
        self.n_members = m = self.rows.m
        self.epochs = int(epochs)
        if self.epochs < 1:
            raise ValueError("at least one epoch is needed")
        self.family = method.family
        self.metric = metric or ms.PEN
        if self.metric not in METRICS_OF[self.family]:
            raise ValueError(f"metric {self.metric!r} does not score the {self.family} family; use "
                             + ", ".join(METRICS_OF[self.family]))
        self.unit_cost = float(unit_cost)
        self.n_groups = int(groups)
        self.units = int(method.units)
        self.subspace = self.family == "hebbian"
        self._means = self.rows.means()                                   # (m, d) float64
        self._neighbours = None
        if getattr(method, "positions", None) is not None:
            self._neighbours = ms.grid_neighbours(method.positions, method.topology)
        self._has_val = X_val is not None
        if self._has_val:
            if isinstance(X_val, np.ndarray) or len(X_val) != m:
                raise ValueError("X_val needs one array per member")
            same: dict[int, np.ndarray] = {}          # members given the same array share it
            for x in X_val:
                if id(x) not in same:
                    same[id(x)] = np.ascontiguousarray(x, dtype=self.rows.dtype)
            self._Xv = [same[id(x)] for x in X_val]
            if min(x.shape[0] for x in self._Xv) < 1:
                raise ValueError("every member needs at least one validation row")
            self._qe0 = np.array([ms.mean_distance(x, mu) for x, mu in zip(self._Xv, self._means)])
        self.epoch = 0
        self.best_epoch = np.zeros(m, dtype=np.int64)
        self.best_val_metric: np.ndarray | None = None
        self._measures: dict[str, np.ndarray] = {}
        self._started = False

    # ---- scores

    def _evaluate(self) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]:
        """(val_loss, val_metric, measures) on every member's held-out rows."""
        m, k = self.n_members, self.units
        P = self.method.P
        out = {name: np.full(m, np.nan) for name in
               ((ms.REC, ms.REL) if self.subspace else (ms.QE, ms.TE, ms.REL)
                if self._neighbours is not None else (ms.QE, ms.REL))}
        pen = np.empty(m)
        for i, x in enumerate(self._Xv):
            if not np.all(np.isfinite(P[i])):
                pen[i] = np.nan
                continue
            if self.subspace:
                rec = ms.reconstruction_error(x, P[i])
                out[ms.REC][i] = out[ms.REL][i] = rec
                pen[i] = ms.penalised(rec, k, self.unit_cost)
                continue
            if self._neighbours is None:
                qe = float(np.sqrt(squared_distances(x, P[i]).min(axis=1)).mean(dtype=np.float64))
                te = None
            else:
                qe, te = ms.prototype_scores(x, P[i], self._neighbours)
                out[ms.TE][i] = te
            rel = ms.relative(qe, self._qe0[i])
            out[ms.QE][i], out[ms.REL][i] = qe, rel
            pen[i] = ms.penalised(rel, k, self.unit_cost, te)
        out[ms.PEN] = pen
        val_loss = out[ms.REC] if self.subspace else out[ms.QE]
        return val_loss.copy(), out[self.metric].copy(), out

    def _check(self, epoch: int, train_loss: np.ndarray) -> None:
        P = self.method.P
        flat = P.reshape(self.n_members, -1)
        bad = ~np.all(np.isfinite(flat), axis=1) | ~np.isfinite(train_loss)
        if self.subspace:
            with np.errstate(over="ignore", invalid="ignore"):
                longest = np.linalg.norm(P.astype(np.float64), axis=2).max(axis=1)
            bad |= ~(longest <= NORM_BOUND)
        if not bad.any():
            return
        member = int(np.flatnonzero(bad)[0])
        where = f"at epoch {epoch}, model {member + 1} of {self.n_members}"
        rule = getattr(self.method, "rule", None)
        if rule == "hebb":
            raise DivergenceError(
                f"training diverged {where}: the plain Hebbian rule has no decay term, so its "
                "weights grow without bound; use oja or sanger", epoch=epoch, member=member)
        what = "weights" if self.subspace else "prototypes"
        limit = f" or longer than {NORM_BOUND:g}" if self.subspace else ""
        raise DivergenceError(
            f"training diverged {where}: its {what} became infinite or undefined{limit}; lower "
            f"the learning rate (now {self.method.rate0:g}) or check that the inputs are scaled",
            epoch=epoch, member=member)

    def set_start(self, weights: np.ndarray) -> None:
        """Start from the given (m, k, d) prototypes / weights instead of the method's own start
        (for checks against other implementations and written-out rules). The method's start is
        still drawn first, so each member's generator then gives the same row orders."""
        if self.epoch:
            raise RuntimeError("training has already started")
        if not self._started:
            self.method.start(self.rows)
            self._started = True
        W = np.asarray(weights, dtype=self.rows.dtype)
        if W.shape != self.method.P.shape:
            raise ValueError(f"weights must be {self.method.P.shape}, got {W.shape}")
        self.method.P[...] = W

    # ---- the Training protocol

    def run(self, on_epoch: Callable[[EpochScores], object] | None = None) -> list[EpochScores]:
        """Train up to ``epochs`` epochs (continuing after a stop); returns the epochs' scores."""
        history: list[EpochScores] = []
        with one_thread(), np.errstate(over="ignore", under="ignore", invalid="ignore"):
            if not self._started:
                self.method.start(self.rows)
                self._started = True
            while self.epoch < self.epochs:
                self.epoch += 1
                train = np.asarray(self.method.train_epoch(self.rows, self.epoch, self.epochs),
                                   dtype=np.float64)
                self._check(self.epoch, train)
                val_loss = val_metric = None
                if self._has_val:
                    val_loss, val_metric, self._measures = self._evaluate()
                    self.best_val_metric = val_metric
                self.best_epoch[:] = self.epoch
                scores = EpochScores(self.epoch, train, val_loss, val_metric)
                history.append(scores)
                if on_epoch is not None and on_epoch(scores) is False:
                    log.debug("stopped by the caller after epoch %d", self.epoch)
                    break
        return history

    def measures(self) -> dict[str, np.ndarray]:
        """Per member, at the kept epoch, on the held-out rows: quantisation_error,
        topographic_error (maps), reconstruction_error (Hebbian), relative_error and
        penalised_error. Empty without held-out rows."""
        return {name: v.copy() for name, v in self._measures.items()}

    def unit_groups(self, member: int) -> np.ndarray | None:
        """A map's units merged into ``groups`` contiguous groups (None: every unit its own)."""
        if self.n_groups <= 0 or self._neighbours is None:
            return None
        method = self.method
        touching = ms.grid_touching(method.positions, method.topology)
        return ward_groups(method.P[member].astype(np.float64), touching, self.n_groups)

    def record(self, member: int):
        """The trained-model record of one member (PrototypeRecord or SubspaceRecord)."""
        if not self._started:
            raise RuntimeError("run() has not been called")
        extra = {"train_mean": [float(v) for v in self._means[member]]}
        return self.method.record(member, self.unit_groups(member), extra)
