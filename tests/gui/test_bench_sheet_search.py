"""The bench sheet during a real search: closing the window mid-search."""

from __future__ import annotations

import time

import optuna
import pytest

from tests.gui.conftest import small_search

pytestmark = pytest.mark.slow
LONG = 180_000     # ms; generous, the machine is shared


def test_closing_during_a_search_is_gone_within_two_seconds(make_window, dialogs, orchard_csv, tmp_path, qtbot):
    w = make_window()
    w.open_path(str(orchard_csv))
    small_search(w, epochs=400, trials=30, folds=3, spec_path=tmp_path / "gone.toml")
    assert w.start()
    qtbot.waitUntil(lambda: any(len(r.epochs) > 2 for r in w.session.book.records.values()), timeout=LONG)
    t0 = time.monotonic()
    w.close()                                   # the question is answered "Yes" by the recorder
    qtbot.waitUntil(lambda: not w.isVisible(), timeout=10_000)
    gone = time.monotonic() - t0
    assert gone <= 2.0, f"the window took {gone:.2f} s to disappear"
    # the search winds down behind it: nothing left training, the window then closes for good
    qtbot.waitUntil(lambda: not w.session.running, timeout=LONG)
    study = optuna.load_study(study_name="gone", storage=f"sqlite:///{tmp_path / 'gone.db'}")
    states = [t.state.name for t in study.get_trials()]
    assert states and "RUNNING" not in states
