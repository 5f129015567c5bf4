"""Stability across seeds: do runs that differ only in their random start give the same groups
and the same map?

* ``adjusted_rand_index(a, b)``: agreement of two assignments of the same rows to groups,
  corrected for chance (Hubert & Arabie, Comparing partitions, Journal of Classification 1985),
  computed from the contingency table: 1 = the same partition (whatever the group numbers), about 0
  = no more agreement than chance.
* ``layout_agreement(...)``: for maps, the Pearson correlation between the grid distances of the
  best units of sampled row pairs in two runs. Rotating or mirroring a map keeps grid distances, so
  1 means the same layout up to such moves; a map whose regions land elsewhere scores lower.
* ``verdict(ari_mean)``: plain words. Thresholds (common practice, not from a source): ARI >= 0.9
  "reproducible", 0.7 to 0.9 "mostly reproducible", below 0.7 "not reproducible".
* ``stability_summary(...)``: every pair of seeds, summarised the way labbench stores it;
  ``stability_of_records(seeds, records, X)`` does it from trained prototype records.
"""

from __future__ import annotations

from itertools import combinations
from typing import Any, Sequence

import numpy as np

REPRODUCIBLE, MOSTLY = 0.9, 0.7


def _comb2(x: np.ndarray | float) -> np.ndarray | float:
    return x * (x - 1) / 2.0


def adjusted_rand_index(a: Sequence[int], b: Sequence[int]) -> float:
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape or a.ndim != 1:
        raise ValueError("two assignments of the same rows are needed")
    n = a.size
    _, ia = np.unique(a, return_inverse=True)
    _, ib = np.unique(b, return_inverse=True)
    table = np.zeros((ia.max(initial=-1) + 1, ib.max(initial=-1) + 1), dtype=np.float64)
    np.add.at(table, (ia, ib), 1.0)
    index = _comb2(table).sum()
    rows, cols = _comb2(table.sum(axis=1)).sum(), _comb2(table.sum(axis=0)).sum()
    total = _comb2(float(n))
    if total == 0:
        return 1.0
    expected = rows * cols / total
    top = 0.5 * (rows + cols)
    if top == expected:          # both trivial (one group each, or every row its own): identical
        return 1.0
    return float((index - expected) / (top - expected))


def layout_agreement(units_a: np.ndarray, units_b: np.ndarray, positions_a: np.ndarray,
                     positions_b: np.ndarray, *, pairs: int = 20_000, seed: int = 0) -> float:
    """Pearson correlation of the grid distances between the best units of the same row pairs in
    two runs (rows drawn with ``numpy.random.default_rng(seed)``; every pair when there are
    fewer). NaN when either run puts every sampled pair at one distance."""
    ua, ub = np.asarray(units_a), np.asarray(units_b)
    n = ua.size
    if n < 2:
        return float("nan")
    if n * (n - 1) // 2 <= pairs:
        i, j = np.triu_indices(n, 1)
    else:
        rng = np.random.default_rng(seed)
        i = rng.integers(0, n, pairs)
        j = (i + rng.integers(1, n, pairs)) % n          # never the same row
    pa, pb = np.asarray(positions_a, float), np.asarray(positions_b, float)
    da = np.linalg.norm(pa[ua[i]] - pa[ua[j]], axis=1)
    db = np.linalg.norm(pb[ub[i]] - pb[ub[j]], axis=1)
    if da.std() == 0 or db.std() == 0:
        return float("nan")
    return float(np.corrcoef(da, db)[0, 1])


def verdict(ari_mean: float) -> tuple[str, str]:
    """(word, message) for the mean adjusted Rand index between seeds."""
    if ari_mean >= REPRODUCIBLE:
        return "reproducible", (f"different seeds give nearly the same groups (mean adjusted Rand "
                                f"index {ari_mean:.2f})")
    if ari_mean >= MOSTLY:
        return "mostly reproducible", (f"different seeds give mostly the same groups (mean adjusted "
                                       f"Rand index {ari_mean:.2f}); read the smaller groups with care")
    return "not reproducible", (f"different seeds give different groups (mean adjusted Rand index "
                                f"{ari_mean:.2f}); do not read meaning into single groups - try fewer "
                                "units or groups, or more epochs")


def stability_summary(seeds: Sequence[int], groups: Sequence[np.ndarray],
                      units: Sequence[np.ndarray] | None = None,
                      positions: Sequence[np.ndarray] | None = None) -> dict[str, Any]:
    """Every pair of runs compared: ``groups[i]`` the group of each row in run i (same rows in
    every run), and for maps ``units[i]`` each row's best unit and ``positions[i]`` the run's
    grid positions. Returns {"seeds", "ari_mean", "ari_min", "layout_mean", "layout_min",
    "verdict", "message"} (layout values None without maps; ARI 1 with a single run)."""
    pairs = list(combinations(range(len(groups)), 2))
    ari = [adjusted_rand_index(groups[i], groups[j]) for i, j in pairs] or [1.0]
    layout_mean = layout_min = None
    if units is not None and positions is not None and pairs:
        lay = [layout_agreement(units[i], units[j], positions[i], positions[j]) for i, j in pairs]
        lay = [v for v in lay if np.isfinite(v)]
        if lay:
            layout_mean, layout_min = float(np.mean(lay)), float(np.min(lay))
    word, message = verdict(float(np.mean(ari)))
    return {"seeds": [int(s) for s in seeds], "ari_mean": float(np.mean(ari)),
            "ari_min": float(np.min(ari)), "layout_mean": layout_mean, "layout_min": layout_min,
            "verdict": word, "message": message}


def stability_of_records(seeds: Sequence[int], records: Sequence[Any], X: np.ndarray) -> dict[str, Any]:
    """``stability_summary`` of prototype records trained with different seeds (one per seed),
    from the assignment of the same scaled rows ``X``: each row's group in every run, and for
    maps its best unit and the map's grid positions."""
    assigned = [record.assign(X) for record in records]
    maps = all(getattr(record, "shape", None) is not None for record in records)
    return stability_summary(seeds, [a[1] for a in assigned],
                             [a[0] for a in assigned] if maps else None,
                             [record.positions for record in records] if maps else None)
