"""The command line's view of a running search: one progress line on stderr.

On a terminal the line is redrawn in place (``\\r``) with trials done / budget, the trial in
flight, the time left and the best so far; elsewhere (a log file, a pipe, CI) one line is written
per finished trial. Notices always get a line of their own.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

from labbench.numbers import duration, number
from labbench.search import events as ev
from labbench.search import states


class ProgressLine:
    """An ``emit`` for ``SearchRunner`` that draws the progress line (see the module text)."""

    BAR = 20

    def __init__(self, stream: TextIO | None = None, *, tty: bool | None = None,
                 quiet: bool = False, min_redraw_s: float = 0.1):
        self.stream = stream or sys.stderr
        self.tty = self.stream.isatty() if tty is None else tty
        self.quiet = quiet
        self.min_redraw_s = min_redraw_s
        self.metric = ""
        self.budget: int | None = None
        self.minutes: float | None = None
        self.done = 0
        self.eta: float | None = None
        self.best: tuple[int, float] | None = None
        self.running: dict[int, tuple[int, int]] = {}   # trial -> (epoch, epochs)
        self._width = 0
        self._last_draw = 0.0

    # ---- output

    def _out(self, text: str) -> None:
        """Write and flush; a closed stream (``labbench run ... 2>&1 | head``) turns the line off
        instead of stopping the search."""
        try:
            self.stream.write(text)
            self.stream.flush()
        except (OSError, ValueError):
            self.quiet = True

    def _write_line(self, text: str) -> None:
        if self.quiet:
            return
        if self.tty and self._width:
            self._out("\r" + " " * self._width + "\r")
            self._width = 0
        self._out(text + "\n")

    def _status(self) -> str:
        if self.budget:
            filled = int(self.BAR * min(1.0, self.done / self.budget))
            head = f"[{'#' * filled}{'-' * (self.BAR - filled)}] {self.done}/{self.budget} trials"
        else:
            head = f"{self.done} trials"
        parts = [head]
        if self.running:
            number_, (epoch, epochs) = max(self.running.items())
            more = f" (+{len(self.running) - 1})" if len(self.running) > 1 else ""
            parts.append(f"trial {number_} epoch {epoch}/{epochs}{more}")
        parts.append(f"left {duration(self.eta)}")
        if self.best is not None:
            parts.append(f"best {self.metric} {number(self.best[1])} (trial {self.best[0]})")
        return " | ".join(parts)

    def _draw(self, force: bool = False) -> None:
        if self.quiet or not self.tty:
            return
        now = time.monotonic()
        if not force and now - self._last_draw < self.min_redraw_s:
            return
        self._last_draw = now
        text = self._status()
        pad = max(0, self._width - len(text))
        self._out("\r" + text + " " * pad)
        self._width = len(text)

    def close(self) -> None:
        """End the redrawn line so later output starts on a fresh line."""
        if self.tty and self._width and not self.quiet:
            self._out("\n")
            self._width = 0

    # ---- events

    def __call__(self, event: ev.Event) -> None:
        if isinstance(event, ev.SearchStarted):
            self.metric, self.budget, self.minutes = event.metric, event.budget_trials, event.budget_minutes
            budget = []
            if event.budget_trials:
                budget.append(f"{event.budget_trials} trials")
            if event.budget_minutes:
                budget.append(f"{event.budget_minutes:g} minutes")
            resumed = f", {event.existing_trials} already stored" if event.existing_trials else ""
            self._write_line(f"search '{event.study_name}' in {event.storage}: {event.direction} "
                             f"{event.metric}, budget {' or '.join(budget)}{resumed}")
        elif isinstance(event, ev.TrialStarted):
            self.running[event.number] = (0, int(event.settings.get("epochs", 0)))
            self._draw()
        elif isinstance(event, ev.EpochScored):
            self.running[event.number] = (event.epoch, event.epochs_total)
            self._draw()
        elif isinstance(event, ev.TrialEnded):
            self.running.pop(event.number, None)
            self.done += 1
            if not self.tty:
                value = f" {self.metric} {number(event.value)}" if event.value is not None else ""
                why = f" ({event.reason})" if event.reason and event.state != "complete" else ""
                self._write_line(f"trial {event.number} {states.word(event.state)}{value} in "
                                 f"{duration(event.duration_s)}, {event.epochs_run} epochs{why}"
                                 f" [{self.done}/{self.budget or '-'}]")
            self._draw(force=True)
        elif isinstance(event, ev.NewBest):
            self.best = (event.number, event.value)
            if not self.tty:
                self._write_line(f"best so far: trial {event.number}, {self.metric} "
                                 f"{number(event.value)} ± {number(event.cv_std)}")
            self._draw(force=True)
        elif isinstance(event, ev.Progress):
            self.done, self.eta = event.done, event.eta_s
            self._draw(force=True)
        elif isinstance(event, ev.Notice):
            self._write_line(f"{event.level}: {event.text}")
            self._draw(force=True)
        elif isinstance(event, ev.SearchEnded):
            self.running.clear()
            self._draw(force=True)
            self.close()
            self._write_line(f"search ended ({event.reason}): "
                             + (states.counts_text(event.counts) or "no trials")
                             + (f"; {event.message}" if event.message else ""))
        elif isinstance(event, ev.FinalStage):
            self.close()
            self._write_line(f"{event.stage}: {event.text}")
