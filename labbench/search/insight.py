"""Small pure functions that read a search and say what it means (the window and the report share them).

* ``best_so_far`` — the running best value over trial numbers;
* ``counts_by_state`` — trials per state key (``labbench.search.states``);
* ``param_importance`` — Optuna's parameter importance, or an honest message when there is too
  little to go on;
* ``spread_stats`` / ``lead_inside_spread`` — how much a score moves with the training seed, and
  whether the winner's lead over the runner-up is bigger than that;
* ``compare_cv_holdout`` — the cross-validated estimate next to the one hold-out score.
"""

from __future__ import annotations

import logging
import math
from typing import Any, Iterable, Mapping, Sequence

from labbench.numbers import number as fmt
from labbench.search import states

log = logging.getLogger("labbench.search.insight")

MIN_TRIALS_FOR_IMPORTANCE = 10
IMPORTANCE_METHODS = ("ped_anova", "fanova")


def best_so_far(points: Iterable[tuple[int, float | None]], direction: str) -> list[tuple[int, float]]:
    """``[(trial number, best value up to it)]`` for the finished trials with a finite value."""
    better = max if direction == "maximize" else min
    out: list[tuple[int, float]] = []
    best: float | None = None
    for number, value in sorted((p for p in points if _finite(p[1])), key=lambda p: p[0]):
        best = float(value) if best is None else better(best, float(value))
        out.append((int(number), best))
    return out


def counts_by_state(trials: Iterable[Any]) -> dict[str, int]:
    """Trials per state key (complete, pruned, failed, cancelled, running, waiting), all present."""
    return states.count(trials)


def _finite(x: Any) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def _sample_std(values: Sequence[float]) -> float:
    n = len(values)
    if n < 2:
        return 0.0
    mean = math.fsum(values) / n
    return math.sqrt(math.fsum((v - mean) ** 2 for v in values) / (n - 1))


# --------------------------------------------------------------------------------------------
# importance


def param_importance(study: Any, method: str = "ped_anova", *, seed: int = 0,
                     min_trials: int = MIN_TRIALS_FOR_IMPORTANCE) -> dict[str, Any]:
    """``{"method", "values": {param: share}, "message", "n_complete"}``; ``values`` sums to 1
    and is empty (with ``message`` saying why) when the numbers would mean nothing."""
    import optuna
    from optuna.trial import TrialState

    if method not in IMPORTANCE_METHODS:
        raise ValueError(f"importance method {method!r}; use one of {', '.join(IMPORTANCE_METHODS)}")
    done = study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
    out: dict[str, Any] = {"method": method, "values": {}, "message": "", "n_complete": len(done)}
    if len(done) < min_trials:
        out["message"] = (f"Only {len(done)} trial(s) completed; parameter importance needs at "
                          f"least {min_trials} to mean anything, so none is shown.")
        return out
    varied = sorted({p for t in done for p in t.params})
    if not varied:
        out["message"] = "Nothing was searched (every setting is fixed), so there is no importance to show."
        return out
    if method == "fanova":
        evaluator = optuna.importance.FanovaImportanceEvaluator(seed=seed)
    else:
        evaluator = optuna.importance.PedAnovaImportanceEvaluator()
    try:
        values = optuna.importance.get_param_importances(study, evaluator=evaluator, normalize=True)
    except (ValueError, RuntimeError, ZeroDivisionError) as exc:
        log.info("importance failed: %s", exc)
        out["message"] = f"Parameter importance could not be computed: {' '.join(str(exc).split())}"
        return out
    values = {str(k): float(v) for k, v in values.items() if math.isfinite(v)}
    if not values or sum(values.values()) <= 0:
        out["message"] = ("The completed trials do not separate the settings (all scores alike); "
                          "no importance to show.")
        return out
    out["values"] = dict(sorted(values.items(), key=lambda kv: -kv[1]))
    if len(done) < 2 * min_trials:
        out["message"] = (f"Based on {len(done)} completed trials only: treat the ranking as a rough hint.")
    return out


# --------------------------------------------------------------------------------------------
# seed spread and the runner-up


def spread_stats(scores: Sequence[float], seeds: Sequence[int] = ()) -> dict[str, Any]:
    """Per-seed CV scores and their mean, sample standard deviation, min, max and range."""
    vals = [float(s) for s in scores]
    if not vals:
        return {"seeds": list(seeds), "scores": [], "mean": None, "std": None, "min": None,
                "max": None, "range": None}
    return {"seeds": [int(s) for s in seeds], "scores": vals, "mean": math.fsum(vals) / len(vals),
            "std": _sample_std(vals), "min": min(vals), "max": max(vals),
            "range": max(vals) - min(vals)}


def lead_inside_spread(winner: float, runner_up: float | None, spread: Mapping[str, Any] | None,
                       metric: str) -> dict[str, Any]:
    """Is the winner's lead over the runner-up smaller than its seed-to-seed range?"""
    if runner_up is None:
        return {"lead": None, "inside": False,
                "text": "There is no runner-up with different settings to compare with."}
    lead = abs(float(winner) - float(runner_up))
    width = None if not spread else spread.get("range")
    if width is None:
        return {"lead": lead, "inside": False,
                "text": f"The winner leads the runner-up by {fmt(lead)} {metric}; its seed spread "
                        "was not measured, so it is unknown whether that lead is real."}
    inside = lead <= width
    if inside:
        text = (f"The winner leads the runner-up by only {fmt(lead)} {metric}, less than the "
                f"{fmt(width)} its own score moves between training seeds: the two are "
                "effectively tied, and either could win on another draw.")
    else:
        text = (f"The winner leads the runner-up by {fmt(lead)} {metric}, more than the "
                f"{fmt(width)} its score moves between training seeds.")
    return {"lead": lead, "inside": inside, "text": text}


# --------------------------------------------------------------------------------------------
# cross-validation against the hold-out


def compare_cv_holdout(cv_mean: float, cv_std: float, holdout: float, metric: str,
                       direction: str, *, tolerance: float = 2.0) -> dict[str, Any]:
    """The hold-out score beside the CV estimate; ``differs`` when
    ``|holdout - cv_mean| > tolerance * cv_std`` (common practice: about two standard deviations)."""
    diff = float(holdout) - float(cv_mean)
    allowed = tolerance * max(float(cv_std), 0.0)
    differs = abs(diff) > allowed + 1e-12
    side = f"CV {fmt(cv_mean)} ± {fmt(cv_std)} vs hold-out {fmt(holdout)} ({metric})"
    if not differs:
        text = f"{side}: the hold-out agrees with the cross-validated estimate."
    else:
        worse = (diff < 0) == (direction == "maximize")
        if worse:
            meaning = ("the hold-out is worse than the folds suggested: the search may have fitted "
                       "the folds' noise (too many trials for the data), or the hold-out rows "
                       "differ from the training rows")
        else:
            meaning = ("the hold-out is better than the folds suggested: with few hold-out rows "
                       "this is often luck; do not read it as a better model")
        text = (f"{side}: they differ by {fmt(abs(diff))}, more than {tolerance:g} × the CV spread "
                f"({fmt(allowed)}); {meaning}.")
    return {"cv_mean": float(cv_mean), "cv_std": float(cv_std), "holdout": float(holdout),
            "difference": diff, "allowed": allowed, "differs": differs, "text": text}
