"""The core's one-line messages in the window's words: the spec file's syntax stays out.

``labbench run`` names keys as a spec file has them (``space.learning_rate: low = 1.0 ...``); in
the window the same message names the field the user sees ("Learning rate: from 1.0 ...").
"""

from __future__ import annotations

import re

FIELDS = {
    "evaluation.folds": "Folds", "evaluation.repeats": "Repeats", "evaluation.holdout": "Hold-out share",
    "evaluation.seed": "Seed", "evaluation.seed_spread": "Seeds for the spread check",
    "evaluation.metric": "Score by", "search.trials": "Trials", "search.minutes": "Time limit",
    "search.sampler": "Sampler", "search.pruner": "Early stopping", "search.workers": "Workers",
    "search.storage": "Storage", "search.name": "Search name", "data.target": "Target column",
    "data.task": "Task", "data.kinds": "Kind", "data.ignore": "Use", "data.missing": "Missing values",
    "data.scaling": "Scaling", "data.target_scaling": "Target scaling",
    "data.missing_markers": "Also missing", "data.keep": "Use",
}
_KEY = re.compile(r"\b(data|evaluation|search|space)\.([A-Za-z_0-9]+)\b")
_FILE = re.compile(r"^\S+\.toml: ")


def field_name(section: str, key: str) -> str:
    if section == "space":
        try:
            from labbench.search.space import SETTINGS

            info = SETTINGS.get(key)
            if info is not None:
                return info.label
        except ImportError:
            pass
    return FIELDS.get(f"{section}.{key}", key.replace("_", " "))


def plain(message: str) -> str:
    """``message`` with dotted keys as field names and TOML fragments as words."""
    text = _FILE.sub("", message.strip())
    text = _KEY.sub(lambda m: field_name(m.group(1), m.group(2)), text)
    text = re.sub(r"\blow = ", "the “from” value ", text)
    text = re.sub(r"\bhigh = ", "the “to” value ", text)
    text = re.sub(r"\bhidden_layers = (\d+) \(fixed\)", r"\1 hidden layer(s), fixed", text)
    text = text.replace("hidden_layers", "Hidden layers").replace("hidden_units", "Hidden units")
    text = text.replace("(for a single value write the value itself)", "(for a single value choose “fixed”)")
    text = text.replace("in [data]", "on the Data page").replace("in the spec's [data] section",
                                                                 "on the Data page")
    return text
