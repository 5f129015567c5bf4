"""The report's words: settings, metrics, trial states and counts as a reader knows them.

Stored parameter keys (``units_1``, ``l2_on``) and metric keys (``balanced_accuracy``) never reach
the page: settings are named by the window's settings table
(``labbench.search.settings.SETTINGS[...].label``), metrics by ``labbench.nets.metrics``.
"""

from __future__ import annotations

import math
from typing import Any, Iterable, Mapping

from labbench.numbers import number

# labbench's own words for the trial states (one table: labbench.search.states)
from labbench.search.states import WORDS as STATE_WORDS  # noqa: E402
STATE_ORDER = ("complete", "pruned", "failed", "cancelled", "running", "waiting")
CANCELLED_REASON = "cancelled by the user"      # labbench.search.bookkeeping.CANCELLED


def setting_label(name: str) -> str:
    """``learning_rate`` -> "Learning rate", ``units_2`` -> "Units in layer 2", ``l2_on`` ->
    "L2 penalty used"."""
    from labbench.search.settings import SETTINGS

    if name in SETTINGS:
        return SETTINGS[name].label
    if name.startswith("units_") and name[6:].isdigit():
        return f"Units in layer {name[6:]}"
    if name == "l2_on":
        return f"{SETTINGS['l2'].label} used"
    if name == "hidden":
        return "Hidden layer sizes"
    from labbench.families import family_names, get_family

    for family in family_names():          # another family's setting: its own table's label
        table = get_family(family).settings
        if name in table:
            return table[name].label
    return name.replace("_", " ").capitalize()


def metric_label(metric: str | None) -> str:
    from labbench.nets.metrics import METRICS

    if not metric:
        return "score"
    info = METRICS.get(metric)
    return info.label if info else metric.replace("_", " ")


def better_words(direction: str) -> str:
    return "higher is better" if direction == "maximize" else "lower is better"


def num(value: Any, digits: int = 4) -> str:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return "n/a" if value is None else str(value)
    if isinstance(value, int):
        return str(value)
    return number(value, digits)           # the one number formatting (labbench.numbers)


def value_words(name: str, value: Any) -> str:
    """One setting's value as plain words."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if name == "l2" and value == 0:
        return "off"
    if isinstance(value, float):
        return num(value, 3)
    return str(value)


def settings_in_words(settings: Mapping[str, Any]) -> str:
    """The resolved settings of a trial (hidden list, activation, ...) as one sentence."""
    parts = []
    hidden = settings.get("hidden")
    if isinstance(hidden, (list, tuple)):
        if not hidden:
            parts.append("no hidden layer (a linear model)")
        else:
            layers = "1 hidden layer" if len(hidden) == 1 else f"{len(hidden)} hidden layers"
            sizes = " and ".join([", ".join(str(u) for u in hidden[:-1]), str(hidden[-1])]
                                 if len(hidden) > 1 else [str(hidden[0])])
            parts.append(f"{layers} of {sizes} units")
    if settings.get("activation") and hidden:
        parts.append(f"{settings['activation']} activation")
    optimizer = settings.get("optimizer")
    if optimizer:
        extra = (f" (momentum {value_words('momentum', settings.get('momentum'))})"
                 if optimizer == "momentum" and settings.get("momentum") is not None else "")
        parts.append(f"{optimizer} optimizer{extra}")
    for key, words in (("learning_rate", "learning rate"), ("batch_size", "batch size"),
                       ("l2", "L2 penalty")):
        if settings.get(key) is not None:
            parts.append(f"{words} {value_words(key, settings[key])}")
    epochs, patience = settings.get("epochs"), settings.get("patience")
    if epochs is not None:
        if isinstance(patience, int) and not isinstance(patience, bool) and patience > 0:
            parts.append(f"up to {epochs} epochs, stopping after {patience} without a better "
                         f"validation loss")
        else:
            parts.append(f"{epochs} epochs")
    if settings.get("init") not in (None, "auto"):
        parts.append(f"{settings['init']} initial weights")
    return ", ".join(parts)


def family_settings_in_words(family: str, settings: Mapping[str, Any]) -> str:
    """The resolved settings of a family other than the network, named by its settings table
    (``Family.settings[...].label``; a family labbench does not know: the key in words)."""
    from labbench.errors import SpecError
    from labbench.families import get_family

    try:
        table = get_family(family).settings
    except SpecError:
        table = {}
    parts = []
    for key, value in settings.items():
        label = table[key].label if key in table else key.replace("_", " ").capitalize()
        parts.append(f"{label} {value_words(key, value)}")
    return ", ".join(parts)


def params_in_words(params: Mapping[str, Any]) -> str:
    return "; ".join(f"{setting_label(k)}: {value_words(k, v)}" for k, v in params.items())


def state_of(row) -> str:
    """A trial row's state in the report: failed trials the user stopped count as cancelled."""
    if row.state == "failed" and row.end_reason.startswith(CANCELLED_REASON):
        return "cancelled"
    return row.state


def counts(rows: Iterable[Any]) -> dict[str, int]:
    """Trials per state, every state of ``STATE_ORDER`` present; they add up to the trials given."""
    out = dict.fromkeys(STATE_ORDER, 0)
    for row in rows:
        out[state_of(row)] = out.get(state_of(row), 0) + 1
    return out


def counts_sentence(c: Mapping[str, int]) -> str:
    """"20 trials in this search: 19 finished + 1 stopped early + 0 failed." (they add up)."""
    total = sum(c.values())
    terms = [f"{c.get(k, 0)} {STATE_WORDS[k]}" for k in ("complete", "pruned", "failed")]
    terms += [f"{c[k]} {STATE_WORDS[k]}" for k in ("cancelled", "running", "waiting") if c.get(k)]
    noun = "trial" if total == 1 else "trials"
    return f"{total} {noun} in this search: {' + '.join(terms)}."
