"""labbench.search.stored: the one way a stored search is opened for reading.

Reference for what a storage holds: Optuna's public API on the same SQLite file
(``optuna.get_all_study_names``, ``Study.get_trials``).
"""

from __future__ import annotations

import re
from pathlib import Path

import optuna
import pytest

import labbench
from labbench.errors import SpecError
from labbench.search.stored import load_stored, open_for_reading, study_names

optuna.logging.set_verbosity(optuna.logging.WARNING)


def _store(url: str, names=("a",), trials: int = 2) -> None:
    for name in names:
        study = optuna.create_study(study_name=name, storage=url)
        for i in range(trials):
            study.add_trial(optuna.trial.create_trial(value=float(i)))


def test_names_and_trials_read_as_optuna_reads_them(tmp_path):
    url = f"sqlite:///{tmp_path}/s.db"
    _store(url, ("b", "a"), trials=3)
    assert study_names(url) == sorted(optuna.get_all_study_names(storage=url)) == ["a", "b"]
    study = load_stored(url, "b")
    reference = optuna.load_study(study_name="b", storage=url)
    assert [t.value for t in study.get_trials()] == [t.value for t in reference.get_trials()]
    opened, shown = open_for_reading(url, "a", None)
    assert opened.study_name == "a" and shown == url and len(opened.get_trials()) == 3


def test_one_search_needs_no_name_several_do(tmp_path):
    one, two = f"sqlite:///{tmp_path}/one.db", f"sqlite:///{tmp_path}/two.db"
    _store(one, ("only",))
    _store(two, ("x", "y"))
    assert open_for_reading(one, None, None)[0].study_name == "only"
    with pytest.raises(SpecError, match=r"holds 2 searches \(x, y\); choose one with --search"):
        open_for_reading(two, None, None)
    with pytest.raises(SpecError, match=r"no search named 'z' \(stored: x, y\)"):
        open_for_reading(two, "z", None)
    with pytest.raises(SpecError, match="no search named 'z' is stored there yet"):
        load_stored(two, "z")


def test_missing_or_unreadable_storage_is_one_line(tmp_path):
    missing = f"sqlite:///{tmp_path}/nothing.db"
    with pytest.raises(SpecError, match="no search is stored there yet") as caught:
        open_for_reading(missing, None, None)
    assert "\n" not in str(caught.value)
    assert not (tmp_path / "nothing.db").exists()          # reading never creates a database
    with pytest.raises(SpecError, match="is not a database URL"):
        study_names(str(tmp_path / "s.db"))
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"not a database at all" * 100)
    with pytest.raises(SpecError, match=r"storage sqlite:///.*junk\.db") as caught:
        study_names(f"sqlite:///{junk}")
    assert "\n" not in str(caught.value)


def test_reading_an_empty_database_creates_no_tables(tmp_path):
    import sqlite3

    path = tmp_path / "empty.db"
    sqlite3.connect(path).close()                           # an empty database file
    for read in (study_names, lambda url: load_stored(url, "a"),
                 lambda url: open_for_reading(url, None, None)):
        with pytest.raises(SpecError, match="storage sqlite:///"):
            read(f"sqlite:///{path}")
    tables = sqlite3.connect(path).execute("select name from sqlite_master").fetchall()
    assert tables == []


def test_nothing_else_opens_a_storage_for_reading():
    """One source of truth: RDBStorage is built only here, in storage.open_storage (the writing
    side, through optuna_adapter's subclass) and nowhere else in labbench."""
    root = Path(labbench.__file__).parent
    pattern = re.compile(r"RDBStorage\(")
    found = [str(p.relative_to(root)) for p in sorted(root.rglob("*.py"))
             if pattern.search(p.read_text(encoding="utf-8"))]
    assert found == ["search/stored.py"]
