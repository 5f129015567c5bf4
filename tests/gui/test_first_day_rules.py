"""The Qt-free rules behind the window's first day: column profile and leak rule, the traps and
their remedies, the cost estimate's arithmetic, format-preserving saving, the resumed budget."""

from __future__ import annotations

import math
import textwrap
import tomllib

import numpy as np
import optuna
import pandas as pd
import pytest

from labbench.data.profile import (LEAK_LEVEL, apply_remedy, balanced_accuracy, find_traps, histogram,
                                   leak_score, profile_columns, spearman)


def test_spearman_matches_scipy_with_ties():
    from scipy.stats import spearmanr    # outside reference: scipy's Spearman rank correlation

    rng = np.random.default_rng(3)
    x = rng.integers(0, 8, 300).astype(float)          # many ties
    y = x * 0.5 + rng.normal(size=300)
    assert spearman(x, y) == pytest.approx(spearmanr(x, y).statistic, abs=1e-12)


def test_balanced_accuracy_matches_scikit_learn():
    from sklearn.metrics import balanced_accuracy_score   # outside reference: scikit-learn

    rng = np.random.default_rng(4)
    y = rng.choice(["a", "b", "c"], 500, p=[0.7, 0.2, 0.1])
    p = np.where(rng.random(500) < 0.8, y, "a")
    assert balanced_accuracy(y, p) == pytest.approx(balanced_accuracy_score(y, p), abs=1e-12)


def test_histogram_counts_are_numpys():
    v = pd.Series(np.random.default_rng(5).normal(size=1000))
    counts, labels = histogram(v, "numeric", bins=12)
    expected, _edges = np.histogram(v, bins=12)            # outside reference: numpy.histogram
    assert list(counts) == list(expected) and len(labels) == 12
    counts, labels = histogram(pd.Series(["x"] * 5 + ["y"] * 3 + [None]), "categorical")
    assert counts == (5, 3) and labels == ("x", "y")


def table(n=400, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    noise = rng.normal(size=n)
    return pd.DataFrame({"row_id": np.arange(1, n + 1), "x": x, "noise": noise,
                         "copy": 3 * x + 1e-6 * rng.normal(size=n),
                         "y": 2 * x + rng.normal(size=n)})


def test_leak_rule_flags_a_near_copy_of_the_target_only():
    f = table()
    f["y"] = f["copy"] * 2 + 0.001 * np.random.default_rng(1).normal(size=len(f))
    prof = profile_columns(f, {}, "y", "regression")
    assert "leak suspect" in prof["copy"].flags and "leak suspect" in prof["x"].flags
    assert "leak suspect" not in prof["noise"].flags
    # the row id learns nothing on the other half of the rows (two-fold rule): not a leak, an id
    assert prof["row_id"].flags == ("id-like",)


def test_leak_rule_for_classes_uses_the_other_half_of_the_rows():
    rng = np.random.default_rng(2)
    y = rng.choice(["low", "high"], 600)
    f = pd.DataFrame({"code": np.where(y == "low", 0.0, 1.0) + rng.normal(0, 0.01, 600),
                      "free_text": [f"note {i}" for i in range(600)],
                      "weak": rng.normal(size=600), "y": y})
    score, _what = leak_score(f["code"], f["y"], "numeric", "binary")
    assert score >= LEAK_LEVEL
    score, _what = leak_score(f["free_text"], f["y"], "categorical", "binary")
    assert score < 0.7               # every value new on the other half: the majority class only
    prof = profile_columns(f, {"free_text": "categorical"}, "y", "binary")
    assert "leak suspect" in prof["code"].flags and "leak suspect" not in prof["weak"].flags


def test_traps_use_the_command_lines_rules_and_their_remedies_satisfy_them(tmp_path):
    from labbench.data import load_table
    from labbench.errors import DataError

    rng = np.random.default_rng(7)
    n = 120
    height = rng.normal(170, 10, n).round(1).astype(object)
    height[[3, 50]] = "unknown"
    f = pd.DataFrame({"id": np.arange(n), "height": height, "x": rng.normal(size=n),
                      "grade": rng.integers(1, 6, n)})
    path = tmp_path / "t.csv"
    f.to_csv(path, index=False)
    from labbench.data.reading import read_file

    frame = read_file(path).frame
    traps = find_traps(frame, "grade", ["id", "height", "x"])
    kinds = {t.kind: t for t in traps}
    assert set(kinds) == {"stray text", "id-like", "quantity as classes"}
    assert kinds["stray text"].column == "height" and "2 cell(s)" in kinds["stray text"].reason
    # the command line stops on the same column
    with pytest.raises(DataError, match="height"):
        load_table(path, "grade")
    data = {"path": str(path), "target": "grade"}
    for trap in traps:
        data = apply_remedy(data, trap.remedies[0].change)
    assert data["missing_markers"] == ["unknown"] and data["ignore"] == ["id"]
    assert data["task"] == "regression"
    t = load_table(path, "grade", ignore=data["ignore"], task=data["task"],
                   missing_markers=data["missing_markers"])
    assert t.task == "regression" and "height" in t.features and "id" not in t.features
    # "use it anyway" keeps the id column, as the spec's keep list does for the command line
    kept = apply_remedy({"path": str(path), "target": "grade", "ignore": ["id"]}, {"keep": ["id"]})
    assert kept["keep"] == ["id"] and "ignore" not in kept
    assert "id" in load_table(path, "grade", keep=["id"], task="regression",
                              missing_markers=["unknown"]).features
    assert not [t for t in find_traps(frame, "grade", ["id", "x"], forced=["id"], task="regression")]


def test_estimate_scales_the_calibration_as_it_says():
    from labbench.search.defaults import default_space_dict
    from labbench.search.estimate import CALIBRATION_ROWS, TRIAL_OVERHEAD_S, estimate, shape_from

    shape = shape_from(default_space_dict(), rows=3000, inputs=12, outputs=1, task="binary",
                       folds=5, repeats=1, holdout=0.2, trials=40, workers=1)
    # the middle of the default space (labbench.search.defaults): log range 16..256 -> 64 units
    assert shape.hidden == (64, 64) and shape.batch_size == 64 and shape.epochs == 200
    assert math.isclose(64, math.sqrt(16 * 256))
    e = estimate(shape, 0.01)
    per_epoch = 0.01 * 3000 * 0.8 * 4 / 5 / CALIBRATION_ROWS
    assert e.seconds_per_epoch == pytest.approx(per_epoch)
    assert e.at_most_minutes == pytest.approx(40 * (200 * per_epoch + TRIAL_OVERHEAD_S) / 60)
    assert e.typical_minutes < e.at_most_minutes
    assert "40 trials" in e.words()


HAND = textwrap.dedent("""\
    # my experiment, written by hand
    [data]
    path = "t.csv"      # the table
    target = "y"

    [search]
    trials = 12   # short
    pruner = "none"

    [space]
    learning_rate = { low = 1e-3, high = 0.1, log = true }   # compact
    hidden_units = 32
""")


def test_saving_over_a_hand_written_spec_changes_only_what_changed(tmp_path):
    from labbench.search.spec import load_spec, loads_spec
    from labbench.search.spec_edit import updated_text

    pd.DataFrame({"a": range(30), "y": [0.5 * i for i in range(30)]}).to_csv(tmp_path / "t.csv", index=False)
    (tmp_path / "e.toml").write_text(HAND, encoding="utf-8")
    old = load_spec(tmp_path / "e.toml")
    new = old.with_search(trials=20).with_space(old.space.with_setting("epochs", 50))
    text = updated_text(HAND, old.to_dict(tmp_path), new.to_dict(tmp_path))
    assert text == HAND.replace("trials = 12", "trials = 20") + "epochs = 50\n"
    assert loads_spec(text, tmp_path) == new
    # and back: the values return, the comments stay
    back = updated_text(text, new.to_dict(tmp_path), old.to_dict(tmp_path))
    assert loads_spec(back, tmp_path) == old
    assert back.startswith(HAND.split("\n[space]")[0]) and "# compact" in back


def test_a_resumed_search_continues_the_same_budget(tmp_path):
    from labbench.gui.session import budget_used, trials_to_run
    from labbench.search.spec import load_spec

    pd.DataFrame({"a": range(30), "y": [0.5 * i for i in range(30)]}).to_csv(tmp_path / "t.csv", index=False)
    (tmp_path / "b.toml").write_text('[data]\npath = "t.csv"\ntarget = "y"\n[search]\ntrials = 30\n',
                                     encoding="utf-8")
    spec = load_spec(tmp_path / "b.toml")
    assert budget_used(spec) == 0 and trials_to_run(spec, fresh=False, more=None) == 30
    study = optuna.create_study(study_name="b", storage=f"sqlite:///{tmp_path / 'b.db'}")
    for _ in range(18):
        t = study.ask()
        study.tell(t, 1.0)
    study.tell(study.ask(), state=optuna.trial.TrialState.PRUNED)
    failed = study.ask()
    study.tell(failed, state=optuna.trial.TrialState.FAIL)
    stopped = study.ask()
    stopped.set_user_attr("end_reason", "cancelled by the user")
    study.tell(stopped, state=optuna.trial.TrialState.FAIL)
    # 18 complete + 1 pruned + 1 failed count; the one the user stopped is run again
    assert budget_used(spec) == 20
    assert trials_to_run(spec, fresh=False, more=None) == 10
    assert trials_to_run(spec, fresh=False, more=7) == 7
    assert trials_to_run(spec, fresh=True, more=None) is None
