"""Early stopping in cross-validation: one epoch shared by the folds, or an inner split per fold?

On scikit-learn's bundled breast_cancer, digits and diabetes sets (a stratified 25 % hold-out,
5 folds on the rest; inputs standardised on each fold's training rows; the diabetes target
standardised on training rows too), one network (64 relu units, Adam lr 1e-3, batch 32, at most
200 epochs, patience 10, Glorot start) is evaluated four ways, several seeds each:

* shared  — labbench's rule: the 5 fold models train as one stack and share ONE epoch, the best of
            their mean validation loss; the fold scores are the metric at that epoch. The refit
            trains all training rows for exactly that many epochs.
* inner   — each fold holds back 10 % of its training rows (stratified) and stops on those (its
            own epoch, chosen on rows that do not score it). The refit holds back 10 % of all
            training rows the same way (scikit-learn's ``early_stopping=True`` scheme).
* per-fold — each fold picks its own best epoch on its validation rows, which then score it: the
            optimistic rule both others avoid (shown to measure its bias). Refit as "shared" with
            the mean of the folds' epochs.
* fixed   — no early stopping: 200 epochs everywhere.

Printed per set and way: the median over seeds of the CV estimate, the hold-out score, the gap
(CV - hold-out, signed so that positive = optimistic), the refit epochs and the seconds per
seed (CV + refit). Accuracy for the classification sets, RMSE (target units) for diabetes.

    python benchmarks/bench_early_stopping.py [--seeds 3] [--sets breast_cancer,digits,diabetes]
        [--ways shared,inner,per-fold,fixed] [--epochs 200] [--batch 32] [--patience 10]
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace

import numpy as np

from labbench.nets import NetConfig, StackTrainer
from labbench.nets.metrics import compute

K, MAX_EPOCHS, PATIENCE, INNER = 5, 200, 10, 0.10
CONFIG = NetConfig(hidden=(64,), activation="relu", optimizer="adam", learning_rate=1e-3,
                   batch_size=32, epochs=MAX_EPOCHS, patience=PATIENCE, init="glorot")


def load(name):
    from sklearn import datasets

    loader = {"breast_cancer": datasets.load_breast_cancer, "digits": datasets.load_digits,
              "diabetes": datasets.load_diabetes, "wine": datasets.load_wine}[name]
    X, y = loader(return_X_y=True)
    if name == "diabetes":
        return X, y.astype(float), "regression", 1, "rmse"
    n_classes = len(np.unique(y))
    return X, y, ("binary" if n_classes == 2 else "multiclass"), (1 if n_classes == 2 else n_classes), "accuracy"


def split(X, y, task, seed):
    from sklearn.model_selection import KFold, StratifiedKFold, train_test_split
    from sklearn.preprocessing import StandardScaler

    strat = y if task != "regression" else None
    tr, ho = train_test_split(np.arange(len(y)), test_size=0.25, random_state=seed, stratify=strat)
    splitter = (KFold if task == "regression" else StratifiedKFold)(K, shuffle=True, random_state=seed)
    folds = []
    for a, b in splitter.split(tr, y[tr]):
        sc = StandardScaler().fit(X[tr[a]])
        folds.append((sc.transform(X[tr[a]]), y[tr[a]], sc.transform(X[tr[b]]), y[tr[b]]))
    sc = StandardScaler().fit(X[tr])
    return folds, (sc.transform(X[tr]), y[tr], sc.transform(X[ho]), y[ho])


class Target:
    """Standardise a regression target on training rows; metrics in the target's own units."""

    def __init__(self, task, y):
        self.task = task
        self.mu, self.sd = (float(np.mean(y)), float(np.std(y))) if task == "regression" else (0.0, 1.0)

    def fwd(self, y):
        return (y - self.mu) / self.sd if self.task == "regression" else y

    def score(self, metric, y, out, k):
        if self.task == "regression":
            out = out * self.sd + self.mu
        return compute(metric, y, out, self.task, k if self.task == "multiclass" else 2)


def inner_split(y, task, seed):
    from sklearn.model_selection import train_test_split

    idx = np.arange(len(y))
    return train_test_split(idx, test_size=INNER, random_state=seed,
                            stratify=y if task != "regression" else None)


def way(name, folds, full, task, k, metric, seed):
    seeds = [1000 * seed + i for i in range(K)]
    started = time.perf_counter()
    targets = [Target(task, f[1]) for f in folds]
    if name in ("shared", "fixed", "per-fold"):
        config = CONFIG if name == "shared" else replace(CONFIG, patience=0)
        t = StackTrainer(config, task, k, [f[0] for f in folds], [tg.fwd(f[1]) for f, tg in zip(folds, targets)],
                         [f[2] for f in folds], [tg.fwd(f[3]) for f, tg in zip(folds, targets)],
                         seeds=seeds, metric="log_loss" if task != "regression" else "rmse")
        history = t.run()
        if name == "per-fold":
            losses = np.array([s.val_loss for s in history])        # (epochs, folds)
            epochs = np.argmin(losses, axis=0) + 1
            # re-train each fold to its own epoch (the stack has moved on) and score it there
            cv = []
            for i, f in enumerate(folds):
                one = StackTrainer(replace(CONFIG, patience=0, epochs=int(epochs[i])), task, k, [f[0]],
                                   [targets[i].fwd(f[1])], seeds=[seeds[i]])
                one.run()
                cv.append(targets[i].score(metric, f[3], one.predict_output(0, f[2]), k))
            refit_epochs = int(round(float(np.mean(epochs))))
        else:
            cv = [targets[i].score(metric, f[3], t.predict_output(i, f[2]), k) for i, f in enumerate(folds)]
            refit_epochs = int(t.best_epoch[0])
        tg = Target(task, full[1])
        refit = StackTrainer(replace(CONFIG, epochs=refit_epochs), task, k, [full[0]], [tg.fwd(full[1])],
                             seeds=[1000 * seed + 99])
        refit.run()
        holdout = tg.score(metric, full[3], refit.predict_output(0, full[2]), k)
    else:   # inner split per fold, each fold its own group
        parts = [inner_split(f[1], task, seed) for f in folds]
        t = StackTrainer(CONFIG, task, k, [f[0][a] for f, (a, b) in zip(folds, parts)],
                         [tg.fwd(f[1][a]) for f, tg, (a, b) in zip(folds, targets, parts)],
                         [f[0][b] for f, (a, b) in zip(folds, parts)],
                         [tg.fwd(f[1][b]) for f, tg, (a, b) in zip(folds, targets, parts)],
                         seeds=seeds, groups=list(range(K)))
        t.run()
        cv = [targets[i].score(metric, f[3], t.predict_output(i, f[2]), k) for i, f in enumerate(folds)]
        a, b = inner_split(full[1], task, seed)
        tg = Target(task, full[1][a])
        refit = StackTrainer(CONFIG, task, k, [full[0][a]], [tg.fwd(full[1][a])], [full[0][b]],
                             [tg.fwd(full[1][b])], seeds=[1000 * seed + 99])
        refit.run()
        refit_epochs = int(refit.best_epoch[0])
        holdout = tg.score(metric, full[3], refit.predict_output(0, full[2]), k)
    return float(np.mean(cv)), float(holdout), refit_epochs, time.perf_counter() - started


def main(argv=None) -> int:
    global CONFIG
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--sets", default="breast_cancer,digits,diabetes")
    parser.add_argument("--ways", default="shared,inner,per-fold,fixed")
    parser.add_argument("--epochs", type=int, default=MAX_EPOCHS, help="the most epochs (fixed: all of them)")
    parser.add_argument("--batch", type=int, default=CONFIG.batch_size)
    parser.add_argument("--patience", type=int, default=PATIENCE)
    args = parser.parse_args(argv)
    CONFIG = replace(CONFIG, epochs=args.epochs, batch_size=args.batch, patience=args.patience)
    print(f"at most {CONFIG.epochs} epochs, batch {CONFIG.batch_size}, patience {CONFIG.patience}")
    print(f"medians over {args.seeds} seeds (hold-out split, folds and initial weights change with the seed)")
    print(f"{'set':<14s}{'way':<10s}{'metric':<9s}{'CV':>8s}{'hold-out':>9s}{'gap':>8s}{'epochs':>7s}{'s/seed':>7s}")
    for name in args.sets.split(","):
        X, y, task, k, metric = load(name)
        sign = -1.0 if metric == "rmse" else 1.0        # gap > 0: the CV estimate was optimistic
        splits = [split(X, y, task, seed) for seed in range(args.seeds)]
        for w in args.ways.split(","):
            rows = np.array([way(w, folds, full, task, k, metric, seed)
                             for seed, (folds, full) in enumerate(splits)])
            cv, ho, ep, sec = np.median(rows, axis=0)
            gap = np.median(sign * (rows[:, 0] - rows[:, 1]))
            print(f"{name:<14s}{w:<10s}{metric:<9s}{cv:8.4f}{ho:9.4f}{gap:+8.4f}{ep:7.0f}{sec:7.2f}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
