"""Speed of the network engine against scikit-learn's MLPClassifier on the reference workload.

Workload (issue 2 §5): make_classification(n_samples=10_000, n_features=20, random_state=0), one
hidden layer of 64 relu units, Adam with learning rate 1e-3, batch 64, 30 epochs, 5-fold
stratified cross-validation (inputs standardised on each fold's training rows). Run three ways in
this one process, on the same folds:

1. scikit-learn's MLPClassifier, fold after fold (max_iter=30, tol=0, no early stopping; checked
   to have run all 30 epochs);
2. labbench's StackTrainer, fold after fold (one member per run);
3. labbench's StackTrainer with the 5 folds stacked and trained together;
4. the same stack built the way a search trial builds it: through the network model family
   (``labbench.families.get_family("network").stack``, from a settings dict), so the seam's cost
   shows beside row 3.

labbench trains on one BLAS thread (``labbench.nets.blas``); scikit-learn runs with the BLAS
defaults, and once more limited to one thread for comparison (``--more``). Both sides use
Glorot-uniform starts (scikit-learn's only scheme) and the same L2 penalty
(alpha = 1e-4, scikit-learn's default). labbench also scores each fold's validation rows after every
epoch (the search needs it); scikit-learn does not, so that work counts against labbench.

Goal: stacked time <= 0.25 x scikit-learn's time, at equal mean accuracy (within 0.5 point).

    python benchmarks/bench_engine.py [--repeats 3] [--more]
"""

from __future__ import annotations

import argparse
import platform
import sys
import time
import warnings

import numpy as np

from labbench.nets import NetConfig, StackTrainer
from labbench.nets.metrics import compute

N_FOLDS, EPOCHS, SEED = 5, 30, 0


def make_folds():
    from sklearn.datasets import make_classification
    from sklearn.model_selection import StratifiedKFold
    from sklearn.preprocessing import StandardScaler

    X, y = make_classification(n_samples=10_000, n_features=20, random_state=SEED)
    folds = []
    for train, val in StratifiedKFold(N_FOLDS, shuffle=True, random_state=SEED).split(X, y):
        scaler = StandardScaler().fit(X[train])
        folds.append((scaler.transform(X[train]), y[train], scaler.transform(X[val]), y[val]))
    return folds


def run_sklearn(folds):
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    accs = []
    for i, (Xt, yt, Xv, yv) in enumerate(folds):
        model = MLPClassifier(hidden_layer_sizes=(64,), activation="relu", solver="adam",
                              learning_rate_init=1e-3, batch_size=64, max_iter=EPOCHS, tol=0.0,
                              n_iter_no_change=10**9, early_stopping=False, alpha=1e-4,
                              random_state=SEED + i)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model.fit(Xt, yt)
        assert model.n_iter_ == EPOCHS, f"scikit-learn stopped after {model.n_iter_} epochs"
        accs.append(model.score(Xv, yv))
    return float(np.mean(accs))


def engine_config(dtype="float32", init="glorot"):
    return NetConfig(hidden=(64,), activation="relu", optimizer="adam", learning_rate=1e-3,
                     batch_size=64, epochs=EPOCHS, l2=1e-4, init=init, dtype=dtype)


def run_engine(folds, config, stacked: bool):
    groups = [list(range(len(folds)))] if stacked else [[i] for i in range(len(folds))]
    accs = []
    for members in groups:
        pick = [folds[i] for i in members]
        trainer = StackTrainer(config, "binary", 1, [f[0] for f in pick], [f[1] for f in pick],
                               [f[2] for f in pick], [f[3] for f in pick],
                               seeds=[SEED + i for i in members], metric="accuracy")
        history = trainer.run()
        assert history[-1].epoch == EPOCHS
        for j, f in enumerate(pick):
            accs.append(compute("accuracy", f[3], trainer.predict_output(j, f[2]), "binary"))
    return float(np.mean(accs))


def run_family(folds):
    """Row 4: the 5 folds stacked through the network family, as ``search.objective.run_trial``."""
    from labbench.families import get_family

    settings = {"hidden": [64], "activation": "relu", "optimizer": "adam", "learning_rate": 1e-3,
                "momentum": 0.9, "l2": 1e-4, "batch_size": 64, "epochs": EPOCHS, "patience": 0,
                "init": "glorot"}
    trainer = get_family("network").stack(
        settings, "binary", 1, [f[0] for f in folds], [f[1] for f in folds],
        [f[2] for f in folds], [f[3] for f in folds],
        seeds=[SEED + i for i in range(len(folds))], metric="accuracy")
    history = trainer.run()
    assert history[-1].epoch == EPOCHS
    return float(np.mean([compute("accuracy", f[3], trainer.record(j).forward(f[2]), "binary")
                          for j, f in enumerate(folds)]))


def _one_thread(fn, *args):
    from threadpoolctl import threadpool_limits

    with threadpool_limits(1, user_api="blas"):
        return fn(*args)


def timed(fn, repeats):
    best, value = float("inf"), None
    for _ in range(repeats):
        start = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - start)
    return best, value


def blas_line() -> str:
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return "BLAS: (threadpoolctl not installed)"
    parts = [f"{i.get('internal_api')} {i.get('version')} {i.get('architecture')} threads={i.get('num_threads')}"
             for i in threadpool_info() if i.get("user_api") == "blas"]
    return "BLAS: " + ("; ".join(parts) or "unknown")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=1, help="run each way N times, keep the fastest")
    parser.add_argument("--more", action="store_true",
                        help="also time scikit-learn on one BLAS thread, and float64 and He-initialised stacks")
    args = parser.parse_args(argv)

    folds = make_folds()
    import sklearn

    print(f"python {platform.python_version()}, numpy {np.__version__}, scikit-learn {sklearn.__version__}")
    print(blas_line())
    print("labbench trains on one BLAS thread (labbench.nets.blas) unless a *_NUM_THREADS variable is set")
    rows = [("scikit-learn MLPClassifier, fold after fold", lambda: run_sklearn(folds)),
            ("labbench engine, fold after fold", lambda: run_engine(folds, engine_config(), False)),
            ("labbench engine, 5 folds stacked", lambda: run_engine(folds, engine_config(), True)),
            ("network family (search path), 5 folds stacked", lambda: run_family(folds))]
    if args.more:
        rows += [("scikit-learn MLPClassifier, one BLAS thread", lambda: _one_thread(run_sklearn, folds)),
                 ("labbench engine, stacked, float64", lambda: run_engine(folds, engine_config("float64"), True)),
                 ("labbench engine, stacked, He start (init='he')",
                  lambda: run_engine(folds, engine_config(init="he"), True))]
    results = []
    for label, fn in rows:
        seconds, acc = timed(fn, args.repeats)
        results.append((label, seconds, acc))
        print(f"{label:<50s} {seconds:7.2f} s   mean accuracy {acc:.4f}", flush=True)
    ref_time, ref_acc = results[0][1], results[0][2]
    print()
    for label, seconds, acc in results[1:]:
        print(f"{label:<50s} time ratio {seconds / ref_time:5.3f}   accuracy {100 * (acc - ref_acc):+.2f} points")
    stacked_time, stacked_acc = results[2][1], results[2][2]
    if args.more:
        print(f"{'stacked vs scikit-learn on one BLAS thread':<50s} time ratio {stacked_time / results[4][1]:5.3f}")
    met = stacked_time <= 0.25 * ref_time and abs(stacked_acc - ref_acc) <= 0.005
    print(f"\ngoal (stacked <= 0.25 x scikit-learn time, accuracy within 0.5 point): {'met' if met else 'NOT met'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
