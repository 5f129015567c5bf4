"""Which initial weights should ``init = "auto"`` pick for each activation? A measured comparison.

For every hidden activation (relu, tanh, sigmoid) the same 5-fold split is trained

* by labbench with Glorot-uniform starts (U(±sqrt(6 / (fan_in + fan_out))), weights and biases),
* by labbench with He-normal starts (N(0, 2 / fan_in)),
* by scikit-learn's MLPClassifier (its only scheme: Glorot-style uniform, with the bound
  sqrt(6 / (fan_in + fan_out)), or sqrt(2 / (fan_in + fan_out)) for the logistic activation —
  sklearn/neural_network/_multilayer_perceptron.py, ``_init_coef``),

with several random seeds each, and prints the median over seeds of the fold-mean accuracy and
its spread (max - min over seeds). Data sets:

* the reference workload of ``bench_engine.py``: make_classification(10,000 × 20, random_state=0),
  one hidden layer of 64 units, Adam lr 1e-3, batch 64, 30 epochs, L2 alpha 1e-4 (scikit-learn's
  default), inputs standardised on each fold's training rows;
* scikit-learn's bundled digits (1,797 × 64, 10 classes) and breast_cancer (569 × 30) sets, same
  network and training settings;
* scikit-learn's bundled diabetes set (442 × 10, regression; target standardised on each fold's
  training rows, RMSE reported in the target's units, lower is better; MLPRegressor as reference).

labbench's folds are stacked (one StackTrainer per seed and scheme); scikit-learn runs fold
after fold. Accuracy is scikit-learn's ``score`` (mean accuracy) on each fold's validation rows.

    python benchmarks/bench_init.py [--seeds 5] [--sets reference,digits,breast_cancer,diabetes]
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings

import numpy as np

from labbench.nets import NetConfig, StackTrainer
from labbench.nets.metrics import compute

N_FOLDS, EPOCHS = 5, 30
SK_ACTIVATION = {"relu": "relu", "tanh": "tanh", "sigmoid": "logistic"}


def load_set(name: str):
    from sklearn import datasets

    if name == "reference":
        return datasets.make_classification(n_samples=10_000, n_features=20, random_state=0)
    if name == "digits":
        return datasets.load_digits(return_X_y=True)
    if name == "breast_cancer":
        return datasets.load_breast_cancer(return_X_y=True)
    if name == "diabetes":
        return datasets.load_diabetes(return_X_y=True)
    raise SystemExit(f"unknown set {name!r}; use reference, digits or breast_cancer")


def make_folds(X, y, regression=False):
    from sklearn.model_selection import KFold, StratifiedKFold
    from sklearn.preprocessing import StandardScaler

    folds = []
    splitter = KFold if regression else StratifiedKFold
    for train, val in splitter(N_FOLDS, shuffle=True, random_state=0).split(X, y):
        scaler = StandardScaler().fit(X[train])
        yt, yv = y[train], y[val]
        if regression:      # standardised target; (mean, std) kept to report RMSE in its units
            mu, sd = yt.mean(), yt.std()
            yt, yv = (yt - mu) / sd, (yv - mu) / sd
        folds.append((scaler.transform(X[train]), yt, scaler.transform(X[val]), yv,
                      (mu, sd) if regression else None))
    return folds


def _rmse(f, pred) -> float:
    sd = f[4][1]
    return float(np.sqrt(np.mean((pred - f[3]) ** 2)) * sd)


def run_labbench(folds, activation: str, init: str, seed: int, n_classes: int) -> float:
    task = "regression" if n_classes == 0 else "binary" if n_classes == 2 else "multiclass"
    k = n_classes if task == "multiclass" else 1
    config = NetConfig(hidden=(64,), activation=activation, optimizer="adam", learning_rate=1e-3,
                       batch_size=64, epochs=EPOCHS, l2=1e-4, init=init)
    trainer = StackTrainer(config, task, k, [f[0] for f in folds], [f[1] for f in folds],
                           seeds=[1000 * seed + i for i in range(len(folds))])
    trainer.run()
    if task == "regression":
        return float(np.mean([_rmse(f, trainer.predict_output(i, f[2])) for i, f in enumerate(folds)]))
    return float(np.mean([compute("accuracy", f[3], trainer.predict_output(i, f[2]), task,
                                  n_classes if task == "multiclass" else 2)
                          for i, f in enumerate(folds)]))


def run_sklearn(folds, activation: str, seed: int, regression: bool = False) -> float:
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier, MLPRegressor

    accs = []
    for i, (Xt, yt, Xv, yv, _) in enumerate(folds):
        model = (MLPRegressor if regression else MLPClassifier)(hidden_layer_sizes=(64,), activation=SK_ACTIVATION[activation],
                              solver="adam", learning_rate_init=1e-3, batch_size=64,
                              max_iter=EPOCHS, tol=0.0, n_iter_no_change=10**9,
                              early_stopping=False, alpha=1e-4, random_state=1000 * seed + i)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model.fit(Xt, yt)
        accs.append(_rmse(folds[i], model.predict(Xv)) if regression else model.score(Xv, yv))
    return float(np.mean(accs))


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=5)
    parser.add_argument("--sets", default="reference,digits,breast_cancer")
    parser.add_argument("--activations", default="relu,tanh,sigmoid")
    args = parser.parse_args(argv)
    print(f"{args.seeds} seeds; median fold-mean accuracy (diabetes: RMSE) over seeds, spread = max - min over seeds;"
          " Δ = median minus scikit-learn's median")
    print(f"{'set':<14s}{'activation':<11s}{'start':<22s}{'median':>8s}{'spread':>8s}{'Δ':>8s}{'s/run':>7s}")
    for name in args.sets.split(","):
        X, y = load_set(name)
        regression = name == "diabetes"
        folds = make_folds(X, y, regression)
        n_classes = 0 if regression else int(len(np.unique(y)))
        for activation in args.activations.split(","):
            ways = [("scikit-learn MLP", lambda s: run_sklearn(folds, activation, s, regression)),
                    ("labbench glorot", lambda s: run_labbench(folds, activation, "glorot", s, n_classes)),
                    ("labbench he", lambda s: run_labbench(folds, activation, "he", s, n_classes))]
            reference = None
            for label, fn in ways:
                started = time.perf_counter()
                accs = np.array([fn(s) for s in range(args.seeds)])
                seconds = (time.perf_counter() - started) / args.seeds
                median = float(np.median(accs))
                reference = median if reference is None else reference
                print(f"{name:<14s}{activation:<11s}{label:<22s}{median:8.4f}{accs.max() - accs.min():8.4f}"
                      f"{median - reference:+8.4f}{seconds:7.2f}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
