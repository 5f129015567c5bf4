"""The live views fed by event sequences, and the thread bridge under a flood of signals."""

from __future__ import annotations

import threading

import optuna
import pytest
from PySide6.QtCore import Qt

from labbench.gui import core, theme
from labbench.gui.bridge import SearchThread
from labbench.search import events as ev
from labbench.search import insight


def test_fifty_thousand_events_cross_a_real_signal(qtbot):
    """Guards the PySide6 pin: 6.12.0 on CPython 3.11 aborts after a few thousand Signal.emit()
    calls (PLATFORM.md). The events go from the worker thread to the GUI thread, queued."""
    n = 50_000
    got: list[int] = []

    def job(emit, cancel):
        for i in range(n):
            emit(ev.EpochScored(number=0, epoch=i + 1, train_loss=1.0, val_loss=1.0,
                                val_metric=0.5, epochs_total=n))
        return "done"

    thread = SearchThread(job)
    received_on = set()

    def on_event(e):
        got.append(e.epoch)
        received_on.add(threading.get_ident())

    thread.event.connect(on_event)
    results = []
    thread.outcome.connect(results.append)
    thread.start()
    qtbot.waitUntil(lambda: len(got) == n and bool(results), timeout=120_000)
    thread.wait(5000)
    assert got == list(range(1, n + 1)) and results == ["done"]
    assert received_on == {threading.get_ident()}        # delivered on the GUI thread


def test_a_failing_job_becomes_a_message_not_a_crash(qtbot):
    from labbench.errors import SpecError

    def job(emit, cancel):
        raise SpecError("exp.toml: space.epochs: 0 is outside the allowed range 1 to 100000")

    thread = SearchThread(job)
    messages = []
    thread.failed.connect(messages.append)
    thread.start()
    qtbot.waitUntil(lambda: bool(messages), timeout=10_000)
    thread.wait(5000)
    assert messages == ["exp.toml: space.epochs: 0 is outside the allowed range 1 to 100000"]


def _feed(session, events):
    for e in events:
        session._on_event(e)
    session.flush()


def _trial(n, state, value, epochs=4, lr=0.01):
    out = [ev.TrialStarted(n, {"learning_rate": lr, "activation": "relu"},
                           {"hidden": [8], "epochs": epochs, "learning_rate": lr})]
    for e in range(1, epochs + 1):
        out.append(ev.EpochScored(n, e, 1.0 / e, 1.1 / e + 0.05 * n, 0.5, epochs))
    if state != "running":
        out.append(ev.TrialEnded(n, state, value, (value, value) if value else (), 1.0, "", {}, epochs))
    return out


def test_band_lines_climb_and_ranges_follow_the_events(make_window):
    w = make_window()
    s = w.session
    events = [ev.SearchStarted("demo", "sqlite:///x.db", "accuracy", "maximize", 10, None, 0,
                               ("learning_rate", "activation"), ("learning_rate",))]
    events += _trial(0, "complete", 0.80) + [ev.NewBest(0, 0.80, 0.01, (0.8, 0.8), {})]
    events += _trial(1, "pruned", None, epochs=2) + _trial(2, "failed", None, epochs=1)
    events += _trial(3, "complete", 0.70, lr=0.001) + _trial(4, "running", None, epochs=3)
    # one redraw tick paints the learning curves and at most one other picture (the rest follow
    # on the next ticks), so a burst of events never makes one long paint
    for e in events:
        s._on_event(e)
    assert s.view.refresh(s.book, s.book.take_changed(), None, theme.Theme.current()) is True
    drawn = [p for p in w.watch.panels[1:] if p._drawn is not None]
    assert len(drawn) == 1
    s.flush()
    assert all(p._drawn is not None for p in w.watch.panels[1:])
    curves = w.watch.curves
    # only the winner and the trial training now are lines; the rest live in the band
    assert curves.shown == {"best": 0, "running": 4, "selected": None}
    assert curves.lines["best"].opts["pen"].color().name() == theme.state_colour("best").name()
    assert curves.lines["running"].opts["pen"].color().name() == theme.state_colour("running").name()
    assert list(curves.lines["running"].getData()[1]) == pytest.approx([1.1 / e + 0.2 for e in (1, 2, 3)])
    # more epochs of the running trial extend its line
    _feed(s, [ev.EpochScored(4, 4, 0.2, 0.3, 0.6, 4)])
    assert len(curves.lines["running"].getData()[0]) == 4
    # the climb: insight's best so far, a milestone only where the best changed
    climb = w.watch.sheet.climb
    assert list(zip(climb.milestones.data["x"], climb.milestones.data["y"])) == [(0.0, 0.80)]
    xs, ys = climb.climb.getData()
    levels = dict(insight.best_so_far([(0, 0.80), (3, 0.70)], "maximize"))
    assert xs[0] == 0 and xs[-1] == 4              # the staircase reaches the latest trial
    assert all(y == levels[0] for y in ys)
    # one row per searched setting, named as the settings table names them
    rows = w.watch.story.ranges.rows
    assert [r.label for r in rows] == ["Learning rate", "Activation"]
    lr = rows[0]
    # learning rates tried: 0.01 (trials 0-2, 4) and 0.001 (trial 3), on a log track
    assert lr.kind == "log" and sorted(lr.trials) == pytest.approx([0.0, 1.0])
    # the best quarter of two finished trials is the better one (trial 0, 0.01 -> the top end)
    assert lr.good == pytest.approx((1.0, 1.0)) and lr.winner == pytest.approx(1.0)
    # the table says the states in words and keeps every trial
    table = w.watch.table
    assert table.proxy.rowCount() == 5
    table.filter_box.setCurrentText("failed or stopped by you")
    assert table.proxy.rowCount() == 1
    # the notebook: one entry per trial, newest first
    book = w.watch.notebook
    assert [book.list.item(i).data(Qt.ItemDataRole.UserRole + 7) for i in range(book.list.count())] == [4, 3, 2, 1, 0]
    assert "winner so far" in book.items[0].text() and "stopped early" in book.items[1].text()
    # the progress line follows the Progress events
    _feed(s, [ev.Progress(4, 10, 30.0, 45.0)])
    assert w.watch.progress.format() == "4 / 10 trials" and "45 s" in w.watch.time_left.text()
    assert "trial 4" in w.watch.in_flight.text()


def test_importance_waits_for_enough_trials_with_the_cores_message(make_window):
    study = optuna.create_study(direction="maximize")
    dist = {"learning_rate": optuna.distributions.FloatDistribution(1e-4, 1e-1, log=True)}
    for i in range(3):
        study.add_trial(optuna.trial.create_trial(params={"learning_rate": 10 ** -(i + 1)},
                                                  distributions=dist, value=0.5 + 0.1 * i))
    values, message = core.importance(study)
    assert values == {} and message == insight.param_importance(study)["message"]
    w = make_window()
    s = w.session
    events = [ev.SearchStarted("demo", "sqlite:///x.db", "accuracy", "maximize", 10, None, 0,
                               ("learning_rate",), ("learning_rate",))]
    for n in range(3):
        events += _trial(n, "complete", 0.5 + 0.1 * n, lr=10 ** -(n + 1))
    _feed(s, events)
    w.watch.importance.show_result({"learning_rate": 1.0}, message)
    s._drawn = None
    s.flush()
    # below ten finished trials the page says it is too early, in its own words, and draws no share
    note = w.watch.story.ranges.note
    assert note.startswith("Too early to say which settings moved the score: 3 finished trials")
    assert all(r.share is None for r in w.watch.story.ranges.rows)


def test_a_complete_trial_ended_by_patience_says_so_not_all_its_epochs():
    from labbench.gui.words import why_stopped

    assert why_stopped("complete", "", 49, 150) == "49 of 150 epochs (patience ran out)"
    assert why_stopped("complete", "", 150, 150) == "all 150 epochs"
    assert why_stopped("pruned", "", 75, 150).startswith("stopped at epoch 75 of 150")
