"""Speed of the network engine against scikit-learn's MLP, as medians of paired rounds.

Reference workload W1 (issue 13): make_classification(n_samples=10_000, n_features=20,
random_state=0), one hidden layer of 64 relu units, Adam with learning rate 1e-3, batch 64,
30 epochs, L2 1e-4 (scikit-learn's default alpha), 5-fold stratified cross-validation (inputs
standardised on each fold's training rows). Both sides start from Glorot-uniform weights
(scikit-learn's only scheme) and run every epoch (no early stopping, tol = 0).

Each row is a ratio, labbench time / scikit-learn time on the same folds, measured in paired
rounds (``benchmarks/paired.py``: the two sides back to back, the order alternating) and reported
as the median and the spread (lowest–highest) over the rounds, with the issue's goal beside it.
scikit-learn runs fold after fold with its BLAS defaults; labbench trains on one BLAS thread
(``labbench.nets.blas``) with the folds stacked, as a search trial does, and scores each fold's
validation rows after every epoch (the search needs the loss for pruning), work scikit-learn does
not do.

Rows:
  W1 float32 / float64          the stack as a search trial runs it (engine)
  W1 through the network family  the same stack built from a settings dict (the search's path)
  W1 fold after fold             one StackTrainer per fold (what stacking saves)
  1k / 50k rows, 256 units       the same workload at other sizes (50k rows: 10 epochs on both
                                 sides to keep a round short; the ratio does not depend on it)
  estimator API, a loop of fits   NetClassifier.fit per fold in a user's own loop (one network
                                 per fit: nothing to stack)
  estimator API, fit_folds        labbench.fit_folds on the same splits: the folds as one stack
                                 (inputs standardised once on all rows; the same work per fold)
  4 configurations × 5 folds     four learning rates as four trials, vs ONE scikit-learn trial;
                                 then the same stacked as one run (20 members), and 16 rates
                                 (80 members) per configuration (time / 16 scikit-learn trials:
                                 the issue's "16-configuration round ≤ 0.25 ×" read per
                                 configuration; the whole round is 16 × this)
  dead relu units                W1 at learning rate 0.05 without L2, where most relu units
                                 die (their weights get a zero gradient): against scikit-learn,
                                 and against the engine with its subnormal flush off
                                 (``StackTrainer.FLUSH_EVERY = 0``, what it did before); and
                                 W1 itself with the flush on / off (its own cost)
  accuracy                       labbench − scikit-learn mean fold accuracy, W1 float32

    python benchmarks/bench_engine.py [--rounds 3] [--quick]
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import sys
import warnings

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from paired import Ratio, load_avg, paired  # noqa: E402

from labbench.nets import NetConfig, StackTrainer  # noqa: E402
from labbench.nets.metrics import compute  # noqa: E402

N_FOLDS, SEED = 5, 0


def make_folds(n_rows=10_000, n_features=20):
    from sklearn.datasets import make_classification
    from sklearn.model_selection import StratifiedKFold
    from sklearn.preprocessing import StandardScaler

    X, y = make_classification(n_samples=n_rows, n_features=n_features, random_state=SEED)
    folds = []
    for train, val in StratifiedKFold(N_FOLDS, shuffle=True, random_state=SEED).split(X, y):
        scaler = StandardScaler().fit(X[train])
        folds.append((scaler.transform(X[train]), y[train], scaler.transform(X[val]), y[val]))
    return folds


def run_sklearn(folds, units=64, epochs=30, lr=1e-3, alpha=1e-4):
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    accs = []
    for i, (Xt, yt, Xv, yv) in enumerate(folds):
        model = MLPClassifier(hidden_layer_sizes=(units,), activation="relu", solver="adam",
                              learning_rate_init=lr, batch_size=64, max_iter=epochs, tol=0.0,
                              n_iter_no_change=10**9, early_stopping=False, alpha=alpha,
                              random_state=SEED + i)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model.fit(Xt, yt)
        assert model.n_iter_ == epochs, f"scikit-learn stopped after {model.n_iter_} epochs"
        accs.append(model.score(Xv, yv))
    return float(np.mean(accs))


def engine_config(dtype="float32", units=64, epochs=30, lr=1e-3, l2=1e-4):
    return NetConfig(hidden=(units,), activation="relu", optimizer="adam", learning_rate=lr,
                     batch_size=64, epochs=epochs, l2=l2, init="glorot", dtype=dtype)


def run_unflushed(folds, config):
    """The engine with its subnormal flush turned off (``StackTrainer.FLUSH_EVERY = 0``): the
    reference for the dead-units row."""
    before = StackTrainer.FLUSH_EVERY
    StackTrainer.FLUSH_EVERY = 0
    try:
        return run_engine(folds, config)
    finally:
        StackTrainer.FLUSH_EVERY = before


def run_engine(folds, config, stacked=True):
    groups = [list(range(len(folds)))] if stacked else [[i] for i in range(len(folds))]
    accs = []
    for members in groups:
        pick = [folds[i] for i in members]
        trainer = StackTrainer(config, "binary", 1, [f[0] for f in pick], [f[1] for f in pick],
                               [f[2] for f in pick], [f[3] for f in pick],
                               seeds=[SEED + i for i in members], metric="accuracy")
        history = trainer.run()
        assert history[-1].epoch == config.epochs
        for j, f in enumerate(pick):
            accs.append(compute("accuracy", f[3], trainer.predict_output(j, f[2]), "binary"))
    return float(np.mean(accs))


def run_family(folds):
    """The 5 folds stacked through the network family, as ``search.objective.run_trial`` does."""
    from labbench.families import get_family

    settings = {"hidden": [64], "activation": "relu", "optimizer": "adam", "learning_rate": 1e-3,
                "momentum": 0.9, "l2": 1e-4, "batch_size": 64, "epochs": 30, "patience": 0,
                "init": "glorot"}
    trainer = get_family("network").stack(
        settings, "binary", 1, [f[0] for f in folds], [f[1] for f in folds],
        [f[2] for f in folds], [f[3] for f in folds],
        seeds=[SEED + i for i in range(len(folds))], metric="accuracy")
    trainer.run()
    return float(np.mean([compute("accuracy", f[3], trainer.record(j).forward(f[2]), "binary")
                          for j, f in enumerate(folds)]))


def run_estimator(folds):
    """A user's own cross-validation loop around ``NetClassifier``."""
    from labbench.nets.estimator import NetClassifier

    accs = []
    for i, (Xt, yt, Xv, yv) in enumerate(folds):
        model = NetClassifier(hidden=(64,), learning_rate=1e-3, batch_size=64, epochs=30, l2=1e-4,
                              init="glorot", random_state=SEED + i).fit(Xt, yt)
        accs.append(model.score(Xv, yv))
    return float(np.mean(accs))


def make_splits(n_rows=10_000, n_features=20):
    """W1's rows standardised once, with the same stratified splits as ``make_folds``."""
    from sklearn.datasets import make_classification
    from sklearn.model_selection import StratifiedKFold
    from sklearn.preprocessing import StandardScaler

    X, y = make_classification(n_samples=n_rows, n_features=n_features, random_state=SEED)
    X = StandardScaler().fit_transform(X)
    return X, y, list(StratifiedKFold(N_FOLDS, shuffle=True, random_state=SEED).split(X, y))


def run_fit_folds(data):
    """``labbench.fit_folds``: one NetClassifier copy per split, trained as one stack."""
    from labbench.nets.estimator import NetClassifier, fit_folds

    X, y, splits = data
    models = fit_folds(NetClassifier(hidden=(64,), learning_rate=1e-3, batch_size=64, epochs=30,
                                     l2=1e-4, init="glorot", random_state=SEED), X, y, splits)
    return float(np.mean([m.score(X[test], y[test]) for m, (_, test) in zip(models, splits)]))


CONFIG_RATES = (3e-4, 1e-3, 3e-3, 1e-2)


def run_four_configs(folds):
    """Four configurations (learning rates) of one shape, each a 5-fold trial."""
    return float(np.mean([run_engine(folds, engine_config(lr=lr)) for lr in CONFIG_RATES]))


def run_configs_stacked(folds, rates):
    """Configurations of one shape (here: learning rates) × 5 folds in ONE stack, one group per
    configuration (``StackTrainer(learning_rate=...)``); each member trains as it would alone."""
    members = [(lr, i) for lr in rates for i in range(len(folds))]
    trainer = StackTrainer(engine_config(), "binary", 1, [folds[i][0] for _, i in members],
                           [folds[i][1] for _, i in members], [folds[i][2] for _, i in members],
                           [folds[i][3] for _, i in members], seeds=[SEED + i for _, i in members],
                           metric="accuracy", groups=[c for c, _ in enumerate(rates)
                                                      for _ in range(len(folds))],
                           learning_rate=[lr for lr, _ in members])
    trainer.run()
    return float(np.mean(trainer.best_val_metric))


DEAD_RATE = 0.05      # with no L2, about 2 in 3 of W1's relu units die within its 30 epochs

SIXTEEN_RATES = tuple(float(r) for r in np.geomspace(1e-4, 3e-2, 16))


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
    parser.add_argument("--rounds", type=int, default=3, help="paired rounds per row (median reported)")
    parser.add_argument("--quick", action="store_true", help="only the W1 float32 row and accuracy")
    args = parser.parse_args(argv)
    import sklearn

    print(f"python {platform.python_version()}, numpy {np.__version__}, scikit-learn "
          f"{sklearn.__version__}, {os.cpu_count()} cores; {load_avg()}")
    print(blas_line())
    w1 = make_folds()
    rows = []
    accuracy = Ratio("accuracy, labbench − scikit-learn (W1 float32; goal ±0.004)")

    def keep_accuracy(r, t_ref, t_new, acc_ref, acc_new):
        accuracy.add(acc_new - acc_ref)

    def row(label, goal, reference, candidate, **kw):
        ratio = paired(reference, candidate, args.rounds, Ratio(label, goal), **kw)
        rows.append(ratio)
        print(ratio.line(), f"  ({load_avg()})", flush=True)

    sk = lambda: run_sklearn(w1)  # noqa: E731
    row("W1 float32, 5 folds stacked", 0.07, sk, lambda: run_engine(w1, engine_config()),
        on_round=keep_accuracy)
    if not args.quick:
        row("W1 float64, 5 folds stacked", 0.13, sk, lambda: run_engine(w1, engine_config("float64")))
        row("W1 through the network family (search path)", None, sk, lambda: run_family(w1))
        row("W1 fold after fold (no stacking)", None, sk, lambda: run_engine(w1, engine_config(), False))
        small = make_folds(1_000)
        row("1,000 rows", 0.10, lambda: run_sklearn(small), lambda: run_engine(small, engine_config()))
        big = make_folds(50_000)
        row("50,000 rows (10 epochs both sides)", 0.10, lambda: run_sklearn(big, epochs=10),
            lambda: run_engine(big, engine_config(epochs=10)))
        row("256 hidden units", 0.12, lambda: run_sklearn(w1, units=256),
            lambda: run_engine(w1, engine_config(units=256)))
        row("estimator API, a loop of fits (nothing to stack)", None, sk, lambda: run_estimator(w1))
        splits = make_splits()
        row("estimator API, fit_folds (folds as one stack)", 0.10, sk, lambda: run_fit_folds(splits))
        row("4 configurations × 5 folds as 4 trials (one sklearn trial)", None, sk,
            lambda: run_four_configs(w1))
        row("4 configurations × 5 folds stacked (one sklearn trial)", 0.30, sk,
            lambda: run_configs_stacked(w1, CONFIG_RATES))
        row("16 configurations × 5 folds stacked, per configuration", 0.25, sk,
            lambda: run_configs_stacked(w1, SIXTEEN_RATES), per=16)
        dead = engine_config(lr=DEAD_RATE, l2=0.0)
        row("W1 at rate 0.05, no L2 (most relu units die) / scikit-learn", None,
            lambda: run_sklearn(w1, lr=DEAD_RATE, alpha=0.0), lambda: run_engine(w1, dead))
        row("the same, subnormal flush on / off", None, lambda: run_unflushed(w1, dead),
            lambda: run_engine(w1, dead))
        row("W1 (no dead units), subnormal flush on / off: its own cost", None,
            lambda: run_unflushed(w1, engine_config()), lambda: run_engine(w1, engine_config()))
    low, high = accuracy.spread
    ok = abs(accuracy.median) <= 0.004
    print(f"{accuracy.label:<58s} median {accuracy.median:+.4f}  spread {low:+.4f}–{high:+.4f}  "
          f"{'met' if ok else 'NOT met'}")
    print(f"\n{sum(r.met() == 'met' for r in rows)} of {sum(bool(r.met()) for r in rows)} speed goals met "
          f"(medians of {args.rounds} paired rounds); {load_avg()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
