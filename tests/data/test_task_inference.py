"""Task inference reads a target as a person would: quantities are regression, small whole-number
codes are classes; errors about classes say how to force regression."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from labbench.data import check_folds, infer_task, load_table
from labbench.errors import DataError


def longley() -> pd.DataFrame:
    # Longley's data as statsmodels ships it (statsmodels.datasets.longley; NIST StRD "Longley")
    import statsmodels.api as sm

    return sm.datasets.longley.load_pandas().data


def test_longley_employment_total_is_regression(tmp_path):
    frame = longley()
    # 16 rows, 16 different whole numbers (60,171 to 70,551 people employed, in thousands)
    assert frame["TOTEMP"].nunique() == 16 and len(frame) == 16
    assert infer_task(frame["TOTEMP"]) == "regression"
    path = tmp_path / "longley.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, "TOTEMP")
    assert table.task == "regression"
    # YEAR (1947..1962) counts up by one but is a predictor of the NIST model, not a row counter
    assert "YEAR" in table.features
    np.testing.assert_array_equal(table.y, frame["TOTEMP"].to_numpy())


@pytest.mark.parametrize("loader", ["load_iris", "load_wine", "load_digits"])
def test_scikit_learn_class_codes_stay_classes(loader):
    # the targets of scikit-learn's iris (0..2), wine (0..2) and digits (0..9) sets are class codes
    import sklearn.datasets

    y = getattr(sklearn.datasets, loader)().target
    assert infer_task(pd.Series(y, name="target")) == "multiclass"


def test_zero_one_column_is_binary_and_rating_is_classes():
    rng = np.random.default_rng(0)
    assert infer_task(pd.Series(rng.integers(0, 2, 50), name="y")) == "binary"
    # a 1-5 rating on 1,000 rows: five codes, each used ~200 times (classes, common practice)
    assert infer_task(pd.Series(rng.integers(1, 6, 1000), name="stars")) == "multiclass"


def test_body_weight_column_is_regression():
    # 30 people, whole kilograms between 52 and 97: 18 different values scattered over a range
    # of 46 - a quantity, not a set of codes (common practice)
    rng = np.random.default_rng(3)
    weights = rng.choice(np.arange(52, 98), size=18, replace=False)
    values = np.concatenate([weights, rng.choice(weights, 12)])
    s = pd.Series(values, name="weight_kg")
    assert 3 <= s.nunique() <= 20
    assert infer_task(s) == "regression"


def test_small_sparse_codes_are_classes():
    # codes 1, 5 and 10 (small numbers) with many rows each stay classes
    s = pd.Series([1, 5, 10] * 20, name="grade")
    assert infer_task(s) == "multiclass"


def test_rare_class_error_says_how_to_force_regression(tmp_path):
    # a quantity that the rule still reads as codes (a compact range of small whole numbers)
    path = tmp_path / "t.csv"
    rng = np.random.default_rng(1)
    y = np.r_[np.repeat([3, 4, 5, 6], 12), [7]]
    pd.DataFrame({"x": rng.normal(size=len(y)), "y": y}).to_csv(path, index=False)
    table = load_table(path, "y")
    assert table.task == "multiclass"
    with pytest.raises(DataError) as info:
        check_folds(table, 5, 0.2)
    message = str(info.value)
    assert "class '7'" in message and 'task = "regression"' in message and "[data]" in message


def test_binary_mismatch_error_says_how_to_force_regression(tmp_path):
    path = tmp_path / "t.csv"
    pd.DataFrame({"x": np.arange(30) * 0.5, "y": np.arange(30) % 3}).to_csv(path, index=False)
    with pytest.raises(DataError) as info:
        load_table(path, "y", task="binary")
    assert 'task = "regression"' in str(info.value)
