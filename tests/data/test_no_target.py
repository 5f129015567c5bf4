"""Tables without a target (the map and group families): every row kept, a label column beside the
rows and never an input, random (unstratified) splits, folds without a target scaler, and the data
screening still working."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from labbench.data import check_folds, holdout_split, load_table, make_folds, prepare_folds
from labbench.data.profile import find_traps, profile_columns
from labbench.errors import DataError


def _rows(n: int = 40, seed: int = 0) -> pd.DataFrame:
    """Invented readings: two measurements, a text kind, a label and an id."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({
        "tag": [f"T{i:03d}" for i in range(n)],
        "speed": rng.normal(10, 2, n).round(3),
        "load": rng.uniform(0, 1, n).round(3),
        "line": rng.choice(["a", "b"], n),
        "state": rng.choice(["idle", "busy", "fault"], n),
    })
    frame.loc[3, "speed"] = np.nan        # a missing input: the row stays (imputed per fold)
    frame.loc[5, "state"] = np.nan        # a missing label: the row stays too
    return frame


def test_a_table_without_a_target_keeps_every_row_and_the_label_beside_them(tmp_path):
    path = tmp_path / "r.csv"
    frame = _rows()
    frame.to_csv(path, index=False)
    for target in (None, ""):
        table = load_table(path, target, ignore=["tag"], label="state")
        assert table.task == "unsupervised" and not table.has_target
        assert table.target == "" and table.classes is None
        assert table.n_rows == 40 and table.y.dtype == np.float64 and not table.y.any()
        assert table.features == ("speed", "load", "line")          # the label is never an input
        assert "state" not in table.frame.columns
        assert table.label == "state"
        assert list(table.labels[:5]) == list(frame["state"][:5]) and table.labels[5] is None
        assert np.isnan(table.frame["speed"][3])
        assert table.id_column == "tag" and table.ids[0] == "T000"
    plain = load_table(path, None)               # neither label nor ignore: tag is left out as an id
    assert plain.label is None and plain.labels is None
    assert plain.features == ("speed", "load", "line", "state")
    assert any("looks like a row id" in w for w in plain.warnings)
    # a table with a target is what it was
    supervised = load_table(path, "state", ignore=["tag"])
    assert supervised.task == "multiclass" and supervised.has_target and supervised.label is None


@pytest.mark.parametrize("kwargs, words", [
    ({"label": "colour"}, "label: no column 'colour'; the columns are"),
    ({"label": "tag", "ignore": ["tag"]}, "ignore: 'tag' is the label, which is never an input; remove it from ignore"),
    ({"label": "load", "kinds": {"load": "numeric"}}, "kinds: 'load' is the label"),
    ({"label": "state", "target": "state"}, "label: 'state' is the target"),
    ({"task": "multiclass"}, "task = 'multiclass' but no target is named"),
])
def test_bad_label_or_task_without_target_is_one_clear_line(tmp_path, kwargs, words):
    path = tmp_path / "r.csv"
    _rows().to_csv(path, index=False)
    kwargs = {"target": None, **kwargs}
    with pytest.raises(DataError) as info:
        load_table(path, **kwargs)
    message = str(info.value)
    assert message.startswith(f"{path}: ") and "\n" not in message
    assert words in message, message


def test_only_inputs_left_is_refused_with_the_roles_named(tmp_path):
    path = tmp_path / "r.csv"
    _rows()[["tag", "state"]].to_csv(path, index=False)
    with pytest.raises(DataError, match=r"no feature columns left besides the label 'state' and "
                                        r"the ignored ones"):
        load_table(path, None, ignore=["tag"], label="state")


def test_splits_are_random_and_folds_have_no_target_scaler(tmp_path):
    from sklearn.model_selection import KFold, train_test_split

    path = tmp_path / "r.csv"
    _rows(60).to_csv(path, index=False)
    table = load_table(path, None, ignore=["tag"], label="state")
    check_folds(table, 5, 0.2)
    with pytest.raises(DataError, match="training rows after setting 12 aside for the hold-out are too few for 30 folds"):
        check_folds(table, 30, 0.2)
    # reference: scikit-learn's train_test_split(shuffle=True) and KFold(shuffle=True), the
    # unstratified splits labbench.data follows step for step
    train, hold = holdout_split(table.y, 0.2, seed=3, stratify=False)
    ref_train, ref_hold = train_test_split(np.arange(60), test_size=0.2, random_state=3, shuffle=True)
    assert list(hold) == sorted(ref_hold) and list(train) == sorted(ref_train)
    folds = make_folds(table.y[train], 4, seed=3, stratify=False)
    ref = KFold(4, shuffle=True, random_state=3).split(np.zeros(len(train)))
    for (tr, va), (rtr, rva) in zip(folds, ref):
        assert list(va) == list(rva) and list(tr) == list(rtr)
    arrays = prepare_folds(table, train, folds, "standard", "log")   # target scaling ignored
    assert arrays.target_scalers == () and arrays.target_inverse is None
    for i, (tr, _va) in enumerate(folds):
        assert not arrays.y_train[i].any() and arrays.y_train[i].dtype == np.float64
        # each fold's scaler sees its own training rows only (numpy: mean and ddof=0 std)
        speed = table.frame["speed"].to_numpy()[train[tr]]
        speed = np.where(np.isnan(speed), np.nanmedian(speed), speed)
        np.testing.assert_allclose(arrays.X_train[i][:, 0], (speed - speed.mean()) / speed.std(),
                                   rtol=1e-12, atol=1e-12)


def test_the_screening_works_without_a_target():
    frame = _rows(40)
    frame["speed"] = frame["speed"].round(0).astype(object)    # repeated values: not id-like
    frame.loc[7, "speed"] = "n/a"                           # stray text in a number column
    frame["serial"] = np.arange(40)                         # counts the rows: id-like
    frame["constant"] = 1.0
    features = ["speed", "load", "line", "serial", "constant"]
    traps = find_traps(frame, None, features)
    assert sorted((t.column, t.kind) for t in traps) == [("serial", "id-like"), ("speed", "stray text")]
    profiles = profile_columns(frame, {}, None, None, features=features)
    assert profiles["constant"].flags == ("constant",) and profiles["serial"].flags == ("id-like",)
    assert all("leak suspect" not in p.flags for p in profiles.values())
    assert find_traps(frame, "", features) == traps
