"""The cost estimate shown before Start: trials × folds × epochs → minutes on this machine.

``labbench.search.estimate`` does the work (a short calibration of the stacked engine on the
table's shape); here it runs on its own thread, a little after the last change, and its words go
to the search page, the Start action's tooltip and the status bar.
"""

from __future__ import annotations

from PySide6.QtCore import QObject, QTimer
from PySide6.QtWidgets import QLabel

from labbench.gui.bridge import Background

DELAY_MS = 400
HOW = ("How: one short calibration run of the training engine on this table's shape (all folds "
       "together, the middle of the searched layer and batch sizes), scaled to the training rows "
       "and multiplied by trials × repeats × epochs. “At most” counts every epoch of every trial; "
       "“about” assumes early stopping halves that.")


def input_width(frame, features, kinds) -> int:
    """Inputs after one-hot encoding: one per numeric column, one per category otherwise."""
    width = 0
    for col in features:
        width += 1 if kinds.get(col) == "numeric" else max(1, int(frame[col].nunique(dropna=True)))
    return width


class CostEstimate(QObject):
    def __init__(self, window):
        super().__init__(window)
        self.window = window
        self.text = ""
        self.last = None
        self.worker = Background(self)
        self.worker.done.connect(self._done)
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(DELAY_MS)
        self.timer.timeout.connect(self._run)
        self.label = QLabel("")
        self.label.setObjectName("costLabel")
        self.label.setToolTip(HOW)
        window.statusBar().addPermanentWidget(self.label)
        window.data.changed.connect(self.schedule)
        window.space.changed.connect(self.schedule)
        window.space.estimate.setToolTip(HOW)

    def schedule(self, *_a) -> None:
        self.timer.start()

    def _run(self) -> None:
        w = self.window
        data = w.data
        if data.frame is None or w.space.check_space():
            return
        from labbench.search.estimate import calibrate, estimate, shape_from

        target, family = data.target(), w.space.family_name()
        if (target is None) != (family != "network"):
            return                      # the data and the family do not go together (yet)
        task = data.effective_task() or "regression"
        frame = data.frame
        kinds = {name: kind.currentText() for name, kind, _use in data._row_widgets()}
        features = [n for n, _k, use in data._row_widgets()
                    if n not in (target, data.label()) and use.isChecked()]
        more = {} if family == "network" else {"family": family}      # another family's own stack
        sp = w.space
        space = sp.space_dict()
        trials = sp.trials.value() if sp.trials_on.isChecked() else None
        folds, repeats, holdout, workers = (sp.folds.value(), sp.repeats.value(), sp.holdout.value(),
                                            sp.workers.value())

        def work():
            rows = int(frame[target].notna().sum()) if target is not None else len(frame)
            outputs = int(frame[target].nunique(dropna=True)) if task == "multiclass" else 1
            shape = shape_from(space, rows=rows, inputs=input_width(frame, features, kinds),
                               outputs=outputs, task=task, folds=folds, repeats=repeats,
                               holdout=holdout, trials=trials, workers=workers, **more)
            return estimate(shape, calibrate(shape))

        if not self.worker.submit("estimate", work):
            self.timer.start()

    def _done(self, _key, result, error) -> None:
        if error is not None or result is None:
            return
        self.last = result
        self.text = result.words()
        w = self.window
        w.space.estimate.setText(self.text[0].upper() + self.text[1:])
        self.label.setText(f"Expected time: {self.text.split(' for ')[0]}")
        tip = "Start the search (or continue the one stored for this experiment)"
        w.act_start.setToolTip(f"{tip}; expected time {self.text}")
        w.act_start.setStatusTip(f"{tip}; expected time {self.text}")

    def close(self) -> None:
        self.worker.close()
