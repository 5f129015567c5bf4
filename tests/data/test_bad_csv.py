"""Every malformed file in tests/data/bad_csv gives one clear line (a DataError), never a traceback
from pandas or numpy. Each case lists words the message must contain: the file, the column, row
or line at fault, and a hint of the fix."""

from __future__ import annotations

from pathlib import Path

import pytest

from labbench.data import check_folds, load_table
from labbench.errors import DataError, LabbenchError

BAD = Path(__file__).parent / "bad_csv"

# file -> (load_table keyword arguments, (folds, holdout) for check_folds or None, words)
CASES = {
    "empty.csv": ({}, None, ["empty", "header row"]),
    "blank_lines_only.csv": ({}, None, ["empty"]),
    "header_only.csv": ({}, None, ["header row but no data rows"]),
    "no_target_column.csv": ({}, None, ["no column 'grade'", "sugar, firmness, quality"]),
    "target_all_missing.csv": ({}, None, ["'grade'", "empty in every row"]),
    "one_class.csv": ({}, None, ["'grade'", "one value only", "'premium'"]),
    "rare_class.csv": ({}, (5, 0.2), ["class 'juice'", "fewer than the 5 folds", "hold-out"]),
    "ragged_short_row.csv": ({}, None, ["line 4", "2 values", "header has 3 columns"]),
    "ragged_long_row.csv": ({}, None, ["line 3", "4 values", "';'"]),
    "ragged_unquoted_comma.csv": ({}, None, ["line 4", "4 values", "double quotes"]),
    "infinite_value.csv": ({}, None, ["'firmness'", "line 3", "not a finite number"]),
    "duplicate_names.csv": ({}, None, ["columns 1 and 3", "'sugar'", "rename"]),
    "too_few_rows.csv": ({}, (5, 0.2), ["5 training rows", "too few for 5 folds", "at least 10"]),
    "text_in_numeric_column.csv": ({"kinds": {"weight": "numeric"}}, None, ["'weight'", "line 4", "'heavy'", "categorical"]),
    "no_header_row.csv": ({}, None, ["line 1", "add a header row"]),
    "unnamed_column.csv": ({}, None, ["column 2 has no name"]),
    "only_the_target.csv": ({}, None, ["no feature columns"]),
    "all_features_constant.csv": ({}, None, ["constant"]),
    "regression_target_typo.csv": ({"target": "weight", "task": "regression"}, None, ["'weight'", "line 3", "'17O.2'"]),
    "three_classes_as_binary.csv": ({"task": "binary"}, None, ["needs 2 classes", "3", "multiclass"]),
    "spreadsheet_not_csv.csv": ({}, None, ["not a text CSV", "save it as CSV"]),
}


def test_every_corpus_file_has_a_case():
    assert sorted(p.name for p in BAD.glob("*.csv")) == sorted(CASES)


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_file_gives_one_clear_line(name):
    kwargs, split, words = CASES[name]
    kwargs = {"target": "grade", **kwargs}
    path = BAD / name
    before = path.read_bytes()
    with pytest.raises(DataError) as info:
        table = load_table(path, **kwargs)
        assert split is not None, f"{name} loaded without error"
        check_folds(table, *split)
    message = str(info.value)
    assert isinstance(info.value, LabbenchError)
    assert "\n" not in message and message.strip() == message and len(message) < 300
    assert message.startswith(str(path)), message
    for word in words:
        assert word in message, (word, message)
    assert path.read_bytes() == before   # the user's file is never modified


def test_missing_file_and_folder():
    with pytest.raises(DataError, match="no such file"):
        load_table(BAD / "nope.csv", "grade")
    with pytest.raises(DataError, match="is a folder"):
        load_table(BAD, "grade")


@pytest.mark.parametrize("kwargs, words", [
    ({"ignore": ["tree"]}, ["ignore", "no column 'tree'"]),
    ({"ignore": ["grade"]}, ["is the target"]),
    ({"kinds": {"colour": "numeric"}}, ["kinds", "no column 'colour'"]),
    ({"kinds": {"sugar": "number"}}, ["'numeric' or 'categorical'"]),
    ({"task": "ranking"}, ["task", "regression, binary, multiclass"]),
    ({"missing": "zero"}, ["'impute'", "'drop'"]),
])
def test_bad_arguments_name_the_key(kwargs, words):
    with pytest.raises(DataError) as info:
        load_table(BAD / "too_few_rows.csv", "grade", **kwargs)
    message = str(info.value)
    assert "\n" not in message
    for word in words:
        assert word in message, (word, message)
