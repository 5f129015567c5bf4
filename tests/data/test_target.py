"""Target scaling for regression (labbench.data.target): the scaler itself, and that the search's
folds fit it on each fold's training rows only."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from labbench.data import TargetScaler, Table, make_folds, prepare_folds
from labbench.errors import DataError


def regression_table(y, n_features=3, seed=0) -> Table:
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(rng.normal(size=(len(y), n_features)), columns=[f"x{j}" for j in range(n_features)])
    return Table(path="prices.csv", frame=frame, target="price", features=tuple(frame.columns),
                 kinds={c: "numeric" for c in frame.columns}, task="regression", classes=None,
                 y=np.asarray(y, dtype=np.float64), ids=None, id_column=None, sha256="", warnings=())


finite = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)
positive = st.floats(1e-6, 1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=200, deadline=None)
@given(arrays(np.float64, st.integers(1, 40), elements=finite), st.sampled_from(["standard", "none"]))
def test_inverse_undoes_transform(y, method):
    scaler = TargetScaler(method).fit(y)
    # inverse(transform(y)) == y up to float64 rounding of one affine map and its inverse
    np.testing.assert_allclose(scaler.inverse(scaler.transform(y)), y, rtol=1e-12,
                               atol=1e-12 * max(1.0, float(np.max(np.abs(y)))))


@settings(max_examples=200, deadline=None)
@given(arrays(np.float64, st.integers(1, 40), elements=positive))
def test_log_inverse_undoes_transform(y):
    scaler = TargetScaler("log").fit(y)
    # exp(log(y)) loses a few ulps relative to y (|log y| <= 14 here)
    np.testing.assert_allclose(scaler.inverse(scaler.transform(y)), y, rtol=1e-12)


def test_standard_gives_mean_0_sd_1_and_state_round_trips():
    y = np.array([3.0, 5.0, 7.0, 100.0])
    scaler = TargetScaler("standard").fit(y)
    z = scaler.transform(y)
    # numpy reference: population mean and standard deviation (ddof=0), as the inputs are scaled
    assert scaler.center == pytest.approx(np.mean(y)) and scaler.scale == pytest.approx(np.std(y))
    np.testing.assert_allclose([z.mean(), z.std()], [0.0, 1.0], atol=1e-12)
    again = TargetScaler.from_state(scaler.to_state())
    assert again.to_state() == scaler.to_state()
    assert all(type(v) in (str, float) for v in scaler.to_state().values())   # plain JSON values
    np.testing.assert_array_equal(again.inverse(z), scaler.inverse(z))


def test_log_works_on_the_log_of_the_target():
    y = np.array([1.0, 10.0, 100.0, 1000.0])
    scaler = TargetScaler("log").fit(y)
    # numpy reference: mean and sd of the natural log
    assert scaler.center == pytest.approx(np.mean(np.log(y)))
    assert scaler.scale == pytest.approx(np.std(np.log(y)))
    np.testing.assert_allclose(scaler.inverse([0.0]), np.exp(np.mean(np.log(y))))   # geometric mean


def test_constant_target_gets_scale_one_and_none_is_the_identity():
    scaler = TargetScaler("standard").fit([4.0, 4.0, 4.0])
    assert scaler.scale == 1.0 and scaler.center == 4.0
    none = TargetScaler("none").fit([1.0, 50.0])
    np.testing.assert_array_equal(none.transform([1.0, 50.0]), [1.0, 50.0])
    assert none.is_identity and not scaler.is_identity


def test_old_state_is_none_and_bad_states_are_refused():
    assert TargetScaler.from_state(None).method == "none"      # a bundle from before target scaling
    for bad in ({"method": "cube"}, {"method": "standard", "center": 0.0, "scale": 0.0},
                {"method": "log", "center": float("nan"), "scale": 1.0}, "standard"):
        with pytest.raises(ValueError):
            TargetScaler.from_state(bad)


@pytest.mark.parametrize("values", [[3.0, 0.0, 5.0], [2.0, -1.5, 4.0, -2.0, -3.0, -7.0]])
def test_log_refuses_non_positive_values_in_one_line(values):
    with pytest.raises(DataError) as info:
        TargetScaler("log", "price").fit(values, "prices.csv: ")
    text = str(info.value)
    assert "\n" not in text and text.startswith("prices.csv: column 'price'")
    assert 'target_scaling = "standard"' in text          # names the fix


def test_unknown_method_is_a_data_error():
    with pytest.raises(DataError, match="target_scaling"):
        TargetScaler("robust")


@pytest.mark.parametrize("method", ["standard", "log"])
def test_each_fold_fits_on_its_own_training_rows_only(method):
    rng = np.random.default_rng(5)
    y = np.exp(rng.normal(3.0, 1.0, size=90))
    table = regression_table(y)
    rows = np.arange(0, 90, 1)[5:]                   # positions into the table; the rest is hold-out
    folds = make_folds(y[rows], 3, seed=2, stratify=False)
    fa = prepare_folds(table, rows, folds, "standard", method)
    base = np.log(y) if method == "log" else y
    for i, (tr, va) in enumerate(folds):
        scaler = fa.target_scalers[i]
        # numpy reference: mean / sd of exactly this fold's training rows
        assert scaler.center == pytest.approx(np.mean(base[rows[tr]]), rel=1e-12)
        assert scaler.scale == pytest.approx(np.std(base[rows[tr]]), rel=1e-12)
        np.testing.assert_allclose(fa.y_train[i], scaler.transform(y[rows[tr]]), rtol=1e-12)
        np.testing.assert_allclose(scaler.inverse(fa.y_val[i]), y[rows[va]], rtol=1e-12)
    # direct check of "training rows only": change every validation and hold-out target of fold
    # 0 wildly; its scaler must not move, and its training targets must not either
    changed = y.copy()
    outside = np.setdiff1d(np.arange(90), rows[folds[0][0]])
    changed[outside] *= 1000.0
    fb = prepare_folds(regression_table(changed), rows, folds, "standard", method)
    assert fb.target_scalers[0].to_state() == fa.target_scalers[0].to_state()
    np.testing.assert_array_equal(fb.y_train[0], fa.y_train[0])
    assert fb.target_scalers[1].to_state() != fa.target_scalers[1].to_state()


def test_classification_folds_keep_their_codes_and_have_no_target_scaler():
    table = regression_table(np.arange(40) % 2)
    table = Table(**{**table.__dict__, "task": "binary", "classes": ("a", "b"),
                     "y": (np.arange(40) % 2).astype(np.int64)})
    folds = make_folds(table.y, 2, seed=0, stratify=True)
    fa = prepare_folds(table, np.arange(40), folds, "standard", "log")    # ignored for classes
    assert fa.target_scalers == () and fa.target_inverse is None
    assert fa.y_train[0].dtype == np.int64


def test_folds_refuse_log_of_a_non_positive_target_naming_the_file_and_column():
    y = np.linspace(-1.0, 10.0, 30)
    with pytest.raises(DataError) as info:
        prepare_folds(regression_table(y), np.arange(30), make_folds(y, 3, seed=0, stratify=False),
                      "standard", "log")
    assert str(info.value).startswith("prices.csv: column 'price'") and "\n" not in str(info.value)
