"""Speed of load_table on 10^5 rows against plain pandas.read_csv of the same file, same run.

Run: python benchmarks/bench_load.py   (not a test; prints the times and the ratio)
Goal: load_table (reading + every check + roles) within 4x of a bare pandas.read_csv, and a
fold preparation (5 folds, standardise + one-hot) well under a second.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from labbench.data import holdout_split, load_table, make_folds, prepare_folds


def best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(n=100_000):
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(rng.normal(size=(n, 12)).round(4), columns=[f"x{i}" for i in range(12)])
    frame.loc[rng.random(n) < 0.02, "x3"] = np.nan
    frame["colour"] = rng.choice(["red", "green", "blue, dark", "amber"], n)
    frame["site"] = rng.choice(list("ABCDEFG"), n)
    frame["label"] = rng.choice(["yes", "no", "maybe"], n)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "big.csv"
        frame.to_csv(path, index=False)
        size = path.stat().st_size / 1e6
        t_pandas = best_of(lambda: pd.read_csv(path))
        t_load = best_of(lambda: load_table(path, "label"))
        table = load_table(path, "label")
        train, _ = holdout_split(table.y, 0.2, seed=0, stratify=True)
        folds = make_folds(table.y[train], 5, seed=0, stratify=True)
        t_folds = best_of(lambda: prepare_folds(table, train, folds, "standard"), repeat=1)
    print(f"{n} rows x {frame.shape[1]} columns, {size:.1f} MB")
    print(f"pandas.read_csv      {t_pandas * 1000:8.1f} ms")
    print(f"load_table           {t_load * 1000:8.1f} ms   ratio {t_load / t_pandas:.2f} x pandas")
    print(f"prepare_folds (5)    {t_folds * 1000:8.1f} ms")


if __name__ == "__main__":
    main()
