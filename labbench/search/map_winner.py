"""The winner of a search without a target (the map and group families): refit, hold-out
measures and stability across seeds. ``labbench.search.winner.finalize`` calls these for a
family with ``needs_target = False``.

* **Refit and hold-out** (``refit_map``): the chosen settings trained on ALL training rows (a
  fresh preprocessor fitted on them) for the trial's epochs, with the locked hold-out rows as the
  one member's validation rows. These families keep their last epoch (their schedules anneal to
  the end; no early stopping), so the hold-out rows only score the model - they choose nothing -
  and the engine computes its own measures on them (the definitions of the trials, not a second
  copy): ``holdout_score`` (the search's metric) and ``holdout_measures``.
* **Stability** (``stability``): the same settings retrained with several seeds, stacked as one
  Training (one member per seed, all training rows). Each pair of seeds is compared on the rows
  none of them trained on (the hold-out rows; the whole table when the hold-out has fewer than
  ``MIN_ROWS``): the adjusted Rand index between their row -> group assignments and, for a map,
  the layout agreement (``labbench.maps.stability``; a pair whose layout cannot be compared,
  NaN, is left out). The verdict uses the mean ARI over the pairs: >= 0.9 "reproducible", >= 0.7
  "mostly reproducible", below "not reproducible" (different seeds give different groups;
  thresholds: common practice for agreement indices, a guide and not a test). Hebbian
  features have no groups: their components are compared instead (the mean cosine of the
  principal angles between two seeds' subspaces, 1 = the same subspace).
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from labbench.errors import LabbenchError
from labbench.numbers import number
from labbench.search.events import Notice

log = logging.getLogger("labbench.search.winner")

MIN_ROWS = 50          # fewer hold-out rows than this: agreement is judged on every row
REPRODUCIBLE, MOSTLY = 0.9, 0.7
VERDICTS = ("reproducible", "mostly reproducible", "not reproducible")
MEASURE_KEYS = ("quantisation_error", "topographic_error", "reconstruction_error",
                "relative_error")


@dataclass(frozen=True)
class MapFit:
    preprocessor: Any                 # labbench.data.Preprocessor fitted on the training rows
    record: Any                       # the family's record (PrototypeRecord / SubspaceRecord)
    holdout_score: float              # the search's metric on the hold-out rows
    holdout_measures: dict            # MAPS.md: the four errors (None where not defined) + units
    X_train: np.ndarray               # the training rows, scaled
    X_holdout: np.ndarray             # the hold-out rows, scaled


def _member_seeds(seed: int, n: int) -> list[int]:
    from labbench.search.objective import member_seeds

    return member_seeds(seed, n)


def _scaled(prepared: Any, scaling: str):
    from labbench.data import Preprocessor

    table = prepared.table
    pre = Preprocessor(list(table.numeric), list(table.categorical), scaling=scaling)
    X = pre.fit_transform(table.frame.iloc[prepared.train_pos])
    X_hold = pre.transform(table.frame.iloc[prepared.holdout_pos])
    return pre, X, X_hold


def _dummy(X: np.ndarray) -> np.ndarray:
    return np.zeros(len(X), dtype=np.float64)


def refit_map(prepared: Any, settings: Mapping[str, Any], *, seed: int, scaling: str,
              dtype: str = "float32", epochs: int | None = None) -> MapFit:
    """Train on all training rows; score once on the hold-out rows (see the module text)."""
    pre, X, X_hold = _scaled(prepared, scaling)
    trainer = prepared.model.stack(settings, prepared.task, 1, [X], [_dummy(X)], [X_hold],
                                   [_dummy(X_hold)], seeds=_member_seeds(seed, 1),
                                   metric=prepared.metric, dtype=dtype, epochs=epochs)
    trainer.run()
    measures = trainer.measures() if hasattr(trainer, "measures") else {}
    held = {key: (float(np.asarray(measures[key], dtype=np.float64)[0]) if key in measures
                  else None) for key in MEASURE_KEYS}
    held["units"] = int(getattr(trainer, "units", 0) or _units(trainer.record(0)))
    score = float(np.asarray(trainer.best_val_metric, dtype=np.float64)[0])
    return MapFit(pre, trainer.record(0), score, held, X, X_hold)


def _units(record: Any) -> int:
    for attr in ("n_units", "n_components"):
        if hasattr(record, attr):
            return int(getattr(record, attr))
    return 0


def _verdict(ari_mean: float) -> str:
    if ari_mean >= REPRODUCIBLE:
        return VERDICTS[0]
    return VERDICTS[1] if ari_mean >= MOSTLY else VERDICTS[2]


def subspace_agreement(a: np.ndarray, b: np.ndarray) -> float:
    """Mean cosine of the principal angles between the row spaces of ``a`` and ``b`` (Björck &
    Golub 1973: the singular values of Qaᵀ Qb for orthonormal bases Qa, Qb)."""
    qa, _ = np.linalg.qr(np.asarray(a, dtype=np.float64).T)
    qb, _ = np.linalg.qr(np.asarray(b, dtype=np.float64).T)
    return float(np.clip(np.linalg.svd(qa.T @ qb, compute_uv=False), 0.0, 1.0).mean())


def stability(prepared: Any, settings: Mapping[str, Any], seeds: Sequence[int], fit: MapFit, *,
              dtype: str = "float32", epochs: int | None = None) -> dict[str, Any]:
    """The ``stability`` entry of the winner's scores (MAPS.md): seeds, ari_mean, ari_min,
    layout_mean, layout_min, verdict, message."""
    from itertools import combinations

    seeds = [int(s) for s in seeds]
    X = fit.X_train
    members = [_member_seeds(s, 1)[0] for s in seeds]
    trainer = prepared.model.stack(settings, prepared.task, 1, [X] * len(seeds),
                                   [_dummy(X)] * len(seeds), seeds=members,
                                   groups=list(range(len(seeds))), metric=prepared.metric,
                                   dtype=dtype, epochs=epochs)
    trainer.run()
    records = [trainer.record(i) for i in range(len(seeds))]
    held = len(fit.X_holdout) >= MIN_ROWS
    rows = fit.X_holdout if held else np.vstack([X, fit.X_holdout])
    where = (f"the {len(rows)} hold-out rows" if held else
             f"all {len(rows)} rows, as the hold-out has fewer than {MIN_ROWS}")
    out: dict[str, Any] = {"seeds": seeds, "ari_mean": None, "ari_min": None,
                           "layout_mean": None, "layout_min": None}
    pairs = list(combinations(range(len(seeds)), 2))
    if not hasattr(records[0], "assign"):        # Hebbian features: no groups
        agree = [subspace_agreement(records[i].components, records[j].components) for i, j in pairs]
        out.update(subspace_mean=float(np.mean(agree)), subspace_min=float(np.min(agree)),
                   verdict="not measured",
                   message=(f"Hebbian features have no groups to compare. Retrained with "
                            f"{len(seeds)} seeds, the learned components agree at "
                            f"{number(float(np.mean(agree)))} on average, lowest pair "
                            f"{number(float(np.min(agree)))} (mean cosine of the angles between "
                            "the seeds' subspaces; 1 = the same directions)."))
        return out
    from labbench.maps.stability import adjusted_rand_index, layout_agreement

    assigned = [r.assign(rows) for r in records]          # (unit, group, distance) per seed
    ari = [float(adjusted_rand_index(assigned[i][1], assigned[j][1])) for i, j in pairs]
    out.update(ari_mean=float(np.mean(ari)), ari_min=float(np.min(ari)))
    layout = None
    if getattr(records[0], "positions", None) is not None:
        layout = [float(layout_agreement(assigned[i][0], assigned[j][0], records[i].positions,
                                         records[j].positions, seed=seeds[0])) for i, j in pairs]
        layout = [v for v in layout if np.isfinite(v)]
        if layout:
            out.update(layout_mean=float(np.mean(layout)), layout_min=float(np.min(layout)))
    verdict = _verdict(out["ari_mean"])
    out["verdict"] = verdict
    out["message"] = stability_message(len(seeds), where, out, verdict)
    return out


def checked_stability(prepared: Any, settings: Mapping[str, Any], seeds: list[int], fit: Any,
                      epochs: int, dtype: str, stage, emit, warnings: list[str]) -> dict | None:
    """The map winner's stability across seeds (``map_winner.stability``); a warning in plain
    words (event + log) when its groups are not reproducible."""
    stage("stability", f"Retraining the winner with {len(seeds)} seeds in one stack to see "
          "whether its groups come back")
    try:
        stable = stability(prepared, settings, seeds, fit, dtype=dtype, epochs=epochs)
    except LabbenchError as exc:      # e.g. a seed that diverges: report it, keep the winner
        warnings.append(f"Stability check stopped: {exc}")
        return None
    if stable["verdict"] == VERDICTS[2]:
        warnings.append(stable["message"])
        log.warning("%s", stable["message"])
        emit(Notice(stable["message"], "warning"))
    return stable


def stability_message(n_seeds: int, where: str, s: Mapping[str, Any], verdict: str) -> str:
    """The stability result in plain words (the window, the report and ``labbench run``)."""
    agree = (f"on {where}: adjusted Rand index {number(s['ari_mean'])} on average over the "
             f"pairs of seeds, lowest {number(s['ari_min'])}; 1 = the same groups, 0 = no more "
             "alike than chance")
    if verdict == VERDICTS[0]:
        text = (f"Retrained with {n_seeds} seeds, the rows fall into the same groups ({agree}): "
                "the groups are reproducible.")
    elif verdict == VERDICTS[1]:
        text = (f"Retrained with {n_seeds} seeds, the rows mostly fall into the same groups "
                f"({agree}): mostly reproducible; rows near the borders of groups change group "
                "from seed to seed.")
    else:
        text = (f"Retrained with {n_seeds} seeds, different seeds give different groups "
                f"({agree}): the groups are not reproducible, so one run's groups say little on "
                "their own. "
                "Fewer units or groups, more epochs or a principal-component start often help; "
                "compare the seeds before relying on the groups.")
    if s.get("layout_mean") is not None:
        text += (f" The map's layout agrees at {number(s['layout_mean'])} on average (lowest "
                 f"{number(s['layout_min'])}; 1 = the same layout up to rotation or mirroring).")
    return text


def summary_text(scores: Mapping[str, Any]) -> list[str]:
    """Lines for ``labbench run``'s winner summary: hold-out measures and stability."""
    lines = []
    held = scores.get("holdout_measures") or {}
    parts = [f"{k.replace('_', ' ')} {number(held[k])}" for k in MEASURE_KEYS
             if held.get(k) is not None]
    if held.get("units"):
        kind = "components" if held.get("reconstruction_error") is not None else "units"
        parts.insert(0, f"{held['units']} {kind}")
    if parts:
        lines.append("  hold-out measures: " + ", ".join(parts))
    s = scores.get("stability")
    if s:
        lines.append(f"  stability ({len(s.get('seeds') or [])} seeds): {s.get('verdict')}")
        lines.append(f"    {s.get('message')}")
    else:
        lines.append("  stability: not measured")
    return lines
