"""After the search: pick the winner, refit it, check it once on the hold-out and across seeds.

``finalize(spec, study)`` does, in order (one ``FinalStage`` event per step):

1. the winner = the best trial by ``labbench.search.ranking`` (finished, finite CV value, the
   study's metric direction, ties to the earlier trial);
2. refit its settings on ALL training rows (a fresh preprocessor fitted on those rows) for the
   trial's shared best epoch (``best_epoch``), no early stopping;
3. score that model ONCE on the locked hold-out rows, beside the CV estimate;
4. seed spread: the same settings retrained with several seeds on the same folds, all
   seeds × folds stacked into one ``StackTrainer`` (each seed's folds share one best epoch);
5. parameter importance (PED-ANOVA, or fANOVA with a fixed seed);
6. ``winner.json`` (the summary) and ``winner.toml`` (a spec with every setting fixed).

It returns the summary and the refit ``TrainedModel``. ``trial_number`` takes a trial the user
picked (e.g. from the trade-off front) instead of the best. A family that learns without a target
(the maps) is refit, scored and checked across seeds by ``labbench.search.map_winner``: hold-out
measures, and the stability of its groups instead of the seed spread of a score.
"""

from __future__ import annotations

import dataclasses
import json
import logging
import math
import platform
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from labbench.errors import DivergenceError, LabbenchError
from labbench.numbers import number as fmt
from labbench.search import events, ranking
from labbench.search import map_winner
from labbench.search.insight import (compare_cv_holdout, counts_by_state, lead_inside_spread,
                                     param_importance, spread_stats)
from labbench.search.prepare import Prepared, prepare
from labbench.search.spec import Spec, without_password

log = logging.getLogger("labbench.search.winner")

CAUTION = ("A cross-validated score is an estimate from this data set, not a guarantee of how the "
           "model will do on new data. A model used for decisions that affect people, money or "
           "safety needs independent validation on fresh data and must follow the rules and "
           "standards of that field.")


def _seed_list(base: int, n: int) -> list[int]:
    """Seeds of the spread check; the first is the search's own seed."""
    return [int(base) + i for i in range(n)]


def _member_seeds(seed: int, n_members: int) -> list[int]:
    # The same derivation the trials use (labbench.search.objective.member_seeds).
    from labbench.search.objective import member_seeds

    return member_seeds(seed, n_members)


def pick_winner(trials: list[Any], direction: str) -> tuple[Any, Any | None]:
    """(best trial, best trial whose settings differ) by ``labbench.search.ranking``."""
    return ranking.best_and_runner_up(trials, direction)


MAX_REFITS = 3       # trials tried for the refit before giving up (the best, then two fallbacks)


def ranked_candidates(trials: list[Any], direction: str) -> list[Any]:
    """Scored trials best first (ties to the earlier), one per distinct settings (ranking)."""
    return ranking.distinct(trials, direction)


def fallback_text(failed: Any, nxt: Any, reason: str, metric: str) -> str:
    return (f"The refit of trial {failed.number} (CV {metric} {fmt(failed.value)}) on all training "
            f"rows diverged ({reason.rstrip('.')}); trial {nxt.number}, the next best with "
            f"different settings (CV {metric} {fmt(nxt.value)}), is refit instead.")


def refit_error(diverged: list[tuple[Any, str]], n_candidates: int) -> DivergenceError:
    numbers = ", ".join(str(t.number) for t, _ in diverged)
    last = diverged[-1][1].rstrip(".")
    more = "" if n_candidates <= len(diverged) else \
        f" (labbench tries the best {MAX_REFITS} with different settings)"
    return DivergenceError(
        f"the refit on all training rows diverged for trial(s) {numbers}{more}, so there is no "
        f"winner model (last: {last}); lower the learning_rate range in [space] (and check that "
        f"the inputs are scaled, [data] scaling), then run the search again")


def _versions() -> dict[str, str]:
    import optuna
    import pandas

    from labbench import __version__

    return {"labbench": __version__, "numpy": np.__version__, "pandas": pandas.__version__,
            "optuna": optuna.__version__, "python": platform.python_version()}


def refit_epochs(trial: Any, settings: Mapping[str, Any]) -> int:
    """Epochs of the refit: the trial's shared best epoch (``best_epoch``); a trial stored before
    early stopping existed has none and refits with the epochs it ran."""
    attrs = trial.user_attrs
    for key in ("best_epoch", "epochs_run"):
        if attrs.get(key):
            return int(attrs[key])
    return int(settings["epochs"])


def refit(prepared: Prepared, settings: Mapping[str, Any], *, seed: int, scaling: str,
          dtype: str = "float32", target_scaling: str | None = None, epochs: int | None = None):
    """Train the settings on all training rows for ``epochs`` (default: the settings' epochs; no
    validation rows, so no early stopping); returns ``(Preprocessor, record, TargetScaler or
    None)`` where the record is the family's (the network's: ``NetWeights``). Regression: the
    target scaler (``target_scaling``, default the prepared spec's) is fitted on the same rows
    and the model trains in its units."""
    from labbench.data import Preprocessor, TargetScaler

    table = prepared.table
    numeric = [c for c in table.features if table.kinds[c] == "numeric"]
    categorical = [c for c in table.features if table.kinds[c] == "categorical"]
    pre = Preprocessor(numeric, categorical, scaling=scaling)
    X = pre.fit_transform(table.frame.iloc[prepared.train_pos])
    y = table.y[prepared.train_pos]
    target = None
    if prepared.task == "regression":
        target = TargetScaler(target_scaling or prepared.target_scaling, table.target)
        y = target.fit_transform(y, f"{table.path}: ")
    trainer = prepared.model.stack(settings, prepared.task, prepared.n_outputs, [X], [y],
                                   seeds=_member_seeds(seed, 1), dtype=dtype, epochs=epochs)
    trainer.run()
    return pre, trainer.record(0), target


def measure_seed_spread(prepared: Prepared, settings: Mapping[str, Any], seeds: list[int],
                dtype: str = "float32") -> dict[str, Any]:
    """CV score of the settings for each seed; seeds × folds trained as one stack, each seed's folds
    one group sharing its best epoch (the rule of the trials), scored at that epoch."""
    fa = prepared.fold_arrays
    k = len(fa.X_train)
    member_seeds = [s for seed in seeds for s in _member_seeds(seed, k)]
    trainer = prepared.model.stack(settings, prepared.task,
                                   prepared.n_outputs, list(fa.X_train) * len(seeds),
                                   list(fa.y_train) * len(seeds), list(fa.X_val) * len(seeds),
                                   list(fa.y_val) * len(seeds), seeds=member_seeds,
                                   metric=prepared.metric,
                                   target_inverse=None if fa.target_inverse is None
                                   else list(fa.target_inverse) * len(seeds),
                                   groups=[i for i in range(len(seeds)) for _ in range(k)],
                                   dtype=dtype)
    trainer.run()
    per_member = np.asarray(trainer.best_val_metric, dtype=np.float64)
    scores = [float(per_member[i * k:(i + 1) * k].mean()) for i in range(len(seeds))]
    return spread_stats(scores, seeds)


def holdout_score(model: Any, prepared: Prepared) -> float:
    from labbench.nets.metrics import compute

    rows = prepared.holdout_pos
    output = model.output(prepared.table.frame.iloc[rows], source="the hold-out rows")
    return float(compute(prepared.metric, prepared.table.y[rows], output, prepared.task,
                         n_classes=prepared.n_classes))


def winner_spec(spec: Spec, settings: Mapping[str, Any]) -> Spec:
    """The spec with every setting fixed to ``settings``; one trial, its own study name."""
    search = dataclasses.replace(spec.search, trials=1, minutes=None, sampler="random",
                                 pruner="none", workers=1, name=f"{spec.study_name()}-winner")
    return dataclasses.replace(spec, search=search, space=spec.space.fixed_at(settings))


def picked(trials: list[Any], number: int, study_name: str) -> Any:
    """The finished trial ``number`` (the user's pick); one clear line when it is not one."""
    from labbench.search import states

    done = [t for t in trials if states.trial_key(t) == "complete" and t.value is not None
            and math.isfinite(t.value)]
    for t in done:
        if t.number == number:
            return t
    shown = ", ".join(str(t.number) for t in done[:12]) + (", ..." if len(done) > 12 else "")
    known = next((t for t in trials if t.number == number), None)
    what = f"there is no trial {number}" if known is None else \
        f"trial {number} is not a finished trial with a score ({states.WORDS[states.trial_key(known)]})"
    raise LabbenchError(f"--pick {number}: {what} in search {study_name!r}; pick one of the "
                        f"finished trials: {shown or 'none yet'}")


def finalize(spec: Spec, study: Any, prepared: Prepared | None = None,
             emit: events.Emit = events.ignore, out_dir: str | Path | None = None,
             importance: str = "ped_anova", seed_spread: int | None = None, *,
             dtype: str = "float32", trial_number: int | None = None) -> tuple[dict, Any]:
    """Refit, hold-out, seed spread, importance, files. Returns ``(summary, TrainedModel)``.

    ``seed_spread``: number of seeds (default ``spec.evaluation.seed_spread``; 0 or 1 skips it).
    ``out_dir``: where winner.json / winner.toml go (default: the spec's folder).
    ``trial_number``: refit this finished trial (the user's pick) instead of the best.
    """
    from labbench.model import TrainedModel

    n_seeds = spec.evaluation.seed_spread if seed_spread is None else int(seed_spread)
    prepared = prepared or prepare(spec)
    direction, metric, seed = prepared.direction, prepared.metric, spec.evaluation.seed
    trials = study.get_trials(deepcopy=False)
    candidates = ranked_candidates(trials, direction)
    best, runner_up = pick_winner(trials, direction)
    if trial_number is not None:          # the user's pick: that trial only, no fallback
        best, runner_up = picked(trials, int(trial_number), study.study_name), None
        candidates = [best]
    maps = not prepared.model.needs_target
    fit = None
    if best is None:
        raise LabbenchError(f"study {study.study_name}: no complete trial yet, so there is no "
                            "winner; run more trials (or widen the search if every trial failed)")
    warnings: list[str] = []
    if study.user_attrs.get("data_sha256") not in (None, prepared.table.sha256):
        warnings.append("The data file changed since the search ran (its fingerprint differs); "
                        "the refit and hold-out use the file as it is now.")
    if study.user_attrs.get("metric") not in (None, metric):
        warnings.append(f"The search ranked trials by {study.user_attrs['metric']}, but the spec "
                        f"now asks for {metric}; the hold-out is scored with {metric}.")

    def stage(name: str, text: str) -> None:
        log.info("%s: %s", name, text)
        emit(events.FinalStage(stage=name, text=text))

    # The refit: the best trial first; when its refit diverges, the next best with different
    # settings (at most MAX_REFITS tries), with a warning naming both trials.
    diverged: list[tuple[Any, str]] = []
    for attempt, best in enumerate(candidates[:MAX_REFITS]):
        settings = dict(best.user_attrs.get("settings")
                        or spec.space.settings_from_params(best.params))
        best_epoch = refit_epochs(best, settings)
        stage("refit", f"Refitting trial {best.number} on all {len(prepared.train_pos)} training "
              f"rows for {best_epoch} epochs")
        try:
            if maps:
                fit = map_winner.refit_map(prepared, settings, seed=seed, scaling=spec.data.scaling,
                                           dtype=dtype, epochs=best_epoch)
                pre, weights, target_scaler = fit.preprocessor, fit.record, None
            else:
                pre, weights, target_scaler = refit(prepared, settings, seed=seed,
                                                    scaling=spec.data.scaling, dtype=dtype,
                                                    epochs=best_epoch)
        except DivergenceError as exc:
            diverged.append((best, str(exc)))
            if attempt + 1 < min(len(candidates), MAX_REFITS):
                nxt = candidates[attempt + 1]
                text = fallback_text(best, nxt, str(exc), metric)
                warnings.append(text)
                log.warning("%s", text)
                emit(events.Notice(text, "warning"))
            continue
        break
    else:
        raise refit_error(diverged, len(candidates))
    if diverged:
        later = candidates[candidates.index(best) + 1:]
        runner_up = later[0] if later else None
    fold_scores = [float(s) for s in best.user_attrs.get("fold_scores", [])]
    cv_mean = float(best.value)
    cv_std = best.user_attrs.get("cv_std")
    if cv_std is None:              # sample standard deviation across folds, as the trials store it
        cv_std = float(np.std(fold_scores, ddof=1)) if len(fold_scores) > 1 else 0.0
    cv_std = float(cv_std)
    table = prepared.table
    model = TrainedModel(preprocessor=pre, weights=weights, task=prepared.task, target=table.target,
                         features=tuple(table.features), kinds=dict(table.kinds),
                         classes=None if table.classes is None else tuple(table.classes),
                         settings=settings, metric=metric, data_sha256=table.sha256,
                         id_column=table.id_column, target_scaler=target_scaler)

    stage("holdout", f"Scoring the refit model once on {len(prepared.holdout_pos)} hold-out rows")
    h_score = fit.holdout_score if fit is not None else holdout_score(model, prepared)
    comparison = compare_cv_holdout(cv_mean, cv_std, h_score, metric, direction)
    if comparison["differs"]:
        warnings.append(comparison["text"])

    spread = None
    lead = lead_inside_spread(cv_mean, None if runner_up is None else runner_up.value, None, metric)
    stable = None
    if fit is not None:       # maps: seeds are compared by their groups (stability), not a score
        lead = {**lead, "text": ""}
    if n_seeds >= 2 and fit is not None:
        stable = map_winner.checked_stability(prepared, settings, _seed_list(seed, n_seeds), fit,
                                              best_epoch, dtype, stage, emit, warnings)
    elif n_seeds >= 2:
        seeds = _seed_list(seed, n_seeds)
        stage("seed_spread", f"Retraining the winner with {n_seeds} seeds × "
              f"{len(prepared.fold_arrays.X_train)} folds in one stack")
        try:
            spread = measure_seed_spread(prepared, settings, seeds, dtype=dtype)
        except LabbenchError as exc:      # e.g. a seed that diverges: report it, keep the winner
            warnings.append(f"Seed-spread check stopped: {exc}")
        if spread is not None:
            lead = lead_inside_spread(cv_mean, None if runner_up is None else runner_up.value,
                                      spread, metric)
            if lead["inside"]:
                warnings.append(lead["text"])

    stage("importance", "What moved the score: each setting's share of the score's variation")
    imp = param_importance(study, importance, seed=seed)

    if fit is not None:        # MAPS.md: the scores of a map winner
        scores = {"cv_mean": cv_mean, "cv_std": cv_std, "fold_scores": fold_scores,
                  "holdout_score": h_score, "holdout_measures": fit.holdout_measures,
                  "stability": stable, "trial_number": int(best.number)}
    else:
        scores = {"cv_mean": cv_mean, "cv_std": cv_std, "fold_scores": fold_scores,
                  "holdout_score": h_score,
                  "seed_spread_mean": None if spread is None else spread["mean"],
                  "seed_spread_std": None if spread is None else spread["std"],
                  "trial_number": int(best.number)}
    model = dataclasses.replace(model, scores=_plain(scores))
    summary = _plain({
        "study_name": study.study_name,
        "task": prepared.task, "target": table.target,
        "classes": None if table.classes is None else list(table.classes),
        "metric": metric, "direction": direction,
        "trial_number": int(best.number),
        "seed": int(seed),
        "cv_mean": cv_mean, "cv_std": cv_std, "fold_scores": fold_scores,
        "holdout_score": h_score, "holdout_rows": int(len(prepared.holdout_pos)),
        "train_rows": int(len(prepared.train_pos)),
        "cv_vs_holdout": comparison,
        "seed_spread": spread,
        **({"label": table.label, "measures": best.user_attrs.get("measures"),
            "holdout_measures": fit.holdout_measures, "stability": stable}
           if fit is not None else {}),
        "picked": trial_number is not None,
        "runner_up": None if runner_up is None else {
            "trial_number": int(runner_up.number), "value": float(runner_up.value),
            "lead": lead["lead"], "inside_spread": lead["inside"], "text": lead["text"]},
        "refit_fallback": [{"trial_number": int(t.number), "reason": why} for t, why in diverged],
        "params": {k: _plain(v) for k, v in best.params.items()},
        "settings": settings,
        "best_epoch": best_epoch,
        "trials": counts_by_state(trials),
        "importance": imp,
        "data_sha256": table.sha256,
        "versions": _versions(),
        "search_versions": study.user_attrs.get("versions"),
        "warnings": warnings,
        "caution": CAUTION,
    })

    out = Path(out_dir) if out_dir is not None else Path(spec.base_dir())
    stage("files", f"Writing winner.json and winner.toml to {out}")
    files = write_winner_files(spec, summary, out)
    emit(events.WinnerReady(summary=summary, files=tuple(files)))
    log.info("winner: trial %d, CV %s ± %s, hold-out %s", best.number, fmt(cv_mean), fmt(cv_std),
             fmt(h_score))
    return summary, model


def _plain(v: Any) -> Any:
    """JSON-safe plain Python: numpy scalars unwrapped, NaN/inf as None."""
    if isinstance(v, (np.floating, np.integer, np.bool_)):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, Mapping):
        return {str(k): _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return v


def write_winner_files(spec: Spec, summary: Mapping[str, Any], out_dir: Path) -> list[str]:
    """winner.json and winner.toml in ``out_dir``, each written atomically (labbench.fileio).

    winner.toml never holds a storage password (``Spec.to_toml`` leaves it out): the database
    client takes it from PGPASSWORD or ~/.pgpass."""
    from labbench.fileio import write_text
    from labbench.search.storage import mask_password_text

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    json_path, toml_path = out_dir / "winner.json", out_dir / "winner.toml"
    write_text(json_path, mask_password_text(
        json.dumps(_plain(summary), indent=2, allow_nan=False)) + "\n")
    fixed = dataclasses.replace(winner_spec(spec, summary["settings"]), source_path=str(toml_path))
    which = "The settings you picked" if summary.get("picked") else "The winning settings"
    header = (f"# {which} of search {summary['study_name']!r} (trial "
              f"{summary['trial_number']}), every setting fixed.\n"
              f"# CV {summary['metric']} {fmt(summary['cv_mean'])} ± {fmt(summary['cv_std'])}, "
              f"hold-out {fmt(summary['holdout_score'])}. Run it as-is: labbench run winner.toml\n")
    if spec.search.storage and without_password(spec.search.storage) != spec.search.storage:
        header += ("# The storage password is not written here; the database client reads it "
                   "from PGPASSWORD or ~/.pgpass.\n")
    write_text(toml_path, mask_password_text(header + fixed.to_toml(out_dir.resolve())))
    return [str(json_path), str(toml_path)]
