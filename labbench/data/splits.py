"""Seeded hold-out and k-fold splits, and the checks that a table can be split at all.

Folds follow scikit-learn's ``KFold(shuffle=True)`` / ``StratifiedKFold(shuffle=True)`` /
``RepeatedKFold`` / ``RepeatedStratifiedKFold`` algorithms step for step, drawing from
``numpy.random.RandomState(seed)`` in the same order, so the folds are the same sets as
scikit-learn's for the same integer seed (tests/data/test_splits.py checks it). scikit-learn is
not imported here; it is a test dependency only.

The non-stratified hold-out equals ``train_test_split(shuffle=True, random_state=seed)`` (size
``ceil(fraction * n)``). The stratified hold-out is our own: each class gives its share of the
hold-out by the largest-remainder rule (ties: earlier class), so the per-class counts depend only
on the class counts - :func:`check_folds` can tell in advance whether every class keeps enough
training rows. Which rows go is drawn from the given seed.
"""

from __future__ import annotations

import math

import numpy as np

from labbench.errors import DataError
from labbench.data.reading import show
from labbench.data.roles import FORCE_REGRESSION

_MAX_SEED = 2**32 - 1


def _rng(seed: int) -> np.random.RandomState:
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= seed <= _MAX_SEED:
        raise DataError(f"seed = {show(seed)}; use a whole number from 0 to {_MAX_SEED}")
    return np.random.RandomState(int(seed))


def holdout_size(n: int, fraction: float) -> int:
    """Rows set aside: ``ceil(fraction * n)`` as scikit-learn's ``train_test_split`` does."""
    return 0 if fraction == 0 else int(math.ceil(fraction * n))


def _check_fraction(fraction: float) -> None:
    if isinstance(fraction, bool) or not isinstance(fraction, (int, float)) or not 0 <= fraction < 1:
        raise DataError(f"holdout = {show(fraction)}; use a fraction from 0 (no hold-out) to below 1, e.g. 0.2")


def holdout_quota(class_counts: np.ndarray, n_holdout: int) -> np.ndarray:
    """Hold-out rows per class: largest-remainder shares of ``n_holdout`` (ties: earlier class)."""
    counts = np.asarray(class_counts, dtype=np.int64)
    n = int(counts.sum())
    if n == 0 or n_holdout == 0:
        return np.zeros_like(counts)
    exact = counts * (n_holdout / n)
    quota = np.floor(exact).astype(np.int64)
    left = n_holdout - int(quota.sum())
    if left > 0:
        order = np.argsort(-(exact - quota), kind="stable")
        quota[order[:left]] += 1
    return quota


def holdout_split(y, fraction: float, *, seed: int, stratify: bool) -> tuple[np.ndarray, np.ndarray]:
    """(train_pos, holdout_pos): sorted int64 positions into ``y``; set aside before anything else."""
    _check_fraction(fraction)
    y = np.asarray(y)
    n = len(y)
    n_hold = holdout_size(n, fraction)
    rng = _rng(seed)
    if n_hold == 0:
        return np.arange(n, dtype=np.int64), np.zeros(0, dtype=np.int64)
    if n_hold >= n:
        raise DataError(f"holdout = {fraction} of {n} rows leaves no training rows; use a smaller hold-out")
    if not stratify:
        perm = rng.permutation(n)
        hold = perm[:n_hold]
    else:
        _, inverse, counts = np.unique(y, return_inverse=True, return_counts=True)
        quota = holdout_quota(counts, n_hold)
        parts = []
        for c, q in enumerate(quota):
            members = np.flatnonzero(inverse == c)
            parts.append(members[rng.permutation(len(members))[:q]])
        hold = np.concatenate(parts)
    mask = np.zeros(n, dtype=bool)
    mask[hold] = True
    return np.flatnonzero(~mask).astype(np.int64), np.flatnonzero(mask).astype(np.int64)


def _kfold_test_folds(n: int, k: int, rng: np.random.RandomState) -> np.ndarray:
    # scikit-learn KFold(shuffle=True): shuffle 0..n-1, cut into k blocks, the first n % k one longer
    indices = np.arange(n)
    rng.shuffle(indices)
    sizes = np.full(k, n // k, dtype=np.int64)
    sizes[: n % k] += 1
    test_folds = np.empty(n, dtype=np.int64)
    test_folds[indices] = np.repeat(np.arange(k), sizes)
    return test_folds


def _stratified_test_folds(y: np.ndarray, k: int, rng: np.random.RandomState) -> np.ndarray:
    # scikit-learn StratifiedKFold(shuffle=True): classes numbered in order of first appearance,
    # per-class fold sizes by dealing the sorted labels round robin, then the fold numbers of each
    # class shuffled.
    _, first, inverse = np.unique(y, return_index=True, return_inverse=True)
    _, class_perm = np.unique(first, return_inverse=True)
    encoded = class_perm[inverse.reshape(-1)]
    n_classes = len(first)
    order = np.sort(encoded)
    allocation = np.asarray([np.bincount(order[i::k], minlength=n_classes) for i in range(k)])
    test_folds = np.empty(len(y), dtype=np.int64)
    for c in range(n_classes):
        folds_for_class = np.arange(k).repeat(allocation[:, c])
        rng.shuffle(folds_for_class)
        test_folds[encoded == c] = folds_for_class
    return test_folds


def make_folds(y, k: int, *, repeats: int = 1, seed: int, stratify: bool) -> list[tuple[np.ndarray, np.ndarray]]:
    """``k * repeats`` pairs (train_pos, val_pos) of sorted int64 positions into ``y``.

    Within each repeat the validation parts are disjoint and cover every position once.
    """
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 2:
        raise DataError(f"folds = {show(k)}; use a whole number of at least 2 (5 is common)")
    if isinstance(repeats, bool) or not isinstance(repeats, (int, np.integer)) or repeats < 1:
        raise DataError(f"repeats = {show(repeats)}; use a whole number of at least 1")
    y = np.asarray(y)
    n = len(y)
    if n < k:
        raise DataError(f"folds = {k} but only {n} rows to split; use at most {n} folds")
    rng = _rng(seed)
    out: list[tuple[np.ndarray, np.ndarray]] = []
    for _ in range(int(repeats)):
        test_folds = _stratified_test_folds(y, k, rng) if stratify else _kfold_test_folds(n, k, rng)
        for i in range(k):
            is_val = test_folds == i
            out.append((np.flatnonzero(~is_val).astype(np.int64), np.flatnonzero(is_val).astype(np.int64)))
    return out


def check_folds(table, folds: int, holdout: float) -> None:
    """Refuse a split that cannot work, before any search starts (one-line DataError).

    Assumes the hold-out is stratified for classification (as the search does); a table without
    a target is split at random (not stratified), so only its row count is checked.
    """
    where = table.path
    if isinstance(folds, bool) or not isinstance(folds, (int, np.integer)) or folds < 2:
        raise DataError(f"{where}: folds = {show(folds)}; use a whole number of at least 2 (5 is common)")
    _check_fraction(holdout)
    n = int(len(table.y))
    n_hold = holdout_size(n, holdout)
    n_train = n - n_hold
    if n_train < 2 * folds:
        after = f" after setting {n_hold} aside for the hold-out" if n_hold else ""
        raise DataError(f"{where}: {n_train} training rows{after} are too few for {folds} folds "
                        f"(need at least {2 * folds}); use fewer folds, a smaller hold-out, or more rows")
    if table.classes is None:       # regression, or a table without a target: nothing per class
        return
    counts = np.bincount(table.y, minlength=len(table.classes))
    train_counts = counts - holdout_quota(counts, n_hold)
    for c in np.argsort(train_counts, kind="stable"):
        if train_counts[c] >= folds:
            break
        kept = f" ({counts[c]} in the file, {counts[c] - train_counts[c]} kept for the hold-out)" if n_hold else ""
        most = int(train_counts[c])
        fix = f"use at most {most} folds, " if most >= 2 else ""
        raise DataError(f"{where}: class {show(table.classes[c])} of the target {show(table.target)} has "
                        f"{most} training row(s){kept}, fewer than the {folds} folds; {fix}"
                        f"add rows of that class, or remove it; or, {FORCE_REGRESSION}")
