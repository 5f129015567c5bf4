"""The report's pictures, drawn with matplotlib (object API, SVG, real text; see report_style).

Five pictures, each a function of ``ReportData`` returning an inline ``<svg>`` string or None
when there is nothing to draw:

- ``climb``: how far the best score climbed, trial by trial, its milestones named, and a strip of
  the trials that stopped early or failed under it;
- ``good_ranges``: for every searched setting its whole range as a bar, every tried value as a
  tick, where the best quarter of the trials sit as a green span, and the winner's value;
- ``learning_band``: the 10-90 % band and median of every trial's validation loss by epoch, and the
  winner's own curve;
- ``fold_bars``: the winner's score on each fold, bars from zero;
- ``seed_spread``: the winner retrained with several seeds, one dot per seed.

Scores far from the better half of the trials (a diverged network ends near the float limit)
would flatten a picture: the axis covers the better half generously, and points beyond it are
drawn at its edge as triangles.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from labbench.export.report_data import ReportData
from labbench.export.report_style import PALETTE as C, axes, drawn_in_style, legend_below, new_figure, svg_text
from labbench.export.report_words import metric_label, num, setting_label, state_of, value_words

MILESTONE_LABELS = 6


def _finite(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def best_number(data: ReportData) -> int | None:
    if data.winner and data.winner.get("trial_number") is not None:
        return int(data.winner["trial_number"])
    from labbench.search.ranking import best_trial      # the one rule for "the best trial"

    best = best_trial(data.trials, data.direction)
    return None if best is None else best.number


def view_range(values: Sequence[float], direction: str) -> tuple[float, float] | None:
    """An axis range that shows the better half of ``values`` with room for the rest, unless the
    rest lies far out (diverged trials): then those are left for the edge."""
    v = np.asarray([x for x in values if _finite(x)], dtype=float)
    if v.size == 0:
        return None
    ordered = np.sort(v) if direction == "minimize" else np.sort(v)[::-1]
    good = ordered[: max(1, (len(ordered) + 1) // 2)]
    best, edge = float(good[0]), float(good[-1])
    scale = max(abs(best - edge), 0.05 * abs(best), 1e-9)
    if direction == "minimize":
        lo, hi = float(ordered[0]), min(float(ordered[-1]), edge + 6 * scale)
    else:
        lo, hi = max(float(ordered[-1]), edge - 6 * scale), float(ordered[0])
    pad = max(hi - lo, scale) * 0.06
    return lo - pad, hi + pad


def _clip_points(xs, ys, lim):
    """(inside xs, ys), (below xs, ys), (above xs, ys) for the axis limits ``lim``."""
    xs, ys = np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)
    lo, hi = lim
    inside = (ys >= lo) & (ys <= hi)
    return (xs[inside], ys[inside]), (xs[ys < lo], np.full((ys < lo).sum(), lo)), \
        (xs[ys > hi], np.full((ys > hi).sum(), hi))


# -- the climb ----------------------------------------------------------------------------------

@drawn_in_style
def climb(data: ReportData) -> str | None:
    from labbench.search.insight import best_so_far

    done = [t for t in data.trials if t.state == "complete" and _finite(t.value)]
    if not done:
        return None
    metric = metric_label(data.attrs.get("metric"))
    steps = best_so_far([(t.number, t.value) for t in done], data.direction)
    lim = view_range([t.value for t in done], data.direction)
    lo, hi = lim
    fig = new_figure(3.1)
    ax = axes(fig)
    ax.grid(True, axis="y")
    inside, below, above = _clip_points([t.number for t in done], [t.value for t in done], lim)
    ax.scatter(*inside, s=14, color=C["complete"], alpha=0.55, linewidths=0, label="a finished trial",
               zorder=2)
    for (xs, ys), marker in ((below, "v"), (above, "^")):
        if len(xs):
            ax.scatter(xs, ys, s=26, marker=marker, color=C["complete"], alpha=0.8, linewidths=0,
                       clip_on=False, zorder=2, label="beyond the axis (drawn at its edge)")
    last = max(t.number for t in data.trials)
    sx = [n for n, _ in steps] + [last]
    sy = [float(np.clip(v, lo, hi)) for _, v in steps] + [float(np.clip(steps[-1][1], lo, hi))]
    ax.step(sx, sy, where="post", color=C["climb"], linewidth=2, label="best so far", zorder=3)
    improved = [(n, v) for i, (n, v) in enumerate(steps) if i == 0 or v != steps[i - 1][1]]
    ax.scatter([n for n, _ in improved], [float(np.clip(v, lo, hi)) for _, v in improved], s=30,
               color=C["milestone"], zorder=4, label="a new best")
    for n, v in _milestones_to_name(improved, steps, last):
        if lo <= v <= hi:
            ax.annotate(f"#{n}: {num(v, 3)}", (n, v), xytext=(-4, 6), textcoords="offset points",
                        ha="right", fontsize=8, color=C["milestone"])
    stopped = [t for t in data.trials if state_of(t) != "complete" or not _finite(t.value)]
    for state in ("pruned", "failed", "cancelled", "running", "waiting"):
        xs = [t.number for t in stopped if state_of(t) == state]
        if xs:
            ax.scatter(xs, [0.02] * len(xs), marker="|", s=60, color=C.get(state, C["failed"]),
                       transform=ax.get_xaxis_transform(), clip_on=False, zorder=3,
                       label={"pruned": "stopped early", "failed": "failed", "cancelled": "stopped by you",
                              "running": "still training", "waiting": "queued"}[state])
    ax.set_ylim(lo, hi)
    ax.set_xlim(-0.5, last + 0.5)
    ax.set_xlabel("trial number (in the order they started)")
    ax.set_ylabel(f"{metric}, cross-validated")
    _integer_ticks(ax.xaxis)
    legend_below(fig, ax)
    return svg_text(fig, "climb", f"How the best cross-validated {metric} climbed over the trials")


def _milestones_to_name(improved, steps, last):
    """The last milestone, then the biggest gains, at most MILESTONE_LABELS, none closer than a
    tenth of the axis to another (so the names do not overlap)."""
    gain = {n: abs(v - _previous(steps, n)) for n, v in improved[1:]}
    order = [improved[-1]] + sorted(improved[:-1], key=lambda p: -gain.get(p[0], 0.0))
    chosen: list[tuple[int, float]] = []
    for n, v in order:
        if len(chosen) < MILESTONE_LABELS and all(abs(n - m) > 0.1 * max(last, 1) for m, _ in chosen):
            chosen.append((n, v))
    return chosen


def _previous(steps, number):
    before = [v for n, v in steps if n < number]
    return before[-1] if before else next(v for n, v in steps if n == number)


def _integer_ticks(axis):
    from matplotlib.ticker import MaxNLocator

    axis.set_major_locator(MaxNLocator(integer=True, nbins=10))


# -- where good scores live ---------------------------------------------------------------------

def searched_names(data: ReportData) -> list[str]:
    names = list(data.attrs.get("searched") or [])
    for t in data.trials:
        names.extend(p for p in t.params if p not in names)
    return names


def _space_entry(data: ReportData, name: str) -> Any:
    space = data.spec.get("space") or {}
    if name.startswith("units_"):
        return space.get("hidden_units")
    if name == "l2_on":
        return {"choices": [False, True]}
    return space.get(name)


def _row(data, name, done, top, best):
    """What one setting's row shows: kind, positions 0..1 of every value, labels."""
    values = [t.params[name] for t in done]
    entry = _space_entry(data, name)
    choices = entry.get("choices") if isinstance(entry, dict) else None
    if choices is not None or any(isinstance(v, (str, bool)) for v in values):
        raw = list(choices or sorted({v for v in values}, key=str))
        raw += [v for v in dict.fromkeys(values) if str(v) not in {str(c) for c in raw}]
        cats = [str(c) for c in raw]
        return {"kind": "choice", "cats": cats, "words": [value_words(name, c) for c in raw],
                "pos": lambda v: (cats.index(str(v)) + 0.5) / len(cats)}
    log = name in (data.attrs.get("log_scaled") or []) or (name.startswith("units_") and
                                                            "hidden_units" in (data.attrs.get("log_scaled") or []))
    nums = [float(v) for v in values]
    lo = float(entry["low"]) if isinstance(entry, dict) and "low" in entry else min(nums)
    hi = float(entry["high"]) if isinstance(entry, dict) and "high" in entry else max(nums)
    lo, hi = min([lo] + nums), max([hi] + nums)
    log = log and lo > 0
    f = math.log10 if log else float
    span = (f(hi) - f(lo)) or 1.0
    return {"kind": "range", "low": lo, "high": hi, "log": log,
            "pos": lambda v: (f(float(v)) - f(lo)) / span}


@drawn_in_style
def good_ranges(data: ReportData) -> str | None:
    done = [t for t in data.trials if t.state == "complete" and _finite(t.value)]
    names = [n for n in searched_names(data) if any(n in t.params for t in done)]
    if not done or not names:
        return None
    ranked = sorted(done, key=lambda t: t.value, reverse=data.direction == "maximize")
    top = ranked[: max(1, math.ceil(len(ranked) / 4))]
    best = best_number(data)
    fig = new_figure(0.62 * len(names) + 0.95)
    ax = axes(fig)
    ax.set_xlim(-0.02, 1.02)
    ax.set_ylim(len(names) - 0.45, -0.75)
    ax.set_yticks(range(len(names)), [setting_label(n) for n in names])
    ax.set_xticks([])
    for side in ("left", "bottom"):
        ax.spines[side].set_visible(False)
    ax.tick_params(axis="y", length=0)
    labelled = set()

    def once(label):
        if label in labelled:
            return None
        labelled.add(label)
        return label

    for y, name in enumerate(names):
        have = [t for t in done if name in t.params]
        row = _row(data, name, have, top, best)
        pos = row["pos"]
        if row["kind"] == "choice":
            n = len(row["cats"])
            for i, cat in enumerate(row["cats"]):
                share = sum(1 for t in top if name in t.params and str(t.params[name]) == cat)
                share /= max(1, sum(1 for t in top if name in t.params))
                ax.plot([i / n + 0.01, (i + 1) / n - 0.01], [y, y], color=C["range"], linewidth=7,
                        solid_capstyle="butt", zorder=1, label=once("the setting's range"))
                if share:
                    ax.plot([i / n + 0.01, (i + 1) / n - 0.01], [y, y], color=C["good_span"],
                            alpha=0.25 + 0.75 * share, linewidth=7, solid_capstyle="butt", zorder=2,
                            label=once("where the best quarter of the trials sit"))
                ax.text((i + 0.5) / n, y + 0.3, row["words"][i], ha="center", va="center", fontsize=8,
                        color=C["muted"])
        else:
            ax.plot([0, 1], [y, y], color=C["range"], linewidth=7, solid_capstyle="butt", zorder=1,
                    label=once("the setting's range"))
            good = [pos(t.params[name]) for t in top if name in t.params]
            if good:
                a, b = min(good), max(good)
                if b - a < 0.012:
                    a, b = a - 0.006, b + 0.006
                ax.plot([a, b], [y, y], color=C["good_span"], linewidth=7, solid_capstyle="butt",
                        zorder=2, label=once("where the best quarter of the trials sit"))
            scale = " (log scale)" if row["log"] else ""
            ax.text(0, y + 0.3, value_words(name, _plain(row["low"])), ha="left", va="center",
                    fontsize=8, color=C["muted"])
            ax.text(1, y + 0.3, value_words(name, _plain(row["high"])) + scale, ha="right",
                    va="center", fontsize=8, color=C["muted"])
        xs = [pos(t.params[name]) for t in have]
        jitter = [((t.number * 37) % 9 - 4) * 0.0025 for t in have] if row["kind"] == "choice" else 0
        ax.scatter(np.asarray(xs) + jitter, [y] * len(xs), marker="|", s=90, color=C["ink"], alpha=0.45,
                   linewidths=1, zorder=3, label=once("a tried value"))
        win = [t for t in have if t.number == best]
        if win:
            ax.scatter([pos(win[0].params[name])], [y - 0.02], marker="D", s=34, color=C["best"],
                       edgecolors=C["paper"], linewidths=0.8, zorder=4, label=once("the winner"))
    legend_below(fig, ax)
    return svg_text(fig, "ranges", "Where the best quarter of the trials sit in each setting's range")


def _plain(value: float) -> float | int:
    return int(value) if float(value).is_integer() and abs(value) >= 1 else value


# -- learning curves ----------------------------------------------------------------------------

@drawn_in_style
def learning_band(data: ReportData) -> str | None:
    rows = [t for t in data.trials if t.curve.get("epoch") and t.curve.get("val_loss")]
    curves = []
    for t in rows:
        e = np.asarray(t.curve["epoch"], dtype=float)
        v = np.asarray([np.nan if x is None else float(x) for x in t.curve["val_loss"]], dtype=float)
        n = min(len(e), len(v))
        keep = np.isfinite(v[:n])
        if keep.any():
            curves.append((t, e[:n][keep], v[:n][keep]))
    if not curves:
        return None
    best = best_number(data)
    lim = view_range(np.concatenate([v for _, _, v in curves]), "minimize")
    lo, hi = lim
    fig = new_figure(2.9)
    ax = axes(fig)
    ax.grid(True, axis="y")
    by_epoch: dict[float, list[float]] = {}
    for _, e, v in curves:
        for x, y in zip(e, v):
            by_epoch.setdefault(float(x), []).append(float(y))
    epochs = sorted(x for x, ys in by_epoch.items() if len(ys) >= 3)
    if len(epochs) >= 2:
        q = np.array([np.percentile(by_epoch[x], [10, 50, 90]) for x in epochs])
        q = np.clip(q, lo, hi)
        ax.fill_between(epochs, q[:, 0], q[:, 2], color=C["band"], alpha=0.35, linewidth=0,
                        label="10-90 % of the trials")
        ax.plot(epochs, q[:, 1], color=C["band_mid"], linewidth=1.2, label="median trial")
    else:
        for t, e, v in curves:
            if t.number != best:
                ax.plot(e, np.clip(v, lo, hi), color=C["band_mid"], linewidth=1, alpha=0.7,
                        label="other trials")
    for t, e, v in curves:
        if t.number == best:
            ax.plot(e, np.clip(v, lo, hi), color=C["best"], linewidth=2.4, label=f"the winner (trial {t.number})")
    ax.set_ylim(lo, hi)
    ax.set_xlabel("epoch")
    ax.set_ylabel("validation loss (mean of the folds)")
    _integer_ticks(ax.xaxis)
    legend_below(fig, ax)
    return svg_text(fig, "curves", "Validation loss by epoch: the band of all trials and the winner's line")


# -- the winner's folds and seeds ---------------------------------------------------------------

@drawn_in_style
def fold_bars(data: ReportData) -> str | None:
    w = data.winner or {}
    scores = [float(s) for s in w.get("fold_scores") or [] if _finite(s)]
    if not scores:
        return None
    metric = metric_label(w.get("metric") or data.attrs.get("metric"))
    fig = new_figure(2.2, 5.2)
    ax = axes(fig)
    ax.grid(True, axis="y")
    xs = np.arange(1, len(scores) + 1)
    ax.bar(xs, scores, width=0.6, color=C["best"], alpha=0.8, label="fold score")
    mean = float(np.mean(scores))
    ax.axhline(mean, color=C["ink"], linewidth=1, linestyle=(0, (4, 3)), label=f"mean {num(mean)}")
    for x, s in zip(xs, scores):
        ax.annotate(num(s, 3), (x, s), xytext=(0, 3 if s >= 0 else -10), textcoords="offset points",
                    ha="center", fontsize=8, color=C["ink"])
    top, bottom = max(scores + [0.0]), min(scores + [0.0])
    ax.set_ylim(bottom * 1.12 if bottom < 0 else 0, top * 1.15 if top > 0 else 0.05)
    ax.set_xticks(xs, [str(int(x)) for x in xs])
    ax.set_xlabel("fold")
    ax.set_ylabel(metric)
    legend_below(fig, ax)
    return svg_text(fig, "folds", f"The winner's {metric} on each fold, bars from zero")


@drawn_in_style
def seed_spread(data: ReportData) -> str | None:
    w = data.winner or {}
    spread = w.get("seed_spread") or {}
    scores = [float(s) for s in spread.get("scores") or [] if _finite(s)]
    if len(scores) < 2:
        return None
    seeds = list(spread.get("seeds") or range(len(scores)))[: len(scores)]
    metric = metric_label(w.get("metric") or data.attrs.get("metric"))
    fig = new_figure(1.7, 5.2)
    ax = axes(fig)
    mean, std = float(np.mean(scores)), float(np.std(scores, ddof=1))
    ax.axvspan(mean - std, mean + std, color=C["good_span"], alpha=0.15, linewidth=0,
               label="mean ± standard deviation")
    ax.axvline(mean, color=C["best"], linewidth=1.2)
    ax.scatter(scores, [0] * len(scores), s=36, color=C["best"], zorder=3, label="one training seed")
    for s, seed in zip(scores, seeds):
        ax.annotate(str(seed), (s, 0), xytext=(0, 7), textcoords="offset points", ha="center",
                    fontsize=7.5, color=C["muted"])
    if _finite(w.get("holdout_score")):
        ax.scatter([w["holdout_score"]], [0], marker="D", s=30, facecolors="none",
                   edgecolors=C["ink"], zorder=4, label="hold-out score")
    ax.set_yticks([])
    ax.spines["left"].set_visible(False)
    ax.set_ylim(-1, 1)
    ax.set_xlabel(f"{metric}, cross-validated")
    legend_below(fig, ax)
    return svg_text(fig, "seeds", f"The winner's {metric} retrained with {len(scores)} seeds")
