"""load_table: roles, kinds, task, missing-value policy, dropped columns and rows, ids, fingerprint."""

from __future__ import annotations

import hashlib
import os

import numpy as np
import pandas as pd
import pytest
from sklearn.utils.multiclass import type_of_target

from labbench.data import infer_kinds, infer_task, load_table
from labbench.errors import DataError

TEXT = """crate_id,sugar,variety,block,steady,note,grade
c1,12.5,Gala,1,7,,premium
c2,10.0,Cox,2,7,,juice
c3,,Gala,3,7,,standard
c4,11.0,,1,7,,juice
c5,13.0,Fuji,2,7,,
c6,9.5,Cox,3,7,,standard
c7,12.0,Fuji,1,7,,premium
"""


@pytest.fixture
def orchard(tmp_path):
    path = tmp_path / "crates.csv"
    path.write_text(TEXT, encoding="utf-8")
    return path


def test_roles_kinds_and_dropped_rows(orchard):
    mtime = os.stat(orchard).st_mtime_ns
    table = load_table(orchard, "grade", ignore=["crate_id"])
    # c5 has no grade: dropped with a warning; 'steady' and 'note' carry nothing: dropped too
    assert table.features == ("sugar", "variety", "block")
    assert dict(table.kinds) == {"sugar": "numeric", "variety": "categorical", "block": "numeric"}
    assert table.task == "multiclass"
    assert table.classes == ("juice", "premium", "standard")
    np.testing.assert_array_equal(table.y, [1, 0, 2, 0, 2, 1])
    assert table.y.dtype == np.int64
    assert table.ids.tolist() == ["c1", "c2", "c3", "c4", "c6", "c7"]
    assert table.id_column == "crate_id"
    assert list(table.frame.index) == list(range(6))
    assert table.frame["sugar"].isna().sum() == 1 and table.frame["variety"].isna().sum() == 1
    joined = " | ".join(table.warnings)
    assert "dropped 1 row(s) with no value in the target 'grade' (line 6)" in joined
    assert "'steady' has the same value (7)" in joined and "'note' is empty in every row" in joined
    # fingerprint of the bytes (hashlib as reference), file untouched
    assert table.sha256 == hashlib.sha256(orchard.read_bytes()).hexdigest()
    assert os.stat(orchard).st_mtime_ns == mtime and orchard.read_text() == TEXT
    assert table.numeric == ("sugar", "block") and table.categorical == ("variety",)


def test_missing_drop_drops_incomplete_rows(orchard):
    table = load_table(orchard, "grade", ignore=["crate_id"], missing="drop")
    assert table.ids.tolist() == ["c1", "c2", "c6", "c7"]
    assert not table.frame.isna().any().any()
    assert any("missing = 'drop'" in w and "lines 4, 5" in w for w in table.warnings)


def test_kind_overrides(orchard):
    table = load_table(orchard, "grade", ignore=["crate_id"], kinds={"block": "categorical"})
    assert table.kinds["block"] == "categorical"
    assert table.frame["block"].tolist() == [1, 2, 3, 1, 3, 1]   # original values kept


def test_numbers_stored_as_text_convert_and_text_is_refused():
    from labbench.data.roles import as_float

    np.testing.assert_array_equal(as_float(pd.Series(["12", " 13.5", None], dtype="str"), "size"),
                                  [12.0, 13.5, np.nan])
    with pytest.raises(DataError, match=r"'size' must hold numbers but row 2 holds 'big'"):
        as_float(pd.Series(["12", "big", None], dtype="str"), "size")


def test_regression_target_and_integer_classes(tmp_path):
    rng = np.random.default_rng(1)
    n = 60
    frame = pd.DataFrame({"x": rng.normal(size=n), "price": rng.normal(100, 20, n).round(2),
                          "stars": rng.integers(1, 11, n), "flag": rng.integers(0, 2, n)})
    path = tmp_path / "r.csv"
    frame.to_csv(path, index=False)
    reg = load_table(path, "price")
    assert reg.task == "regression" and reg.classes is None and reg.y.dtype == np.float64
    np.testing.assert_allclose(reg.y, frame["price"])
    stars = load_table(path, "stars")
    assert stars.task == "multiclass"
    # numeric labels sort by value: "2" before "10"
    assert stars.classes == tuple(str(v) for v in sorted(set(frame["stars"])))
    assert stars.classes[stars.y[0]] == str(frame["stars"][0])
    assert load_table(path, "flag").task == "binary"
    assert load_table(path, "stars", task="regression").task == "regression"


def test_id_like_text_column_is_left_out_and_free_text_gets_a_warning(tmp_path):
    n = 50
    path = tmp_path / "ids.csv"
    pd.DataFrame({"code": [f"k{i}" for i in range(n)], "x": np.arange(n) % 7,
                  "words": [f"w{i % 30}" for i in range(n)],
                  "y": np.arange(n) % 2}).to_csv(path, index=False)
    table = load_table(path, "y")
    assert table.features == ("x", "words")
    assert any("'code'" in w and "left it out" in w for w in table.warnings)
    assert any("'words'" in w and "consider ignoring it" in w for w in table.warnings)


@pytest.mark.parametrize("values", [
    [0.5, 1.25, 3.0, 2.2, 0.1, 9.9],          # continuous
    [0, 1, 1, 0, 1, 0],                        # two values
    ["a", "b", "c", "a", "b", "c"],           # text labels
    [1, 2, 3, 2, 1, 3],                        # few whole numbers
    [True, False, True, True, False, False],
])
def test_infer_task_agrees_with_scikit_learn_type_of_target(values):
    # reference: sklearn.utils.multiclass.type_of_target ('continuous' = regression). It differs
    # on purpose for whole numbers with more than 20 distinct values (we call that regression).
    expected = {"continuous": "regression", "binary": "binary", "multiclass": "multiclass"}
    assert infer_task(pd.Series(values, name="y")) == expected[type_of_target(np.asarray(values))]


def test_infer_task_many_whole_numbers_is_regression_and_constant_is_refused():
    assert infer_task(pd.Series(np.arange(100) % 37, name="loaves")) == "regression"
    with pytest.raises(DataError, match="single value"):
        infer_task(pd.Series([3, 3, None], name="y"))


def test_infer_kinds():
    frame = pd.DataFrame({"n": [1, 2, 3], "f": [0.5, None, 1.5], "b": [True, False, True],
                          "t": ["a", "b", None]})
    assert infer_kinds(frame) == {"n": "numeric", "f": "numeric", "b": "numeric", "t": "categorical"}


def test_text_target_with_a_typo_among_numbers_is_reported(tmp_path):
    values = [f"{100 + i * 1.5:.1f}" for i in range(40)]
    values[17] = "1O7.5"
    path = tmp_path / "t.csv"
    pd.DataFrame({"x": [(i * 7) % 13 for i in range(40)], "sales": values}).to_csv(path, index=False)
    with pytest.raises(DataError, match=r"'sales'.*line 19.*'1O7.5'"):
        load_table(path, "sales")


def test_infinite_target_is_refused(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text("x,y\n1,2.5\n2,-inf\n3,4.0\n4,1.5\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"'y', line 3: -inf is not a finite number"):
        load_table(path, "y")
