"""Trials and settings in plain words for the run page (no Qt here; the report may use it too).

Nothing here names a library's internal keys: parameters go through ``core.param_label``.
"""

from __future__ import annotations

import math
from typing import Any, Mapping

from labbench.search.states import WORDS as STATE_WORDS


def num(v: Any, digits: int = 4) -> str:
    """A number as a person writes it: 4 significant digits, no trailing noise."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return f"{v:.{digits}g}"
    return str(v)


def and_list(parts: list[str]) -> str:
    if len(parts) <= 1:
        return "".join(parts)
    return ", ".join(parts[:-1]) + " and " + parts[-1]


def hidden_words(hidden: Any) -> str:
    units = [int(u) for u in (hidden or [])]
    if not units:
        return "no hidden layer (linear)"
    if len(units) == 1:
        return f"1 layer of {units[0]} units"
    if len(set(units)) == 1:
        return f"{len(units)} layers of {units[0]} units each"
    return f"{len(units)} layers of {and_list([str(u) for u in units])} units"


def settings_words(settings: Mapping[str, Any], params: Mapping[str, Any] | None = None) -> str:
    """"2 layers of 48 and 12 units, tanh, adam, learning rate 0.004, batch 128, 41 epochs"."""
    s = dict(settings or {})
    if not s:
        from labbench.gui.core import param_label

        return ", ".join(f"{param_label(k).lower()} {num(v)}" for k, v in (params or {}).items())
    if "hidden" not in s and "learning_rate" not in s or "unit_cost" in s:
        return family_words(s, params)
    parts = []
    if "hidden" in s:
        parts.append(hidden_words(s["hidden"]))
    if "activation" in s:
        parts.append(str(s["activation"]))
    opt = s.get("optimizer")
    if opt is not None:
        parts.append(f"{opt} with momentum {num(s['momentum'])}" if opt == "momentum" and "momentum" in s
                     else str(opt))
    if "learning_rate" in s:
        parts.append(f"learning rate {num(s['learning_rate'], 2)}")
    if "batch_size" in s:
        parts.append(f"batch {num(s['batch_size'])}")
    l2 = s.get("l2")
    if l2:
        parts.append(f"L2 penalty {num(l2, 2)}")
    if "epochs" in s:
        parts.append(f"{num(s['epochs'])} epochs")
    return ", ".join(parts)


#: a map family's settings always named (its shape); the others only when the search varied them
SHAPE_SETTINGS = ()


def family_words(settings: Mapping[str, Any], params: Mapping[str, Any] | None = None) -> str:
    """Another family's settings in words, by their table's labels: its shape ("5 × 9 hexagonal
    grid", "4 groups", "8 units"), then the settings the search varied, then the epochs."""
    from labbench.gui.core import param_label

    s = dict(settings)
    searched = set(params or ())
    parts = []
    if "rows" in s and "cols" in s:
        parts.append(f"{num(s.pop('rows'))} × {num(s.pop('cols'))} {s.pop('topology', '')} grid".replace("  ", " "))
        groups = s.pop("groups", 0)
        if groups or "groups" in searched:
            parts.append(f"{num(groups)} groups" if groups else "no groups")
    if "units" in s:
        parts.append(f"{num(s.pop('units'))} units")
    if "components" in s:
        rule = {"oja": "Oja's rule", "sanger": "Sanger's rule", "hebb": "the plain Hebbian rule"}.get(
            str(s.pop("rule", "")), "")
        parts.append(f"{num(s.pop('components'))} component(s)" + (f" by {rule}" if rule else ""))
    for key, value in s.items():
        if key == "epochs" or (key not in SHAPE_SETTINGS and key not in searched):
            continue
        parts.append(f"{param_label(key).lower()} {num(value, 3) if isinstance(value, float) else num(value)}")
    if "epochs" in s:
        parts.append(f"{num(s['epochs'])} epochs")
    return ", ".join(parts)


def state_word(state: str) -> str:
    return STATE_WORDS.get(state, state)


def why_stopped(state: str, reason: str, epochs_run: int, epochs_total: int) -> str:
    """Why a trial ended, in a few words."""
    if state == "complete":
        if epochs_total and 0 < epochs_run < epochs_total:      # early stopping ended it
            return f"{epochs_run} of {epochs_total} epochs (patience ran out)"
        return f"all {epochs_total or epochs_run} epochs" if (epochs_total or epochs_run) else ""
    if state == "pruned":
        return (f"stopped at epoch {epochs_run} of {epochs_total}, its curve trailing the others"
                if epochs_total else "stopped early, its curve trailing the others")
    if state == "cancelled":
        return "stopped by you" + (f" at epoch {epochs_run}" if epochs_run else "")
    if state == "failed":
        return "failed: " + (reason or "no reason given")
    if state == "running":
        # no epoch count: the entry would change (and the list re-lay itself out) every epoch;
        # the line above the pictures follows the epochs
        return f"training, {epochs_total} epochs planned" if epochs_total else "training"
    return reason


def duration_text(seconds: float | None) -> str:
    if seconds is None:
        return "unknown"
    if seconds < 0.1:
        return "under 0.1 s"
    if seconds < 10:
        return f"{seconds:.1f} s"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    minutes, s = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes} min {s:02d} s"
    hours, m = divmod(minutes, 60)
    return f"{hours} h {m:02d} min"
