"""Numbers behind the run page's pictures (no Qt): robust axis ranges, the learning-curve band,
where the good scores sit in a setting's range, and whole-number ticks."""

from __future__ import annotations

import math
from typing import Iterable, Sequence

import numpy as np


def robust_range(values: Iterable[float], lo_q: float = 5.0, hi_q: float = 95.0,
                 pad: float = 0.12) -> tuple[float, float, int]:
    """(low, high, n_outside): the lo_q-hi_q % quantiles padded by ``pad`` of their span.

    With few values (under 10) the full range is used. ``n_outside`` counts the values the range
    leaves out, so a picture can say that it clipped them.
    """
    v = np.asarray([x for x in values if x is not None and math.isfinite(x)], dtype=float)
    if v.size == 0:
        return 0.0, 1.0, 0
    if v.size < 10:
        low, high = float(v.min()), float(v.max())
    else:
        low, high = (float(x) for x in np.percentile(v, [lo_q, hi_q]))
    span = high - low
    if span <= 0:
        span = abs(high) * 0.1 or 0.1
    low, high = low - pad * span, high + pad * span
    outside = int(np.count_nonzero((v < low) | (v > high)))
    return low, high, outside


def loss_band(curves: Sequence[Sequence[float]], lo_q: float = 10.0,
              hi_q: float = 90.0) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per epoch (1-based): the lo_q, 50 and hi_q % quantiles over the trials that reached it.

    ``curves``: one validation-loss list per trial, epoch 1 first. Epochs that fewer than two
    trials reached are left out (a band of one line says nothing).
    """
    longest = max((len(c) for c in curves), default=0)
    if not longest:
        empty = np.asarray([], float)
        return empty, empty, empty, empty
    grid = np.full((len(curves), longest), np.nan)
    for i, c in enumerate(curves):
        grid[i, :len(c)] = np.asarray([np.nan if v is None else v for v in c], dtype=float)
    grid[~np.isfinite(grid)] = np.nan
    enough = np.count_nonzero(~np.isnan(grid), axis=0) >= 2
    if not enough.any():
        empty = np.asarray([], float)
        return empty, empty, empty, empty
    # numpy's default (linear) quantile, column by column, without nanpercentile's per-column loop
    cols = np.sort(grid[:, enough], axis=0)                 # NaN sort to the end
    counts = np.count_nonzero(~np.isnan(cols), axis=0)
    out = []
    for q in (lo_q, 50.0, hi_q):
        pos = q / 100.0 * (counts - 1)
        below = np.floor(pos).astype(int)
        above = np.minimum(below + 1, counts - 1)
        a = np.take_along_axis(cols, below[None, :], axis=0)[0]
        b = np.take_along_axis(cols, above[None, :], axis=0)[0]
        out.append(a + (b - a) * (pos - below))
    epochs = np.flatnonzero(enough).astype(float) + 1
    return epochs, out[0], out[1], out[2]


def good_span(xs: Sequence[float], scores: Sequence[float], direction: str,
              share: float = 0.25) -> tuple[float, float, int] | None:
    """The span of setting values among the best ``share`` of the trials (at least one trial).

    Returns (lowest, highest, how many trials) or None without trials.
    """
    pairs = [(x, s) for x, s in zip(xs, scores) if s is not None and math.isfinite(s)]
    if not pairs:
        return None
    pairs.sort(key=lambda p: p[1], reverse=(direction == "maximize"))
    k = max(1, int(math.ceil(len(pairs) * share)))
    top = [x for x, _ in pairs[:k]]
    return min(top), max(top), k


def integer_ticks(low: float, high: float, most: int = 8) -> list[int]:
    """Whole-number ticks between two values: every integer if few, else a 1-2-5 step."""
    lo, hi = math.ceil(min(low, high)), math.floor(max(low, high))
    if hi < lo:
        return [int(round((low + high) / 2))]
    span = hi - lo
    step = 1
    for s in (1, 2, 5, 10, 20, 25, 50, 100, 200, 250, 500, 1000, 2000, 5000, 10000):
        step = s
        if span / s <= most - 1:
            break
    first = int(math.ceil(lo / step) * step)
    return list(range(first, hi + 1, step))


def log_ticks(low: float, high: float, most: int = 7) -> list[float]:
    """1-2-5 × 10^k ticks between two positive values (one per decade on wide spans)."""
    if not (low > 0 and high > 0):
        return []
    lo, hi = math.floor(math.log10(min(low, high))), math.ceil(math.log10(max(low, high)))
    steps = (1, 2, 5) if hi - lo <= 2 else (1,)
    out = [m * 10.0 ** k for k in range(lo, hi + 1) for m in steps]
    out = [v for v in out if min(low, high) * 0.999 <= v <= max(low, high) * 1.001]
    return out[:: max(1, math.ceil(len(out) / most))]
