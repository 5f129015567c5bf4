"""Which epoch a stack keeps (early stopping on a shared validation loss) and when it has diverged.

Members of a ``StackTrainer`` are split into *groups* (the k folds of one trial form one group; in
the seed spread each seed's folds form one). For each group this keeps the epoch with the lowest
group-MEAN validation loss (strictly lower counts as better; ties keep the earlier epoch) and a
copy of the group's rows of the (m, P) parameter block from that epoch. A group that has not
improved for ``patience`` epochs in a row is done: it is no longer snapshotted nor checked for
divergence (the stack still trains it, since the members run as one computation), so a member ends
exactly as it would alone. One epoch per group, not per member, keeps a cross-validation estimate
honest: a fold's kept epoch is not chosen on the very rows that then score that fold.

Divergence: a group-mean validation loss above ``EXPLODE_FACTOR`` (1e3) times a reference raises
``DivergenceError``. The reference is the lower of the group's validation loss before training
(epoch 0) and the loss of the best constant prediction (the training rows' mean target, or class
shares). A network whose loss ends a thousand times above both its random start and a constant
is not learning — for squared error that is an RMSE over 30 times the target's spread (common
practice: an exploding loss is divergence, not a score). The constant matters for a target in raw
units far from zero, where the untrained network's loss is already huge. Classification losses are
clipped (probabilities in [eps, 1 - eps]), so in practice this fires for regression only.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from labbench.errors import DivergenceError
from labbench.nets.config import EpochScores

#: A group-mean validation loss this many times above its value before training is divergence.
EXPLODE_FACTOR = 1e3


class BestEpoch:
    def __init__(self, groups: Sequence[int], patience: int, params: np.ndarray):
        m = params.shape[0]
        groups = [int(g) for g in groups]
        if len(groups) != m:
            raise ValueError(f"groups needs one entry per member (got {len(groups)} for {m})")
        ids = self._set_groups(groups)
        self.patience = int(patience)
        self.start_loss: np.ndarray | None = None          # per group, before training
        self.active = np.ones(len(ids), bool)              # groups still looking for a better epoch
        self._best = np.full(len(ids), np.inf)
        self._stale = np.zeros(len(ids), np.int64)
        self._params = np.empty_like(params) if self.patience else None
        self.epoch = np.zeros(m, np.int64)                 # per member: the kept epoch
        self.val_loss = np.full(m, np.nan)
        self.val_metric = np.full(m, np.nan)

    def _set_groups(self, groups: Sequence[int]) -> list[int]:
        """The group label of each member; returns the labels, in index order (``ids``)."""
        self.ids = sorted(set(groups))
        self.groups = tuple(groups)
        self.members_of = [np.flatnonzero(np.asarray(groups) == g) for g in self.ids]
        self._whole = len(self.ids) == 1
        return self.ids

    def group_means(self, values: np.ndarray) -> np.ndarray:
        if self._whole:
            return np.array([float(np.mean(values))])
        return np.array([float(np.mean(values[idx])) for idx in self.members_of])

    def watched(self) -> np.ndarray:
        """Members of the groups still training toward their best epoch."""
        if self.active.all():
            return np.arange(len(self.groups))
        return np.concatenate([self.members_of[g] for g in np.flatnonzero(self.active)])

    def set_start(self, val_loss: np.ndarray, constant_loss: np.ndarray) -> None:
        """Per member: the validation loss before training, and that of the best constant output."""
        reference = np.minimum(self.group_means(val_loss), self.group_means(constant_loss))
        self.start_loss = np.maximum(reference, np.finfo(np.float64).tiny)

    def check_explosion(self, scores: EpochScores, learning_rate: float,
                        only: int | None = None) -> None:
        """Raise for the first active group (or only group index ``only``) whose mean validation
        loss exploded."""
        if self.start_loss is None or scores.val_loss is None:
            return
        means = self.group_means(scores.val_loss)
        exploded = self.active & (means > EXPLODE_FACTOR * self.start_loss)
        if only is not None:
            exploded &= np.arange(exploded.size) == only
        for g in np.flatnonzero(exploded):
            members = self.members_of[g]
            member = int(members[np.argmax(scores.val_loss[members])])
            what = "mean validation loss of the folds" if members.size > 1 else "validation loss"
            raise DivergenceError(
                f"training diverged at epoch {scores.epoch}: the {what} rose to {means[g]:.4g}, "
                f"more than {EXPLODE_FACTOR:g} times {self.start_loss[g]:.4g} (the lower of its "
                "value before training and that of a constant prediction); lower the learning "
                f"rate (now {learning_rate:g}) or check that the inputs and the target are scaled",
                epoch=scores.epoch, member=member,
            )

    def keeps(self, val_loss: np.ndarray) -> bool:
        """Whether ``update`` with these validation losses would keep this epoch for a group (so
        its metric is needed). Without patience the kept epoch is the last one run, known only
        at the end (see ``kept_now``)."""
        if not self.patience:
            return False
        means = self.group_means(val_loss)
        return bool(np.any(self.active & (means < self._best)))

    def kept_now(self, epoch: int) -> bool:
        """Whether every member keeps ``epoch`` (the latest) at this moment."""
        return bool(np.all(self.epoch == epoch))

    def update(self, scores: EpochScores, params: np.ndarray) -> bool:
        """Snapshot improving groups, count the others' patience; True when every group is done."""
        if scores.val_loss is None:
            return False
        if not self.patience:                 # off: the last epoch is the kept one
            self.epoch[:] = scores.epoch
            self.val_loss[:] = scores.val_loss
            self.val_metric[:] = scores.val_metric
            return False
        means = self.group_means(scores.val_loss)
        for g in np.flatnonzero(self.active):
            idx = self.members_of[g]
            if means[g] < self._best[g]:
                self._best[g], self._stale[g] = means[g], 0
                if self._whole:
                    np.copyto(self._params, params)
                else:
                    self._params[idx] = params[idx]
                self.epoch[idx] = scores.epoch
                self.val_loss[idx] = scores.val_loss[idx]
                self.val_metric[idx] = scores.val_metric[idx]
            else:
                self._stale[g] += 1
                if self._stale[g] >= self.patience:
                    self.active[g] = False
        return not self.active.any()

    def keep(self, members: np.ndarray) -> None:
        """Keep these members only (whole groups; ``StackTrainer.keep_members``)."""
        members = np.asarray(members, dtype=np.intp)
        groups = [self.groups[i] for i in members]
        at = [self.ids.index(g) for g in sorted(set(groups))]
        if sum(self.members_of[g].size for g in at) != members.size:
            raise ValueError("keep whole groups only")
        self._set_groups(groups)
        if self.start_loss is not None:
            self.start_loss = self.start_loss[at]
        self.active, self._best, self._stale = self.active[at], self._best[at], self._stale[at]
        if self._params is not None:
            self._params = self._params[members]
        self.epoch, self.val_loss = self.epoch[members], self.val_loss[members]
        self.val_metric = self.val_metric[members]

    def restore(self, params: np.ndarray) -> None:
        """Give every member its group's best-epoch parameters (in place)."""
        if self.patience and self.epoch.min() > 0:
            np.copyto(params, self._params)
