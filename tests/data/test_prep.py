"""Preprocessing fitted per fold. References: scikit-learn's SimpleImputer (median / most_frequent),
StandardScaler, MinMaxScaler and OneHotEncoder(handle_unknown="ignore") in a ColumnTransformer must
give the same matrix; leakage is ruled out by a property test (hypothesis)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from sklearn.compose import ColumnTransformer
from sklearn.impute import SimpleImputer
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import MinMaxScaler, OneHotEncoder, StandardScaler

from labbench.data import Preprocessor, Table, make_folds, prepare_folds
from labbench.errors import BundleError, DataError

NUM, CAT = ["sugar", "weight", "flat"], ["variety", "block"]


def frame_of(n, seed, missing=0.1):
    rng = np.random.default_rng(seed)
    f = pd.DataFrame({
        "sugar": rng.normal(12, 2, n), "weight": rng.normal(180, 30, n) * 1000, "flat": np.full(n, 3.0),
        "variety": rng.choice(["Gala", "Cox", "Fuji", "Jonagold"], n, p=[0.4, 0.3, 0.2, 0.1]),
        "block": rng.choice(["north", "south", "east"], n),
    })
    for col in ["sugar", "weight", "variety"]:
        f.loc[rng.random(n) < missing, col] = np.nan
    return f


def reference(scaler):
    return ColumnTransformer([
        ("num", make_pipeline(SimpleImputer(strategy="median"), scaler), NUM),
        ("cat", make_pipeline(SimpleImputer(strategy="most_frequent"),
                              OneHotEncoder(handle_unknown="ignore", sparse_output=False)), CAT),
    ])


def as_object(f):
    out = f.copy()
    for col in CAT:
        out[col] = f[col].astype(object).where(f[col].notna(), np.nan)
    return out


@pytest.mark.parametrize("scaling, scaler", [("standard", StandardScaler()), ("minmax", MinMaxScaler())])
def test_same_matrix_as_scikit_learn(scaling, scaler):
    train, new = frame_of(300, 0), frame_of(80, 1, missing=0.3)
    new.loc[:4, "variety"] = "Braeburn"            # a category never seen in training
    ours = Preprocessor(NUM, CAT, scaling).fit(train)
    ref = reference(scaler).fit(as_object(train))
    np.testing.assert_allclose(ours.transform(train), ref.transform(as_object(train)), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(ours.transform(new), ref.transform(as_object(new)), rtol=1e-12, atol=1e-12)
    assert ours.feature_names_ == NUM + [f"variety={c}" for c in ["Cox", "Fuji", "Gala", "Jonagold"]] + \
        [f"block={c}" for c in ["east", "north", "south"]]
    assert np.all(ours.transform(new)[:5, 3:7] == 0)    # unseen: all zeros


def test_constant_and_empty_training_columns_get_scale_one():
    f = pd.DataFrame({"a": [2.0, 2.0, 2.0], "b": [np.nan] * 3, "c": ["x", None, None]})
    pre = Preprocessor(["a", "b"], ["c"], "minmax").fit(f)
    assert pre.scale_.tolist() == [1.0, 1.0] and pre.impute_.tolist() == [2.0, 0.0]
    X = pre.transform(pd.DataFrame({"a": [3.0], "b": [5.0], "c": [None]}))
    assert X.tolist() == [[1.0, 5.0, 1.0]]                 # missing category -> most frequent ("x")


def test_most_frequent_ties_take_the_smallest_like_simple_imputer():
    f = pd.DataFrame({"c": ["b", "a", "b", "a", None]})
    pre = Preprocessor([], ["c"]).fit(f)
    ref = SimpleImputer(strategy="most_frequent").fit(f.astype(object).where(f.notna(), np.nan))
    assert pre.cat_impute_ == [ref.statistics_[0]] == ["a"]


def test_whole_number_categories_match_with_and_without_missing_values():
    train = pd.DataFrame({"block": [1.0, 2.0, np.nan, 3.0, 2.0]})       # float: pandas' ints with a gap
    pre = Preprocessor([], ["block"]).fit(train)
    assert pre.categories_ == [["1", "2", "3"]]
    np.testing.assert_array_equal(pre.transform(pd.DataFrame({"block": [3, 1]})), [[0, 0, 1], [1, 0, 0]])


def test_state_round_trip_is_plain_and_exact():
    train, new = frame_of(200, 2), frame_of(50, 3)
    pre = Preprocessor(NUM, CAT, "minmax").fit(train)
    state = pre.to_state()
    text = json.dumps(state)                                         # plain lists, floats, strings
    assert set(state) == {"scaling", "numeric", "impute", "center", "scale", "categorical", "categories",
                          "cat_impute"}
    again = Preprocessor.from_state(json.loads(text))
    np.testing.assert_array_equal(again.transform(new), pre.transform(new))
    assert again.feature_names_ == pre.feature_names_
    assert state["center"] == train[NUM].fillna(train[NUM].median()).min().tolist()


@pytest.mark.parametrize("change, words", [
    (lambda s: s.pop("scale"), "missing key(s) scale"),
    (lambda s: s["impute"].append(1.0), "impute has 4 values for 3 numeric"),
    (lambda s: s["categories"].pop(), "categories has 1 entries for 2 categorical"),
    (lambda s: s.update(scaling="log"), "scaling = 'log'"),
])
def test_damaged_state_is_a_bundle_error(change, words):
    state = Preprocessor(NUM, CAT).fit(frame_of(30, 4)).to_state()
    change(state)
    with pytest.raises(BundleError, match=words.replace("(", r"\(").replace(")", r"\)")):
        Preprocessor.from_state(state)


def test_transform_refuses_text_missing_columns_and_infinities():
    pre = Preprocessor(["a"], ["c"]).fit(pd.DataFrame({"a": [1.0, 2.0], "c": ["x", "y"]}))
    with pytest.raises(DataError, match="'a' must hold numbers but row 2 holds 'heavy'"):
        pre.transform(pd.DataFrame({"a": ["1", "heavy"], "c": ["x", "y"]}))
    with pytest.raises(DataError, match="missing column"):
        pre.transform(pd.DataFrame({"a": [1.0]}))
    with pytest.raises(DataError, match="row 1: inf is not a finite number"):
        pre.transform(pd.DataFrame({"a": [np.inf], "c": ["x"]}))
    with pytest.raises(DataError, match="scaling"):
        Preprocessor(["a"], [], "robust")


def make_table(frame, y):
    kinds = {c: ("categorical" if c in CAT else "numeric") for c in frame.columns}
    return Table(path="t.csv", frame=frame, target="grade", features=tuple(frame.columns), kinds=kinds,
                 task="binary", classes=("no", "yes"), y=np.asarray(y, dtype=np.int64), ids=None,
                 id_column=None, sha256="", warnings=())


def test_prepare_folds_shapes_rows_and_per_fold_fit():
    frame = frame_of(120, 5)
    y = np.arange(120) % 2
    table = make_table(frame, y)
    rows = np.arange(0, 120, 2)[::-1].copy()       # any subset, any order: positions into the table
    folds = make_folds(y[rows], 4, seed=1, stratify=True)
    fa = prepare_folds(table, rows, folds, "standard")
    assert fa.n_folds == 4
    for i, (tr, va) in enumerate(folds):
        np.testing.assert_array_equal(fa.train_rows[i], rows[tr])
        np.testing.assert_array_equal(fa.val_rows[i], rows[va])
        np.testing.assert_array_equal(fa.y_train[i], y[rows[tr]])
        direct = Preprocessor(table.numeric, table.categorical).fit(frame.iloc[rows[tr]])
        assert fa.preprocessors[i].to_state() == direct.to_state()
        np.testing.assert_array_equal(fa.X_val[i], direct.transform(frame.iloc[rows[va]]))
        assert fa.X_train[i].dtype == np.float64 and fa.X_train[i].shape == (len(tr), fa.n_inputs)
        # standardised on its own training rows: mean 0, sd 1 where the column varies (common practice)
        np.testing.assert_allclose(fa.X_train[i][:, :2].mean(axis=0), 0, atol=1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), shift=st.floats(1e3, 1e9), scaling=st.sampled_from(["standard", "minmax"]),
       fold=st.integers(0, 2))
def test_validation_rows_cannot_leak_into_what_is_fitted(seed, shift, scaling, fold):
    frame = frame_of(60, seed)
    y = np.random.default_rng(seed).integers(0, 2, 60)
    rows = np.arange(60)
    folds = make_folds(y, 3, seed=seed, stratify=False)
    before = prepare_folds(make_table(frame, y), rows, folds, scaling)
    # move the validation rows of one fold far away, blank some, give them unseen categories
    val = folds[fold][1]
    moved = frame.copy()
    moved.loc[val, "sugar"] = moved.loc[val, "sugar"] + shift
    moved.loc[val, "weight"] = np.nan
    moved.loc[val, "variety"] = "Unheard-of"
    after = prepare_folds(make_table(moved, y), rows, folds, scaling)
    # the folds share one column layout (every level of the search's rows), so the new level gets
    # a column; what is fitted - and every value the training rows get - stays the same, and the
    # new column is all zeros in the training rows (the level is unseen there)
    a, b = after.preprocessors[fold].to_state(), before.preprocessors[fold].to_state()
    seen = lambda st_: [sorted(set(c) - set(u)) for c, u in
                        zip(st_["categories"], st_.get("unseen") or [[]] * len(st_["categories"]))]
    assert seen(a) == seen(b)
    for key in ("impute", "center", "scale", "cat_impute", "numeric", "categorical"):
        assert a[key] == b[key], key
    names_a = after.preprocessors[fold].feature_names_
    names_b = before.preprocessors[fold].feature_names_
    common = [n for n in names_b if n in names_a]
    in_a, in_b = [names_a.index(n) for n in common], [names_b.index(n) for n in common]
    np.testing.assert_array_equal(after.X_train[fold][:, in_a], before.X_train[fold][:, in_b])
    # a level only the validation rows had (before or after the change) is all zeros in training
    # and in validation (unseen)
    extra_a = [i for i, n in enumerate(names_a) if n not in names_b]
    extra_b = [i for i, n in enumerate(names_b) if n not in names_a]
    assert "variety=Unheard-of" in [names_a[i] for i in extra_a]
    for fa, i in [(after, extra_a), (before, extra_b)]:
        np.testing.assert_array_equal(fa.X_train[fold][:, i], 0.0)
        np.testing.assert_array_equal(fa.X_val[fold][:, i], 0.0)
    assert not np.array_equal(after.X_val[fold][:, in_a], before.X_val[fold][:, in_b])
