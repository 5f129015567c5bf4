"""The report's pictures, each a PNG made by :mod:`labbench.export.charts` from ``ReportData``."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from labbench.export.charts import FAINT, PALETTE, Series, bar_chart, xy_chart
from labbench.export.report_data import ReportData

MAX_CURVES = 80
BEST, OTHER, PRUNED = PALETTE[1], PALETTE[0], FAINT


def metric_label(data: ReportData, long: bool = False) -> str:
    metric = data.attrs.get("metric") or "score"
    if not long:
        return metric
    arrow = "higher is better" if data.direction == "maximize" else "lower is better"
    return f"{metric} ({arrow})"


def best_number(data: ReportData) -> int | None:
    """The winner of winner.json, else the best trial by ``labbench.search.ranking``."""
    from labbench.search.ranking import best_trial

    if data.winner and data.winner.get("trial_number") is not None:
        return int(data.winner["trial_number"])
    best = best_trial(data.trials, data.direction)
    return None if best is None else best.number


def score_by_trial(data: ReportData) -> bytes | None:
    from labbench.search.insight import best_so_far

    done = [t for t in data.trials if t.value is not None and math.isfinite(t.value)]
    if not done:
        return None
    running = best_so_far([(t.number, t.value) for t in done], data.direction)
    series = [
        Series([t.number for t in done], [t.value for t in done], OTHER, "points", label="complete trial"),
        Series([n for n, _ in running], [v for _, v in running], BEST, "step", label="best so far"),
    ]
    return xy_chart(series, x_label="trial number", y_label=metric_label(data))


def _robust_range(values: np.ndarray) -> tuple[float, float] | None:
    values = values[np.isfinite(values)]
    if values.size == 0:
        return None
    lo, hi = np.percentile(values, [1, 97])
    return float(min(lo, values.min())), float(hi if hi > lo else values.max())


def learning_curves(data: ReportData) -> bytes | None:
    best = best_number(data)
    rows = [t for t in data.trials if t.curve.get("epoch") and t.curve.get("val_loss")]
    if not rows:
        return None
    others = [t for t in rows if t.number != best][-MAX_CURVES:]
    series = []
    for t in sorted(others, key=lambda t: t.state == "complete"):
        color = OTHER if t.state == "complete" else PRUNED
        series.append(Series(t.curve["epoch"], _nan(t.curve["val_loss"]), color, "line", width=1))
    winner = [t for t in rows if t.number == best]
    for t in winner:
        series.append(Series(t.curve["epoch"], _nan(t.curve["val_loss"]), BEST, "line", width=3,
                             label=f"trial {t.number} (winner)"))
    if any(t.state == "complete" for t in others):
        series.insert(0, Series([], [], OTHER, "line", label="other complete trials"))
    if any(t.state != "complete" for t in others):
        series.insert(0, Series([], [], PRUNED, "line", label="pruned / stopped"))
    all_values = np.concatenate([np.asarray(_nan(t.curve["val_loss"]), dtype=float) for t in rows])
    return xy_chart(series, x_label="epoch", y_label="validation loss",
                    y_range=_robust_range(all_values))


def _nan(values) -> list[float]:
    return [float("nan") if v is None else float(v) for v in values]


def importance_chart(importance: dict[str, Any] | None) -> bytes | None:
    values = (importance or {}).get("values") or {}
    if not values:
        return None
    items = sorted(values.items(), key=lambda kv: -kv[1])
    return bar_chart([k for k, _ in items], [v for _, v in items],
                     x_label=f"importance share ({(importance or {}).get('method', '')})")


def searched_names(data: ReportData) -> list[str]:
    names = list(data.attrs.get("searched") or [])
    for t in data.trials:
        names.extend(p for p in t.params if p not in names)
    return names


def setting_chart(data: ReportData, name: str) -> bytes | None:
    """Score of every complete trial against one searched setting (choices spread a little)."""
    done = [t for t in data.trials if t.value is not None and math.isfinite(t.value) and name in t.params]
    if not done:
        return None
    values = [t.params[name] for t in done]
    best = best_number(data)
    categorical = any(isinstance(v, (str, bool)) or v is None for v in values)
    log = name in (data.attrs.get("log_scaled") or [])
    if categorical:
        cats = sorted({str(v) for v in values}, key=str)
        jitter = [((t.number * 37) % 11 - 5) / 30 for t in done]
        xs = [cats.index(str(v)) + j for v, j in zip(values, jitter)]
    else:
        cats, xs = None, [float(v) for v in values]
    ys = [t.value for t in done]
    mark = [i for i, t in enumerate(done) if t.number == best]
    series = [Series(xs, ys, OTHER, "points", label="complete trial")]
    if mark:
        series.append(Series([xs[i] for i in mark], [ys[i] for i in mark], BEST, "hollow", width=4,
                             label="winner"))
    from labbench.search.commands import param_label

    return xy_chart(series, x_label=param_label(name) + (" (log scale)" if log else ""),
                    y_label=metric_label(data),
                    x_log=log and not categorical, x_categories=cats, height=280)
