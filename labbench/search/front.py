"""The trade-off front of a search without a target: the trials no other trial beats at once.

For the map and group families more units always lower the held-out quantisation error, so no
single number says which map is good. The default metric ("penalised_error") folds the unit
count in with a stated price (``unit_cost``); this module shows the honest alternative beside it:
the finished trials that are NOT DOMINATED on

* ``units`` (fewer is better: the unit or component count),
* the held-out error (fold mean of ``quantisation_error``, or ``reconstruction_error`` for the
  Hebbian features), and
* ``topographic_error`` (SOM only: when every trial on the front's candidates has it),

where a trial dominates another when it is no worse in every one of them and better in at least
one (Pareto's definition). Trials with equal numbers in all of them are all kept, except a later
trial with the very same settings (the same model trained again: the earlier stands for it). The numbers
come from the trial attr ``measures`` (fold means at the kept epoch, written by
``labbench.search.trial_end``); the window and ``labbench show`` both read this module, and the
user picks a trial from it (``labbench run SPEC --pick N`` refits and exports that one).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from labbench.numbers import number
from labbench.search import states

#: the held-out error of a front, in order of preference (prototype families, Hebbian)
ERRORS = ("quantisation_error", "reconstruction_error")
TOPOGRAPHIC = "topographic_error"
LABELS = {"units": "units", "quantisation_error": "quantisation error",
          "reconstruction_error": "reconstruction error", "topographic_error": "topographic error",
          "relative_error": "relative error"}


@dataclass(frozen=True)
class FrontPoint:
    number: int                         # the trial
    units: int
    error_name: str                     # "quantisation_error" | "reconstruction_error"
    error: float                        # its held-out fold mean
    topographic: float | None           # SOM: held-out topographic error (fold mean)
    value: float | None                 # the trial's score (CV mean of the search's metric)
    measures: Mapping[str, Any]         # every fold-mean measure of the trial

    def objectives(self, with_topographic: bool) -> tuple[float, ...]:
        out = (float(self.units), self.error)
        return out + (float(self.topographic),) if with_topographic else out


def _finite(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def candidate(trial: Any) -> FrontPoint | None:
    """The front's view of one trial: a finished trial with ``units`` and a finite held-out
    error in its ``measures``; None otherwise (running, pruned, failed, a network trial)."""
    if states.trial_key(trial) != "complete":
        return None
    m = trial.user_attrs.get("measures") or {}
    name = next((e for e in ERRORS if _finite(m.get(e))), None)
    if name is None or not _finite(m.get("units")):
        return None
    te = m.get(TOPOGRAPHIC)
    return FrontPoint(int(trial.number), int(m["units"]), name, float(m[name]),
                      float(te) if _finite(te) else None,
                      float(trial.value) if _finite(trial.value) else None, dict(m))


def non_dominated(points: np.ndarray) -> np.ndarray:
    """Boolean mask of the rows of ``points`` (n, k; lower is better in every column) that no
    other row dominates (no worse everywhere and better somewhere)."""
    p = np.asarray(points, dtype=np.float64)
    if len(p) == 0:
        return np.zeros(0, dtype=bool)
    no_worse = (p[:, None, :] <= p[None, :, :]).all(axis=2)     # [i, j]: i is no worse than j
    better = (p[:, None, :] < p[None, :, :]).any(axis=2)
    dominated = (no_worse & better).any(axis=0)                  # some i dominates j
    return ~dominated


def trade_off_front(trials: Iterable[Any]) -> list[FrontPoint]:
    """The non-dominated finished trials, fewest units first (then lower error, then number)."""
    trials = list(trials)
    settings = {t.number: t.user_attrs.get("settings") for t in trials}
    cands = [c for c in (candidate(t) for t in trials) if c is not None]
    if not cands:
        return []
    with_te = all(c.topographic is not None for c in cands)
    mask = non_dominated(np.array([c.objectives(with_te) for c in cands]))
    front, seen = [], set()
    for c, keep in sorted(zip(cands, mask), key=lambda x: x[0].number):
        again = (c.objectives(with_te), json.dumps(settings.get(c.number), sort_keys=True, default=str))
        if keep and again not in seen:       # a retrained copy of the same settings: once
            seen.add(again)
            front.append(c)
    return sorted(front, key=lambda c: (c.units, c.error, c.number))


def front_text(trials: Sequence[Any], metric: str = "", pick_hint: str = "") -> str:
    """The trade-off section ``labbench show`` prints for a search without a target ("" when
    no finished trial has measures, e.g. a network search)."""
    front = trade_off_front(trials)
    if not front:
        return ""
    with_te = all(p.topographic is not None for p in front)
    error = front[0].error_name
    units = "components" if error == "reconstruction_error" else "units"     # Hebbian: components
    judged = [units, f"held-out {LABELS[error]}"] + ([LABELS[TOPOGRAPHIC]] if with_te else [])
    extra = [k for k in ("relative_error",) if any(_finite(p.measures.get(k)) for p in front)]
    header = ["trial", units, LABELS[error]] + ([LABELS[TOPOGRAPHIC]] if with_te else []) \
        + [LABELS[k] for k in extra] + ([metric.replace("_", " ")] if metric else [])
    rows = []
    for p in front:
        rows.append([str(p.number), str(p.units), number(p.error)]
                    + ([number(p.topographic)] if with_te else [])
                    + [number(p.measures.get(k)) if _finite(p.measures.get(k)) else "" for k in extra]
                    + ([number(p.value) if p.value is not None else ""] if metric else []))
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
    lines = [f"trade-off: {len(front)} trial(s) that no other finished trial beats on "
             + ", ".join(judged[:-1]) + f" and {judged[-1]} at once "
             f"(held-out fold means; fewer {units} and lower errors are better)"]
    lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)).rstrip())
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows]
    if pick_hint:
        lines.append(pick_hint)
    return "\n".join(lines)


__all__ = ["FrontPoint", "trade_off_front", "non_dominated", "front_text", "candidate"]
