"""Ending some members of a running ``StackTrainer`` while the others train on.

Configurations stacked in one run (``groups`` = one label per configuration) end at different
epochs: one is pruned, one runs out of patience, one diverges. Computing them on would cost as
much as training them, so ``drop_groups`` takes their members out of the stack: every array whose
rows belong to members (parameters, optimiser state, each member's generator, training and
validation rows, the kept epoch of each group) keeps the rows of the others, and the numpy calls
of an epoch are planned again for the smaller stack. The members left go on exactly as before
(their rows of every array are the same, and every computation is per member), so each ends as
it would have trained alone (tests/nets/test_stack_members.py).
"""

from __future__ import annotations

from typing import Iterable

import numpy as np


class MemberSubset:
    """Mixed into ``StackTrainer`` (which holds the state named here)."""

    def drop_groups(self, labels: Iterable[int]) -> np.ndarray:
        """Take the members of these groups out of the stack; returns the members kept
        (their indices before the call, in order)."""
        gone = {int(g) for g in labels}
        keep = np.array([i for i, g in enumerate(self.groups) if g not in gone], dtype=np.intp)
        if keep.size < self.n_members:
            self.keep_members(keep)
        return keep

    def keep_members(self, members) -> None:
        """Keep only these members (whole groups), in this order."""
        idx = np.asarray(members, dtype=np.intp)
        if idx.size == 0:
            raise ValueError("a stack needs at least one member")
        pick = idx.tolist()
        self.seeds = tuple(self.seeds[i] for i in pick)
        self._best.keep(idx)
        self.groups = self._best.groups
        self.n_members = idx.size
        self._rngs = [self._rngs[i] for i in pick]
        self._params = self._params[idx]
        self._bind_parameters()
        for name in ("_lr", "_mu"):
            if getattr(self, name) is not None:
                setattr(self, name, getattr(self, name)[idx])
        if not np.isscalar(self._l2):
            self._l2 = self._l2[idx]
            self._l2_on = bool(np.any(self._l2 != 0))
        self._l2w = np.ascontiguousarray(self._l2w[idx])
        self._l2tmp = np.zeros_like(self._params)
        self._n = self._n[idx]
        self._X = [self._X[i] for i in pick]
        self._Y = [self._Y[i] for i in pick]
        self._perm = self._perm[idx]
        if self._Xe is not None:
            self._Xe = self._Xe[idx]
        self._Ye, self._q = self._Ye[idx], self._q[idx]
        old = self._optimizer
        self._plan_steps(self._batch)
        self._optimizer.take_rows(old, idx)
        if self._has_val:
            self._nv = [self._nv[i] for i in pick]
            self._Xv = self._Xv[idx]
            self._plan_validation()
            self._yv = [self._yv[i] for i in pick]
            self._Yv = [self._Yv[i] for i in pick]
            if self._target_inverse is not None:
                self._target_inverse = [self._target_inverse[i] for i in pick]
