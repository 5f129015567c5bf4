"""Small tables and specs for the runner and command-line tests (kept tiny: seconds per test).

The tables are open data sets that scikit-learn ships (``sklearn.datasets``): Fisher's iris
(150 rows, 3 classes) and the diabetes progression data of Efron et al. (2004) (442 rows,
regression). Written to CSV so the tests go through the same reading path as a user's file.
"""

from __future__ import annotations

import sys
from pathlib import Path

import optuna

ROOT = Path(__file__).resolve().parents[2]


def iris_csv(folder: Path) -> Path:
    from sklearn.datasets import load_iris

    frame = load_iris(as_frame=True).frame
    frame["species"] = frame.pop("target").map({0: "setosa", 1: "versicolor", 2: "virginica"})
    path = folder / "iris.csv"
    frame.to_csv(path, index=False)
    return path


def diabetes_csv(folder: Path, name: str = "diabetes.csv") -> Path:
    from sklearn.datasets import load_diabetes

    frame = load_diabetes(as_frame=True, scaled=False).frame
    path = folder / name
    frame.to_csv(path, index=False)
    return path


IRIS_SPACE = """
learning_rate = { low = 0.003, high = 0.1, log = true }
hidden_layers = 1
hidden_units = { low = 4, high = 16 }
epochs = 4
batch_size = 32
activation = { choices = ["relu", "tanh"] }
"""


def write_spec(folder: Path, *, data: str = "iris.csv", target: str = "species",
               trials: int = 4, sampler: str = "tpe", pruner: str = "none", workers: int = 1,
               space: str = IRIS_SPACE, folds: int = 3, seed: int = 3, extra_search: str = "",
               name: str = "exp.toml", holdout: float = 0.2, seed_spread: int = 0) -> Path:
    text = f"""
[data]
path = "{data}"
target = "{target}"

[evaluation]
folds = {folds}
holdout = {holdout}
seed = {seed}
seed_spread = {seed_spread}

[search]
trials = {trials}
sampler = "{sampler}"
pruner = "{pruner}"
workers = {workers}
{extra_search}

[space]
{space}
"""
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def load(db: Path, name: str = "exp") -> optuna.Study:
    return optuna.load_study(study_name=name, storage=f"sqlite:///{db}")


def cli(*args: str) -> list[str]:
    """The real command, as a user runs it: ``python -m labbench ...``."""
    return [sys.executable, "-m", "labbench", *args]
