"""The training rows of a stack of members (folds, or seeds x folds), laid out for stepping all
members at once.

Each member has its own rows (members may have different row counts) and its own random generator
``numpy.random.default_rng(seed)``. A member's generator is used in a fixed order - first by the
method's initialisation, then for one permutation of its rows per epoch - so a member of a stack
draws exactly what the same member trained alone draws.

Online rules process one row per step for every member at once: ``shuffled_block`` copies each
member's rows, in that epoch's order, into one (n_max, m, d) block (``block[s]`` is the s-th row
of every member, a contiguous (m, d) slice). A member with fewer rows than the longest has zero
rows at the end and its steps there are masked: ``progress`` gives the mask and each member's
share of training done at every step, counted in its OWN updates (so its schedule is exactly the
one it has alone).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np


class MemberRows:
    """Rows, generators and step schedule of m stacked members."""

    def __init__(self, X: Sequence[np.ndarray], seeds: Sequence[int], dtype: str | np.dtype = "float64"):
        if isinstance(X, np.ndarray):
            raise TypeError("give a sequence of arrays, one per stacked member")
        self.dtype = np.dtype(dtype)
        converted: dict[int, np.ndarray] = {}       # members given the same array share its copy
        self.X = []
        for x in X:
            if id(x) not in converted:
                converted[id(x)] = np.ascontiguousarray(x, dtype=self.dtype)
            self.X.append(converted[id(x)])
        seeds = [int(s) for s in seeds]
        self.m = len(self.X)
        if self.m == 0 or len(seeds) != self.m:
            raise ValueError(f"one seed per member is needed (got {self.m} members, {len(seeds)} seeds)")
        self.d = int(self.X[0].shape[1]) if self.X[0].ndim == 2 else -1
        for i, x in enumerate(self.X):
            if x.ndim != 2 or x.shape[1] != self.d or x.shape[0] == 0:
                raise ValueError(f"member {i}: training X must be (n >= 1, {self.d})")
        self.seeds = tuple(seeds)
        self.rngs = [np.random.default_rng(s) for s in seeds]
        self.n = np.array([x.shape[0] for x in self.X], dtype=np.int64)
        self.n_max = int(self.n.max())
        self._block = np.zeros((self.n_max, self.m, self.d), self.dtype)
        self.mask = (np.arange(self.n_max)[:, None] < self.n[None, :])      # (n_max, m)

    def means(self) -> np.ndarray:
        """(m, d) each member's mean training row (float64)."""
        return np.stack([x.mean(axis=0, dtype=np.float64) for x in self.X])

    def shuffled_block(self) -> np.ndarray:
        """(n_max, m, d) every member's rows in a fresh order from its generator (one draw per
        member per call); padded steps hold zeros. The block is reused between calls."""
        block = self._block
        for i, (x, rng) in enumerate(zip(self.X, self.rngs)):
            block[:x.shape[0], i] = x[rng.permutation(x.shape[0])]
        return block

    def progress(self, epoch: int, epochs: int) -> np.ndarray:
        """(n_max, m) each member's share of its training done at each step of ``epoch``
        (1-based) of ``epochs``: update t of T = epochs * n_i updates has share t / (T - 1).
        Padded steps get the member's last share (their updates are masked anyway)."""
        s = np.arange(self.n_max)[:, None]
        n = self.n[None, :]
        t = (epoch - 1) * n + np.minimum(s, n - 1)
        return t / np.maximum(epochs * n - 1, 1)

    def masked(self, values: np.ndarray) -> np.ndarray:
        """``values`` (n_max, m) with the padded steps set to zero."""
        return np.where(self.mask, values, 0).astype(values.dtype, copy=False)


def epoch_fraction(epoch: int, epochs: int) -> float:
    """Share of training done at ``epoch`` (1-based) for rules that update once per epoch."""
    return (epoch - 1) / max(epochs - 1, 1)


def masked_mean(values: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """(m,) the mean over steps of (n_max, m) ``values`` where ``mask`` holds (float64)."""
    v = np.where(mask, values, 0.0).astype(np.float64)
    return v.sum(axis=0) / np.maximum(mask.sum(axis=0), 1)
