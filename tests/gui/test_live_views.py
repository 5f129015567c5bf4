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


def test_curves_are_styled_by_role_and_made_once(make_window):
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
    assert len(drawn) == 1 and len(w.watch.curves.curves) == 5
    s.flush()
    assert all(p._drawn is not None for p in w.watch.panels[1:])
    curves = w.watch.curves.curves
    assert sorted(curves) == [0, 1, 2, 3, 4]
    first = curves[0]

    def pen(n):
        return curves[n].opts["pen"]

    assert pen(0).color().name() == theme.state_colour("best").name()
    assert pen(4).color().name() == theme.state_colour("running").name()
    assert pen(1).style() == Qt.PenStyle.DashLine and pen(2).style() == Qt.PenStyle.DotLine
    assert pen(3).style() == Qt.PenStyle.SolidLine and pen(3).widthF() < pen(0).widthF()
    assert curves[4].zValue() > curves[0].zValue() > curves[3].zValue()
    # more epochs of the running trial update the same curve
    _feed(s, [ev.EpochScored(4, 4, 0.2, 0.3, 0.6, 4)])
    assert w.watch.curves.curves[0] is first and len(curves[4].getData()[0]) == 4
    # the score plot: finished trials only, the best-so-far line is insight's
    assert len(w.watch.scores.dots.data) == 2
    xs, ys = w.watch.scores.best_line.getData()
    assert list(zip(xs, ys)) == [(float(n), b) for n, b in
                                 insight.best_so_far([(0, 0.80), (3, 0.70)], "maximize")]
    # one picture per searched setting; the log-scaled one is drawn at log10 of the value
    plots = w.watch.settings_plot.plots
    assert list(plots) == ["learning_rate", "activation"]
    lr_x = sorted(plots["learning_rate"][1].data["x"])
    assert lr_x == pytest.approx([-3.0, -2.0])
    assert list(plots["activation"][1].data["x"]) == [0.0, 0.0]
    # the table says the states in words and keeps every trial
    table = w.watch.table
    assert table.proxy.rowCount() == 5
    table.filter_box.setCurrentText("failed or cancelled")
    assert table.proxy.rowCount() == 1
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
    w.watch.importance.show_result(values, message)
    w.session._drawn = None
    w.session.flush()
    shown = w.watch.importance.message
    assert shown.isVisible() and shown.toPlainText().replace("\n", " ") == message
