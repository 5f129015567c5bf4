"""Pieces of the search page: the tooltips, the inline message line, one undoable edit, the key a
core message names, the families' labels."""

from __future__ import annotations

import re

from PySide6.QtGui import QUndoCommand
from PySide6.QtWidgets import QLabel, QSizePolicy

from labbench.errors import LabbenchError
from labbench.families import get_family

KEY = re.compile(r"(?:^|: )(data|evaluation|search|space)\.([A-Za-z_0-9]+)")

# one sentence each (the tooltips of the evaluation and search settings)
TIPS = {
    "folds": "Each trial trains this many models, each scored on the rows the others trained on.",
    "repeats": "Run the whole fold split this many times with different shuffles and average them.",
    "holdout": "Share of rows locked away before the search and used once, to check the winner.",
    "seed": "Fixes the hold-out split, the folds and the sampler so a search can be repeated.",
    "seed_spread": "Retrain the winner with this many seeds to show how much its score moves, and for maps "
                   "and groups whether the seeds give the same groups (0 skips it).",
    "trials": "Stop after this many trials have been added by this run.",
    "minutes": "Stop starting new trials after this many minutes.",
    "sampler": "How the next trial's settings are picked: tpe learns from earlier trials, random does not.",
    "pruner": "Stops trials early whose validation loss lags behind earlier trials at the same epoch.",
    "workers": "Trials trained at the same time in separate processes (one per core is plenty).",
    "storage": "Database the trials are kept in; empty means a SQLite file next to the spec file.",
    "name": "Name of the search inside the storage; empty means the spec file's name.",
}


FAMILY_TIP = ("The kind of model each trial trains: the network predicts the target; the map and group "
              "families (self-organising map, competitive learning, neural gas, Hebbian features) learn "
              "without a target and find groups or features in the rows.")


def error_label() -> QLabel:
    """An inline message line whose space is always kept: a message appearing moves nothing."""
    err = QLabel("")
    err.setObjectName("errorText")
    err.setWordWrap(False)
    err.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
    err.setFixedHeight(err.fontMetrics().lineSpacing() + 2)
    return err


class SpaceEdit(QUndoCommand):
    """One change of one network setting; consecutive edits of the same setting merge."""

    def __init__(self, page, name: str, before, after):   # page: the SpacePage
        super().__init__(f"change {page.rows[name].info.label.lower()}")
        self.page, self.name, self.before, self.after = page, name, before, after
        self.first = True

    def id(self) -> int:
        return 7301

    def mergeWith(self, other) -> bool:
        if not isinstance(other, SpaceEdit) or other.name != self.name:
            return False
        self.after = other.after
        return True

    def redo(self) -> None:
        if self.first:          # the editor already shows it
            self.first = False
            return
        self.page._put(self.name, self.after)

    def undo(self) -> None:
        self.page._put(self.name, self.before)


def family_label(name: str) -> str:
    try:
        return get_family(name).label or name
    except LabbenchError:
        return name


def key_of(message: str) -> tuple[str, str] | None:
    """("space", "learning_rate") from a SpecError text naming the dotted key."""
    m = KEY.search(message)
    return (m.group(1), m.group(2)) if m else None
