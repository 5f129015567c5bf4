"""Hold-out and folds. Reference: scikit-learn's KFold / StratifiedKFold / RepeatedKFold /
RepeatedStratifiedKFold (shuffle=True) and train_test_split - our folds must be the very same sets
for the same integer seed, the non-stratified hold-out too; the stratified hold-out keeps class
proportions like train_test_split(stratify=y) (each class within one row)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from sklearn.model_selection import (KFold, RepeatedKFold, RepeatedStratifiedKFold, StratifiedKFold,
                                     train_test_split)

from labbench.data import Table, check_folds, holdout_split, make_folds
from labbench.errors import DataError


def labels(counts, seed=0, text=False):
    y = np.repeat(np.arange(len(counts)), counts)
    np.random.default_rng(seed).shuffle(y)
    return np.array([f"c{v}" for v in y]) if text else y


def same_folds(ours, theirs):
    theirs = list(theirs)
    assert len(ours) == len(theirs)
    for (tr, va), (str_, sva) in zip(ours, theirs):
        np.testing.assert_array_equal(tr, np.sort(str_))
        np.testing.assert_array_equal(va, np.sort(sva))


@pytest.mark.parametrize("n, k, seed", [(10, 2, 0), (103, 5, 7), (1000, 10, 123), (57, 3, 2**32 - 1)])
def test_kfold_equals_scikit_learn(n, k, seed):
    y = np.zeros(n)
    same_folds(make_folds(y, k, seed=seed, stratify=False),
               KFold(k, shuffle=True, random_state=seed).split(y))


@pytest.mark.parametrize("counts, k, seed, text", [
    ([50, 50], 5, 0, False), ([70, 20, 10], 5, 3, True), ([13, 400, 7, 31], 7, 11, True),
    ([5, 5, 5], 5, 42, False),
])
def test_stratified_kfold_equals_scikit_learn(counts, k, seed, text):
    y = labels(counts, seed, text)
    same_folds(make_folds(y, k, seed=seed, stratify=True),
               StratifiedKFold(k, shuffle=True, random_state=seed).split(np.zeros(len(y)), y))


def test_repeated_folds_equal_scikit_learn():
    y = labels([60, 25, 15], 1)
    same_folds(make_folds(y, 4, repeats=3, seed=5, stratify=True),
               RepeatedStratifiedKFold(n_splits=4, n_repeats=3, random_state=5).split(np.zeros(len(y)), y))
    same_folds(make_folds(y, 4, repeats=3, seed=5, stratify=False),
               RepeatedKFold(n_splits=4, n_repeats=3, random_state=5).split(y))


@settings(max_examples=40, deadline=None)
@given(counts=st.lists(st.integers(1, 60), min_size=1, max_size=5),
       k=st.integers(2, 8), repeats=st.integers(1, 3), seed=st.integers(0, 2**32 - 1),
       stratify=st.booleans())
def test_folds_are_disjoint_cover_every_row_and_keep_proportions(counts, k, repeats, seed, stratify):
    y = labels(counts, seed % 1000)
    n = len(y)
    if n < k:
        with pytest.raises(DataError):
            make_folds(y, k, repeats=repeats, seed=seed, stratify=stratify)
        return
    folds = make_folds(y, k, repeats=repeats, seed=seed, stratify=stratify)
    assert len(folds) == k * repeats
    for r in range(repeats):
        seen = np.zeros(n, dtype=int)
        for tr, va in folds[r * k:(r + 1) * k]:
            assert np.all(np.diff(tr) > 0) and np.all(np.diff(va) > 0)       # sorted, no repeats
            assert len(np.intersect1d(tr, va)) == 0 and len(tr) + len(va) == n
            seen[va] += 1
            if stratify:
                # each class is dealt round robin: per fold within one row of count / k
                # (the property scikit-learn's StratifiedKFold guarantees)
                per_fold = np.bincount(y[va], minlength=len(counts))
                assert np.all(np.abs(per_fold - np.asarray(counts) / k) < 1)
            else:
                assert abs(len(va) - n / k) < 1
        assert np.all(seen == 1)


@pytest.mark.parametrize("n, fraction, seed", [(100, 0.2, 0), (1001, 0.25, 9), (37, 0.1, 4)])
def test_plain_holdout_equals_train_test_split(n, fraction, seed):
    y = np.linspace(0, 1, n)
    train, hold = holdout_split(y, fraction, seed=seed, stratify=False)
    ref_train, ref_hold = train_test_split(np.arange(n), test_size=fraction, random_state=seed, shuffle=True)
    np.testing.assert_array_equal(train, np.sort(ref_train))
    np.testing.assert_array_equal(hold, np.sort(ref_hold))


@pytest.mark.parametrize("counts, fraction, seed", [([500, 300, 200], 0.2, 1), ([97, 13, 7, 3], 0.2, 2),
                                                    ([1234, 17], 0.3, 3), ([8, 8, 9], 0.5, 4)])
def test_stratified_holdout_keeps_proportions_like_train_test_split(counts, fraction, seed):
    y = labels(counts, seed, text=True)
    train, hold = holdout_split(y, fraction, seed=seed, stratify=True)
    assert len(np.intersect1d(train, hold)) == 0 and len(train) + len(hold) == len(y)
    assert np.all(np.diff(train) > 0) and np.all(np.diff(hold) > 0)
    _, ref_hold = train_test_split(np.arange(len(y)), test_size=fraction, random_state=seed, stratify=y)
    assert len(hold) == len(ref_hold)
    ours = pd.Series(y[hold]).value_counts().reindex(np.unique(y), fill_value=0)
    theirs = pd.Series(y[ref_hold]).value_counts().reindex(np.unique(y), fill_value=0)
    assert (ours - theirs).abs().max() <= 1


def test_holdout_is_seeded():
    y = labels([80, 20])
    a = holdout_split(y, 0.2, seed=3, stratify=True)
    b = holdout_split(y, 0.2, seed=3, stratify=True)
    c = holdout_split(y, 0.2, seed=4, stratify=True)
    np.testing.assert_array_equal(a[1], b[1])
    assert not np.array_equal(a[1], c[1])
    train, hold = holdout_split(y, 0.0, seed=3, stratify=True)
    assert len(hold) == 0 and len(train) == 100


@pytest.mark.parametrize("call, words", [
    (lambda: holdout_split(np.zeros(10), 1.0, seed=0, stratify=False), "holdout = 1.0"),
    (lambda: holdout_split(np.zeros(10), 0.2, seed=-1, stratify=False), "seed = -1"),
    (lambda: make_folds(np.zeros(10), 1, seed=0, stratify=False), "folds = 1"),
    (lambda: make_folds(np.zeros(10), 3, repeats=0, seed=0, stratify=False), "repeats = 0"),
])
def test_bad_split_settings_are_one_line_errors(call, words):
    with pytest.raises(DataError, match=words):
        call()


def table_of(y, classes=None, task="multiclass"):
    y = np.asarray(y)
    return Table(path="t.csv", frame=pd.DataFrame({"x": np.arange(len(y), dtype=float)}), target="grade",
                 features=("x",), kinds={"x": "numeric"}, task=task, classes=classes, y=y, ids=None,
                 id_column=None, sha256="", warnings=())


def test_check_folds_accepts_what_the_splits_can_do():
    # every class keeps at least 5 training rows after a stratified 20 % hold-out
    y = labels([7, 30, 63])
    table = table_of(y, ("a", "b", "c"))
    check_folds(table, 5, 0.2)
    train, _ = holdout_split(y, 0.2, seed=0, stratify=True)
    assert np.bincount(y[train]).min() >= 5
    check_folds(table_of(np.linspace(0, 1, 13), task="regression"), 5, 0.2)   # 10 training rows


def test_check_folds_refuses_small_class_and_small_table():
    y = labels([6, 30, 64])       # class a: 6 rows, 1 goes to the hold-out -> 5 left, 6 folds
    with pytest.raises(DataError, match=r"class 'a'.*5 training row\(s\).*fewer than the 6 folds; use at most 5 folds"):
        check_folds(table_of(y, ("a", "b", "c")), 6, 0.2)
    with pytest.raises(DataError, match="9 training rows after setting 3 aside.*need at least 10"):
        check_folds(table_of(np.linspace(0, 1, 12), task="regression"), 5, 0.2)
    with pytest.raises(DataError, match="folds = 1"):
        check_folds(table_of(np.linspace(0, 1, 12), task="regression"), 1, 0.2)
