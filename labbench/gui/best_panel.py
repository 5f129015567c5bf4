"""The winning settings as text: for the clipboard ("Copy winning settings") and plain labels.

The run page's winner strip is ``bench_sheet.BenchSheet``."""

from __future__ import annotations

import json
from typing import Any, Mapping

SETTING_ORDER = ("hidden", "activation", "optimizer", "learning_rate", "momentum", "l2",
                 "batch_size", "epochs")
SETTING_WORDS = {"hidden": "Hidden layers (units)", "activation": "Activation", "optimizer": "Optimizer",
                 "learning_rate": "Learning rate", "momentum": "Momentum", "l2": "L2 penalty",
                 "batch_size": "Batch size", "epochs": "Epochs"}


def show_value(key: str, value: Any) -> str:
    if key == "hidden":
        return " × ".join(str(u) for u in value) if value else "none (linear)"
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


def settings_text(settings: Mapping[str, Any]) -> str:
    """The winning settings as TOML-like lines (what "Copy settings" puts on the clipboard)."""
    lines = []
    for key in SETTING_ORDER:
        if key in settings:
            lines.append(f"{key} = {json.dumps(settings[key])}")
    for key, value in settings.items():
        if key not in SETTING_ORDER:
            lines.append(f"{key} = {json.dumps(value)}")
    return "\n".join(lines) + "\n"
