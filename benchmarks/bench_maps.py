"""Speed of the map and group engine (labbench.maps) against outside implementations.

Workload: invented rows, 10,000 x 20 (a seeded mixture of 12 Gaussian clusters), standardised on
each fold's training rows. Two comparisons, each measured side by side in this one process and
repeated over rounds (medians and spreads of the per-round ratios are printed):

(a) One 5-fold trial of a 10 x 10 self-organising map, 20 epochs of online training, built the
    way a search trial builds it (``labbench.families.get_family("som").stack`` from a settings
    dict; the five folds trained as one stack; held-out quantisation and topographic error
    scored after every epoch), against five independent minisom runs (a general-purpose SOM
    library) doing the same number of updates: ``train(rows, 20, random_order=True,
    use_epochs=True)`` on each fold's 8,000 training rows = 160,000 updates each, started from
    random training rows. minisom scores nothing during training; that work counts against
    labbench. Goal: labbench <= 0.5 x minisom's time.

(b) Hard competitive learning against scikit-learn's KMeans (k = 10, n_init = 10, k-means++
    starts) at equal held-out error, on one 80/20 split. labbench trains 10 seeds as one stack
    (the same number of restarts) and keeps the seed with the lowest training quantisation error;
    its epochs are the fewest (1 to 30) whose held-out quantisation error is within 1 % of
    KMeans's, found once before timing. Both of its trainings are timed: online (the per-row rule
    with a falling rate, stepped row by row in Python) and batch (Lloyd's iteration, one matrix
    product per member per epoch). Both on one thread (threadpoolctl limits scikit-learn's
    OpenMP and BLAS threads; labbench's engine uses one BLAS thread). Goal: labbench <= 2 x
    KMeans's time.

    python benchmarks/bench_maps.py [--rounds 3]
"""

from __future__ import annotations

import argparse
import os
import platform
import time

import numpy as np

N, D, FOLDS, EPOCHS, SEED = 10_000, 20, 5, 20, 0


def invented_rows() -> np.ndarray:
    """10,000 x 20 invented rows: 12 Gaussian clusters of different sizes and spreads."""
    rng = np.random.default_rng(SEED)
    centres = rng.normal(scale=3.0, size=(12, D))
    label = rng.choice(12, size=N, p=rng.dirichlet(np.full(12, 2.0)))
    return centres[label] + rng.normal(size=(N, D)) * rng.uniform(0.5, 1.5, size=(12, 1))[label]


def folds(X: np.ndarray) -> tuple[list[np.ndarray], list[np.ndarray]]:
    from sklearn.model_selection import KFold
    from sklearn.preprocessing import StandardScaler

    train, val = [], []
    for tr, va in KFold(FOLDS, shuffle=True, random_state=SEED).split(X):
        scaler = StandardScaler().fit(X[tr])
        train.append(scaler.transform(X[tr]))
        val.append(scaler.transform(X[va]))
    return train, val


def labbench_trial(train, val, seed):
    from labbench.families import get_family

    family = get_family("som")
    settings = family.complete({"rows": 10, "cols": 10, "training": "online", "init": "random_rows",
                                "learning_rate": 0.5, "final_learning_rate": 0.01, "radius": 5.0,
                                "final_radius": 0.5, "epochs": EPOCHS})
    start = time.perf_counter()
    t = family.stack(settings, "unsupervised", 1, train, [None] * FOLDS, val, [None] * FOLDS,
                     seeds=[seed + i for i in range(FOLDS)], metric="penalised_error", dtype="float64")
    t.run()
    seconds = time.perf_counter() - start
    m = t.measures()
    return seconds, float(np.mean(m["quantisation_error"])), float(np.mean(m["topographic_error"]))


def minisom_runs(train, val, seed):
    from minisom import MiniSom

    qe, te = [], []
    start = time.perf_counter()
    for i, (x, v) in enumerate(zip(train, val)):
        som = MiniSom(10, 10, D, sigma=5.0, learning_rate=0.5, neighborhood_function="gaussian",
                      random_seed=seed + i)
        som.random_weights_init(x)
        som.train(x, EPOCHS, random_order=True, use_epochs=True)
        qe.append(som.quantization_error(v))
        te.append(som.topographic_error(v))
    seconds = time.perf_counter() - start
    return seconds, float(np.mean(qe)), float(np.mean(te))


def competitive(X_train, X_test, epochs, training, seeds=10):
    from labbench.maps import CompetitiveLearning, MapTraining, quantisation_error

    start = time.perf_counter()
    t = MapTraining(CompetitiveLearning(10, learning_rate=0.1, final_learning_rate=1e-4,
                                        init="kmeans++", training=training),
                    [X_train] * seeds, [X_test] * seeds, seeds=range(seeds), epochs=epochs,
                    metric="quantisation_error")
    t.run()
    train_qe = [quantisation_error(X_train, t.method.P[i]) for i in range(seeds)]
    best = int(np.argmin(train_qe))
    seconds = time.perf_counter() - start
    return seconds, float(t.measures()["quantisation_error"][best])


def kmeans(X_train, X_test, seed):
    from sklearn.cluster import KMeans

    from labbench.maps import quantisation_error

    start = time.perf_counter()
    km = KMeans(10, n_init=10, random_state=seed).fit(X_train)
    seconds = time.perf_counter() - start
    return seconds, quantisation_error(X_test, km.cluster_centers_)


def spread(values) -> str:
    v = np.asarray(values)
    return f"median {np.median(v):6.3f}  (min {v.min():.3f}, max {v.max():.3f})"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    import sklearn
    from threadpoolctl import threadpool_info, threadpool_limits

    print(f"python {platform.python_version()}, numpy {np.__version__}, scikit-learn "
          f"{sklearn.__version__}, minisom {_minisom_version()}")
    blas = [f"{i.get('internal_api')} {i.get('version')} ({i.get('architecture')})"
            for i in threadpool_info() if i.get("user_api") == "blas"]
    print("BLAS:", ", ".join(blas) or "?", f"| load average before: {os.getloadavg()[0]:.2f} "
          f"on {os.cpu_count()} cores")
    X = invented_rows()
    train, val = folds(X)

    # (a) SOM trial vs five minisom runs
    print(f"\n(a) one 5-fold trial, 10 x 10 map, {EPOCHS} epochs online, {N:,} x {D} rows")
    ratios, ours, theirs = [], [], []
    for r in range(args.rounds):
        s_lab, qe_lab, te_lab = labbench_trial(train, val, seed=100 * r)
        s_ms, qe_ms, te_ms = minisom_runs(train, val, seed=100 * r)
        ratios.append(s_lab / s_ms)
        ours.append(s_lab)
        theirs.append(s_ms)
        print(f"  round {r + 1}: labbench {s_lab:6.2f} s (held-out QE {qe_lab:.3f}, TE {te_lab:.3f})"
              f"   minisom x5 {s_ms:6.2f} s (QE {qe_ms:.3f}, TE {te_ms:.3f})", flush=True)
    ratio_a = float(np.median(ratios))
    print(f"  labbench seconds   {spread(ours)}")
    print(f"  minisom x5 seconds {spread(theirs)}")
    print(f"  time ratio         {spread(ratios)}   goal <= 0.5: "
          f"{'met' if ratio_a <= 0.5 else 'NOT met'}")

    # (b) competitive learning vs KMeans at equal held-out error
    X_train, X_test = train[0], val[0]
    print("\n(b) competitive learning (10 units, 10 seeds stacked, k-means++ starts) vs "
          "KMeans(10, n_init=10), one thread each")
    met = []
    with threadpool_limits(1):
        _, qe_km = kmeans(X_train, X_test, seed=0)
        for training in ("online", "batch"):
            epochs = None
            for e in range(1, 31):
                _, qe_cl = competitive(X_train, X_test, e, training)
                if qe_cl <= 1.01 * qe_km:
                    epochs = e
                    break
            if epochs is None:
                print(f"  {training}: no epoch count up to 30 came within 1 % of KMeans's held-out "
                      f"QE {qe_km:.4f}")
                continue
            print(f"  {training} training: {epochs} epoch(s) bring the held-out QE within 1 % of "
                  "KMeans's")
            ratios, ours, theirs = [], [], []
            for r in range(args.rounds):
                s_km, qe_km_r = kmeans(X_train, X_test, seed=r)
                s_cl, qe_cl = competitive(X_train, X_test, epochs, training)
                ratios.append(s_cl / s_km)
                ours.append(s_cl)
                theirs.append(s_km)
                print(f"    round {r + 1}: labbench {s_cl:6.3f} s (held-out QE {qe_cl:.4f})   "
                      f"KMeans {s_km:6.3f} s (QE {qe_km_r:.4f})", flush=True)
            ratio_b = float(np.median(ratios))
            met.append(ratio_b <= 2)
            print(f"    labbench seconds {spread(ours)}")
            print(f"    KMeans seconds   {spread(theirs)}")
            print(f"    time ratio       {spread(ratios)}   goal <= 2: "
                  f"{'met' if ratio_b <= 2 else 'NOT met'}")
    print(f"\nload average after: {os.getloadavg()[0]:.2f} (other processes share the cores: "
          "ratios are measured side by side for that reason)")


def _minisom_version() -> str:
    try:
        from importlib.metadata import version

        return version("minisom")
    except Exception:          # noqa: BLE001 - only for the header line
        return "?"


if __name__ == "__main__":
    main()
