"""The demo sets: the generator is deterministic, the committed files are what it writes, the
specs have the documented shape, and the tables are what the specs say (task, columns, mess)."""

from __future__ import annotations

import importlib.util
import tomllib
import warnings
from pathlib import Path

import numpy as np
import pytest

from labbench.data import Preprocessor, check_folds, holdout_split, load_table

DEMO = Path(__file__).resolve().parents[2] / "demo_sets"
SPEC_KEYS = {  # the spec shape of DEVELOPERS.md / the search issue
    "data": {"path", "target", "ignore", "task"},
    "evaluation": {"folds", "repeats", "holdout", "seed", "metric"},
    "search": {"trials", "minutes", "sampler", "pruner", "workers", "storage"},
    "space": {"learning_rate", "hidden_layers", "hidden_units", "epochs", "batch_size", "activation",
              "optimizer", "l2"},
}


def generator():
    spec = importlib.util.spec_from_file_location("make_demo_sets", DEMO / "make_demo_sets.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_generator_is_deterministic_and_the_committed_files_are_its_output(tmp_path):
    gen = generator()
    assert "invented" in gen.__doc__.lower() and "invented" in (DEMO / "README.md").read_text().lower()
    gen.main([str(tmp_path / "a")])
    gen.main([str(tmp_path / "b")])
    for name in ("orchard.csv", "bakery.csv", "pumps.csv"):
        fresh = (tmp_path / "a" / name).read_bytes()
        assert fresh == (tmp_path / "b" / name).read_bytes()
        assert fresh == (DEMO / name).read_bytes(), f"{name} differs from the generator's output; rerun it"


def spec_of(name):
    return tomllib.loads((DEMO / f"{name}.toml").read_text(encoding="utf-8"))


def load(name):
    d = spec_of(name)["data"]
    return load_table(DEMO / d["path"], d["target"], ignore=d.get("ignore", ()), task=d.get("task"))


@pytest.mark.parametrize("name", ["orchard", "bakery"])
def test_spec_shape(name):
    spec = spec_of(name)
    assert set(spec) == set(SPEC_KEYS)
    for section, keys in spec.items():
        assert set(keys) <= SPEC_KEYS[section], (section, set(keys) - SPEC_KEYS[section])
    assert spec["search"]["trials"] <= 30 and spec["space"]["epochs"]["high"] <= 60
    try:
        from labbench.search.spec import load_spec
    except ImportError:           # the spec parser belongs to the search package
        return
    assert load_spec(DEMO / f"{name}.toml").data.target == spec["data"]["target"]


def test_orchard_table():
    table = load("orchard")
    assert table.task == "multiclass" and table.classes == ("juice", "premium", "standard")
    assert table.features == ("variety", "block", "days_since_bloom", "sugar_brix", "firmness_kg_cm2",
                              "diameter_mm", "weight_g", "starch_index", "bruised_of_20", "canopy_light_lux")
    assert table.categorical == ("variety", "block") and table.n_rows == 1500
    assert table.id_column == "crate_id" and table.ids[0] == "CR-00001"
    shares = np.bincount(table.y) / table.n_rows
    assert shares.min() > 0.1
    gappy = table.frame.isna().mean()
    assert sorted(gappy[gappy > 0].index) == ["canopy_light_lux", "firmness_kg_cm2", "sugar_brix"]
    assert gappy.max() < 0.06
    numeric = table.frame[list(table.numeric)]
    assert numeric.std().max() / numeric.std().min() > 1e4     # very different scales
    e = spec_of("orchard")["evaluation"]
    check_folds(table, e["folds"], e["holdout"])


def test_bakery_table():
    table = load("bakery")
    assert table.task == "regression" and table.classes is None and table.n_rows == 1200
    assert table.features == ("weekday", "public_holiday", "promotion", "temperature_c", "rain_mm",
                              "price_eur", "footfall")
    assert table.categorical == ("weekday",) and table.id_column == "day_id"
    gappy = table.frame.isna().mean()
    assert sorted(gappy[gappy > 0].index) == ["footfall", "rain_mm", "temperature_c"]
    e = spec_of("bakery")["evaluation"]
    check_folds(table, e["folds"], e["holdout"])


def split(table, seed=7):
    train, hold = holdout_split(table.y, 0.2, seed=seed, stratify=table.task != "regression")
    pre = Preprocessor(table.numeric, table.categorical).fit(table.frame.iloc[train])
    return (pre.transform(table.frame.iloc[train]), table.y[train],
            pre.transform(table.frame.iloc[hold]), table.y[hold])


def test_a_small_network_beats_a_linear_model_on_both_sets():
    # reference models: scikit-learn's MLP and linear models (the demo's point: non-linear signal)
    from sklearn.compose import TransformedTargetRegressor
    from sklearn.linear_model import LogisticRegression, Ridge
    from sklearn.metrics import balanced_accuracy_score, mean_squared_error
    from sklearn.neural_network import MLPClassifier, MLPRegressor
    from sklearn.preprocessing import StandardScaler

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")       # MLP convergence warnings at 300 iterations
        X, y, Xh, yh = split(load("orchard"))
        linear = balanced_accuracy_score(yh, LogisticRegression(max_iter=1000).fit(X, y).predict(Xh))
        mlp = balanced_accuracy_score(yh, MLPClassifier(hidden_layer_sizes=(64,), max_iter=300, random_state=0)
                                      .fit(X, y).predict(Xh))
        assert mlp >= 0.78 and mlp - linear >= 0.08, (mlp, linear)
        X, y, Xh, yh = split(load("bakery"))
        ridge = mean_squared_error(yh, Ridge().fit(X, y).predict(Xh)) ** 0.5
        net = TransformedTargetRegressor(MLPRegressor(hidden_layer_sizes=(64,), max_iter=300, random_state=0),
                                         transformer=StandardScaler())
        rmse = mean_squared_error(yh, net.fit(X, y).predict(Xh)) ** 0.5
        assert rmse < 0.7 * ridge and rmse < 0.35 * np.std(yh), (rmse, ridge)


def test_pumps_table_has_no_target_and_its_states_are_groups_to_find():
    # the spec reads as a table without a target, the state beside the rows, never an input
    d = spec_of("pumps")["data"]
    assert "target" not in d and d["label"] == "state" and spec_of("pumps")["model"]["family"] == "som"
    table = load_table(DEMO / d["path"], None, ignore=d["ignore"], label=d["label"])
    assert table.task == "unsupervised" and table.classes is None and table.n_rows == 1000
    assert table.features == ("flow_m3h", "head_m", "vibration_mm_s", "bearing_temp_c",
                              "motor_current_a", "noise_db")
    assert table.id_column == "reading_id" and table.ids[0] == "R0001"
    assert sorted(set(table.labels)) == ["blocked inlet", "cavitating", "steady", "worn bearing"]
    gappy = table.frame.isna().mean()
    assert list(gappy[gappy > 0].index) == ["bearing_temp_c"] and gappy.max() < 0.02
    check_folds(table, spec_of("pumps")["evaluation"]["folds"], spec_of("pumps")["evaluation"]["holdout"])
    # reference: scikit-learn's KMeans (n_init=10) finds the four invented states again
    # (adjusted_rand_score, sklearn.metrics); a map has real groups to find here
    from sklearn.cluster import KMeans
    from sklearn.metrics import adjusted_rand_score

    X = Preprocessor(table.numeric, table.categorical).fit_transform(table.frame)
    found = KMeans(4, n_init=10, random_state=0).fit_predict(X)
    assert adjusted_rand_score(table.labels, found) > 0.95
