"""Columns from the real world: stray text in number columns, missing-value markers, thousands
separators and decimal commas, id-like columns, category levels seen in one row only."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from labbench.data import Preprocessor, load_table, make_folds, prepare_folds, screen_columns
from labbench.data.reading import MISSING_MARKERS, read_file
from labbench.errors import DataError


def machines(n=60, seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"speed": rng.normal(1500, 200, n).round(1),
                         "load": rng.uniform(0, 1, n).round(3),
                         "grade": np.where(rng.uniform(size=n) > 0.5, "ok", "worn")})


def test_stray_text_in_a_number_column_is_one_line_with_lines_values_and_fix(tmp_path):
    frame = machines().astype({"speed": object})
    frame.loc[3, "speed"] = "700 rpm"
    frame.loc[10, "speed"] = "12.5.3"
    frame.loc[20, "speed"] = "2,860"        # written quoted by to_csv
    path = tmp_path / "machines.csv"
    frame.to_csv(path, index=False)
    assert '"2,860"' in path.read_text()
    with pytest.raises(DataError) as info:
        load_table(path, "grade")
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path))
    # file lines are data rows + 2 (header on line 1)
    for word in ("'speed'", "3 cell", "line 5", "'700 rpm'", "line 12", "'12.5.3'", "line 22",
                 "'2,860'", "missing_markers", 'thousands = ","', "categorical"):
        assert word in message, (word, message)


def test_a_declared_thousands_separator_reads_quoted_numbers(tmp_path):
    frame = machines()
    text = frame.to_csv(index=False)
    lines = text.splitlines()
    lines[5] = '"2,860.5",' + lines[5].split(",", 1)[1]
    path = tmp_path / "m.csv"
    path.write_text("\n".join(lines) + "\n")
    table = load_table(path, "grade", thousands=",")
    assert table.kinds["speed"] == "numeric" and table.frame["speed"].iloc[4] == 2860.5


def test_decimal_comma_with_point_thousands_in_a_semicolon_file(tmp_path):
    text = "price;size;grade\n1.234,5;3;a\n2,25;4;b\n10,0;5;a\n7,5;6;b\n"
    path = tmp_path / "p.csv"
    path.write_text(text)
    frame = read_file(path, decimal=",", thousands=".").frame
    # reference: pandas told the same format
    expected = pd.read_csv(io.StringIO(text), sep=";", decimal=",", thousands=".")
    pd.testing.assert_frame_equal(frame, expected)
    assert frame["price"].tolist() == [1234.5, 2.25, 10.0, 7.5]


def test_decimal_comma_in_a_comma_file_is_named_in_the_error(tmp_path):
    frame = machines().astype({"load": object})
    frame.loc[7, "load"] = "0,5"
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    with pytest.raises(DataError, match='decimal = ","'):
        load_table(path, "grade")


def test_bad_number_format_options_are_refused(tmp_path):
    path = tmp_path / "m.csv"
    machines().to_csv(path, index=False)
    with pytest.raises(DataError, match="must differ"):
        load_table(path, "grade", thousands=",", decimal=",")
    with pytest.raises(DataError, match="decimal"):
        load_table(path, "grade", decimal=";")


@pytest.mark.parametrize("marker", ["", "NA", "N/A", "n/a", "NaN", "null", "None", "?", "-", "--"])
def test_usual_missing_markers_are_missing(tmp_path, marker):
    assert marker in MISSING_MARKERS
    frame = machines().astype({"speed": object})
    frame.loc[[2, 9], "speed"] = marker
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, "grade")
    assert table.kinds["speed"] == "numeric"
    assert table.frame["speed"].isna().sum() == 2


def test_declared_missing_markers(tmp_path):
    frame = machines().astype({"speed": object})
    frame.loc[[2, 9], "speed"] = "not measured"
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    with pytest.raises(DataError, match=r'missing_markers = \["not measured"\]'):
        load_table(path, "grade")
    table = load_table(path, "grade", missing_markers=["not measured"])
    assert table.kinds["speed"] == "numeric" and table.frame["speed"].isna().sum() == 2


def test_a_text_column_with_some_numbers_stays_categorical(tmp_path):
    frame = machines()
    frame["site"] = ["north", "south", "12", "east"] * 15      # 25 % numbers: a label column
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    assert load_table(path, "grade").kinds["site"] == "categorical"


# ----------------------------------------------------------------------------- id-like columns

def test_id_like_columns_are_left_out_with_a_notice(tmp_path):
    frame = machines()
    n = len(frame)
    frame.insert(0, "serial", [f"SN-{i:05d}-{(i * 7919) % 1000}" for i in range(n)])
    frame.insert(1, "row", np.arange(1, n + 1))
    frame.insert(2, "customer_id", np.random.default_rng(4).choice(10**6, n, replace=False))
    frame.insert(3, "counter0", np.arange(n))
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, "grade")
    assert table.features == ("speed", "load")
    for col in ("serial", "row", "customer_id", "counter0"):
        assert any(f"'{col}'" in w and "left it out" in w and "keep" in w for w in table.warnings), col
    # forcing them in: keep = [...] or a kind given in kinds
    table = load_table(path, "grade", keep=["row", "serial"], kinds={"counter0": "numeric"})
    assert table.features == ("serial", "row", "counter0", "speed", "load")


def test_measurements_with_all_values_different_are_kept(tmp_path):
    rng = np.random.default_rng(5)
    n = 80
    frame = pd.DataFrame({"mass": rng.normal(70, 10, n).round(4),           # float measurement
                          "income": rng.choice(10**6, n, replace=False),     # whole numbers
                          "year": np.arange(1940, 1940 + n),                 # counts up, not 1..n
                          "y": rng.normal(size=n)})
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, "y")
    assert table.features == ("mass", "income", "year")
    assert not any("left it out" in w for w in table.warnings)


def test_screen_columns_is_the_shared_rule():
    frame = pd.DataFrame({"id": [f"r{i}" for i in range(30)], "same": [1] * 30,
                          "x": np.arange(30) % 4})
    kept, notices = screen_columns(frame, ["id", "same", "x"], "f.csv")
    assert kept == ["x"] and len(notices) == 2
    assert "'id'" in notices[0] and "'same'" in notices[1]
    kept, _ = screen_columns(frame, ["id", "same", "x"], "f.csv", forced=["id"])
    assert kept == ["id", "x"]


def test_keep_names_an_unknown_column(tmp_path):
    path = tmp_path / "m.csv"
    machines().to_csv(path, index=False)
    with pytest.raises(DataError, match="keep: no column 'nope'"):
        load_table(path, "grade", keep=["nope"])


# ----------------------------------------------------------------------------- category levels

def test_category_seen_only_in_validation_rows_encodes_as_zeros():
    train = pd.DataFrame({"c": ["a", "b", "a"]})
    val = pd.DataFrame({"c": ["b", "z"]})
    pre = Preprocessor([], ["c"]).fit(train)
    np.testing.assert_array_equal(pre.transform(val), [[0, 1], [0, 0]])
    # the same with the level layout fixed in advance: 'z' has a column but was not seen
    pre = Preprocessor([], ["c"], levels={"c": ["a", "b", "z"]}).fit(train)
    assert pre.feature_names_ == ["c=a", "c=b", "c=z"]
    np.testing.assert_array_equal(pre.transform(val), [[0, 1, 0], [0, 0, 0]])
    again = Preprocessor.from_state(pre.to_state())
    np.testing.assert_array_equal(again.transform(val), [[0, 1, 0], [0, 0, 0]])


def test_a_level_in_a_single_row_gives_every_fold_the_same_width(tmp_path):
    frame = machines(90)
    frame["colour"] = np.array(["red", "green", "blue"])[np.arange(90) % 3]
    frame.loc[7, "colour"] = "violet"
    path = tmp_path / "m.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, "grade")
    rows = np.arange(table.n_rows)
    folds = make_folds(table.y, 3, seed=0, stratify=True)
    arrays = prepare_folds(table, rows, folds)
    widths = {x.shape[1] for x in arrays.X_train + arrays.X_val}
    assert widths == {2 + 4}
    for pre, x_val, va in zip(arrays.preprocessors, arrays.X_val, arrays.val_rows):
        if 7 in va:             # violet was never seen in this fold's training rows: all zeros
            row = int(np.flatnonzero(va == 7)[0])
            np.testing.assert_array_equal(x_val[row, 2:], 0.0)
