"""How good is the winner of labbench's *default* search, against scikit-learn's defaults?

For each public data set that a registry package ships offline (scikit-learn: digits,
breast_cancer, wine, diabetes; statsmodels: Longley, Grunfeld — Grunfeld has a text column, the
firm), this writes the table as a CSV with a spec that sets nothing but the data, the seed and the
budget (30 trials; every other key at its default, the search space too), runs
``labbench run`` on it as a user would, and scores, on the **same hold-out rows** labbench locked
away:

* labbench's winner (its ``model.npz``, refitted on all training rows);
* scikit-learn's ``MLPClassifier`` / ``MLPRegressor`` with default settings in a scaling pipeline;
* ``HistGradientBoostingClassifier`` / ``Regressor`` (defaults);
* ``LogisticRegression`` / ``LinearRegression`` (defaults, ``max_iter=1000`` for the logistic one).

Every model sees the same training rows with the same preprocessing (median / most frequent
imputation, standard scaling, one-hot categories). Scores use the spec's default metric per task
(labbench.nets.metrics, checked against scikit-learn.metrics in tests/nets/test_metrics.py).

**Noise.** A hold-out of a few dozen rows moves a lot by chance. Beside each difference
labbench − MLP the table prints its paired bootstrap standard error over the hold-out rows
(1,000 resamples of the rows, both models' predictions kept; common practice). A difference
within 2 standard errors is "within noise".

    python benchmarks/bench_quality.py                       # all sets, default search
    python benchmarks/bench_quality.py --sets digits wine    # some of them
    python benchmarks/bench_quality.py --pruner none         # the same search without pruning
    python benchmarks/bench_quality.py --space "epochs = { low = 10, high = 200 }" ...

Extra ``--space`` lines are written into the spec's [space] section (by default there is none, so
labbench's default searched space is used). The machine's load changes the times, not the scores:
a one-worker search with a seeded sampler is reproducible.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

SETS = ("digits", "breast_cancer", "wine", "diabetes", "longley", "grunfeld")


def load_set(name: str):
    """(frame, target column) of one public data set."""
    import pandas as pd

    if name in ("digits", "breast_cancer", "wine", "diabetes"):
        from sklearn import datasets

        bunch = getattr(datasets, f"load_{name}")(as_frame=True)
        frame = bunch.frame.copy()
        frame.columns = [str(c).replace(" ", "_") for c in frame.columns]
        return frame, "target"
    import statsmodels.api as sm

    if name == "longley":
        frame = sm.datasets.longley.load_pandas().data
        return frame, "TOTEMP"
    if name == "grunfeld":
        frame = sm.datasets.grunfeld.load_pandas().data
        return pd.DataFrame(frame), "invest"
    raise SystemExit(f"unknown set {name!r}; choose from {', '.join(SETS)}")


def write_spec(folder: Path, name: str, target: str, args) -> Path:
    lines = [f"[data]", f'path = "{name}.csv"', f'target = "{target}"', "",
             "[evaluation]", f"seed = {args.seed}", "",
             "[search]", f"trials = {args.trials}"]
    if args.pruner:
        lines.append(f'pruner = "{args.pruner}"')
    if args.space:
        lines += ["", "[space]", *args.space]
    path = folder / f"{name}.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def run_labbench(spec: Path, out: Path) -> tuple[dict, float]:
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "labbench", "run", str(spec), "--quiet",
                           "--out", str(out)], capture_output=True, text=True)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(f"labbench run exited {proc.returncode}: "
                           + (proc.stderr.strip().splitlines() or ["?"])[-1])
    return json.loads((out / "winner.json").read_text(encoding="utf-8")), seconds


def baselines(task: str):
    from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
    from sklearn.linear_model import LinearRegression, LogisticRegression
    from sklearn.neural_network import MLPClassifier, MLPRegressor

    if task == "regression":
        return {"sklearn MLP": MLPRegressor(random_state=0),
                "HistGB": HistGradientBoostingRegressor(random_state=0),
                "linear": LinearRegression()}
    return {"sklearn MLP": MLPClassifier(random_state=0),
            "HistGB": HistGradientBoostingClassifier(random_state=0),
            "linear": LogisticRegression(max_iter=1000)}


def pipeline(model, numeric, categorical):
    from sklearn.compose import ColumnTransformer
    from sklearn.impute import SimpleImputer
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import OneHotEncoder, StandardScaler

    parts = [("num", make_pipeline(SimpleImputer(strategy="median"), StandardScaler()), list(numeric))]
    if categorical:
        parts.append(("cat", make_pipeline(SimpleImputer(strategy="most_frequent"),
                                           OneHotEncoder(handle_unknown="ignore", sparse_output=False)), list(categorical)))
    return make_pipeline(ColumnTransformer(parts), model)


def output_of(model, X, task):
    if task == "regression":
        return model.predict(X)
    proba = model.predict_proba(X)
    return proba[:, 1] if task == "binary" else proba


def paired_se(metric, y, out_a, out_b, task, n_classes, rng, reps=1000) -> float:
    from labbench.nets.metrics import compute

    n = len(y)
    diffs = []
    for _ in range(reps):
        idx = rng.integers(0, n, n)
        if task != "regression" and len(np.unique(y[idx])) < 2:
            continue
        try:
            diffs.append(compute(metric, y[idx], out_a[idx], task, n_classes)
                         - compute(metric, y[idx], out_b[idx], task, n_classes))
        except Exception:   # a resample without some class for a metric that needs it
            continue
    return float(np.std(diffs, ddof=1)) if len(diffs) > 1 else float("nan")


def one_set(name: str, folder: Path, args) -> dict:
    from labbench.export import load_bundle
    from labbench.nets.metrics import compute
    from labbench.search.prepare import prepare
    from labbench.search.spec import load_spec

    frame, target = load_set(name)
    frame.to_csv(folder / f"{name}.csv", index=False)
    spec_path = write_spec(folder, name, target, args)
    summary, lab_seconds = run_labbench(spec_path, folder / f"{name}_out")
    prepared = prepare(load_spec(spec_path))
    table, task, metric = prepared.table, prepared.task, prepared.metric
    hold = prepared.holdout_pos
    X_train = table.frame.iloc[prepared.train_pos]
    X_hold = table.frame.iloc[hold]
    y_train, y_hold = table.y[prepared.train_pos], table.y[hold]
    n_classes = prepared.n_classes
    model = load_bundle(folder / f"{name}_out" / "model.npz")
    lab_out = model.output(X_hold)
    row = {"set": name, "task": task, "metric": metric, "rows": table.n_rows,
           "labbench": compute(metric, y_hold, lab_out, task, n_classes),
           "labbench_reported": summary.get("holdout_score"),
           "labbench_s": lab_seconds,
           "pruned": summary.get("trials", {}).get("pruned"),
           "settings": summary.get("settings")}
    numeric = [c for c in table.features if table.kinds[c] == "numeric"]
    categorical = [c for c in table.features if table.kinds[c] == "categorical"]
    rng = np.random.default_rng(0)
    for label, est in baselines(task).items():
        pipe = pipeline(est, numeric, categorical)
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pipe.fit(X_train, y_train)
        row[f"{label}_s"] = time.perf_counter() - t0
        out = output_of(pipe, X_hold, task)
        row[label] = compute(metric, y_hold, out, task, n_classes)
        if label == "sklearn MLP":
            row["se_vs_mlp"] = paired_se(metric, y_hold, lab_out, out, task, n_classes, rng)
    return row


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sets", nargs="+", default=list(SETS), choices=SETS)
    parser.add_argument("--trials", type=int, default=30)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--pruner", default=None, help="override [search] pruner (default: labbench's)")
    parser.add_argument("--space", action="append", default=[],
                        help="a line for the spec's [space] section (repeatable)")
    parser.add_argument("--json", metavar="FILE", help="also write the rows as JSON")
    args = parser.parse_args(argv)
    from labbench.nets.metrics import METRICS

    rows = []
    with tempfile.TemporaryDirectory(prefix="lb-quality-") as tmp:
        for name in args.sets:
            try:
                rows.append(one_set(name, Path(tmp), args))
            except RuntimeError as exc:           # labbench refused or failed: a row that says so
                print(f"  {name}: {exc}", flush=True)
                rows.append({"set": name, "error": str(exc)})
                continue
            r = rows[-1]
            print(f"  {name}: labbench {r['labbench']:.4g} in {r['labbench_s']:.0f} s", flush=True)
    print()
    print(f"hold-out scores, default labbench search ({args.trials} trials"
          + (f", pruner {args.pruner}" if args.pruner else "") + ") vs scikit-learn defaults")
    head = ("| set | metric | labbench | sklearn MLP | HistGB | linear | labbench − MLP (± 2 SE) "
            "| labbench s | MLP s | HistGB s | pruned |")
    print(head)
    print("|" + "---|" * (head.count("|") - 1))
    for r in rows:
        if "error" in r:
            print(f"| {r['set']} | – | failed: {r['error']} |")
            continue
        sign = 1.0 if METRICS[r["metric"]].direction == "maximize" else -1.0
        diff = sign * (r["labbench"] - r["sklearn MLP"])
        verdict = "better" if diff > 2 * r["se_vs_mlp"] else (
            "within noise" if diff >= -2 * r["se_vs_mlp"] else "WORSE")
        print(f"| {r['set']} | {r['metric']} | {r['labbench']:.4g} | {r['sklearn MLP']:.4g} | "
              f"{r['HistGB']:.4g} | {r['linear']:.4g} | {diff:+.3g} ± {2 * r['se_vs_mlp']:.2g} "
              f"({verdict}) | {r['labbench_s']:.0f} | {r['sklearn MLP_s']:.1f} | "
              f"{r['HistGB_s']:.1f} | {r['pruned']} |")
    print("\n(labbench − MLP is signed so that positive is better; SE: paired bootstrap over the "
          "hold-out rows)")
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1, default=str), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
