"""The window's only door into the core: names, labels and the numbers ``insight`` computes.

Everything here calls ``labbench.data`` / ``labbench.nets`` / ``labbench.search``; the window never
computes a score, a best-so-far or an importance itself.
"""

from __future__ import annotations

from typing import Any, Iterable, Mapping, Sequence

from labbench.gui.trialbook import TrialBook, TrialRecord, TrialSnapshot
from labbench.search import ranking, states



# ---------------------------------------------------------------------------------- names
def metric_label(name: str) -> str:
    try:
        from labbench.nets.metrics import METRICS

        info = METRICS.get(name)
        return info.label if info is not None else name
    except ImportError:
        return name.replace("_", " ")


def metric_direction(name: str) -> str:
    from labbench.nets.metrics import METRICS

    return METRICS[name].direction


def metrics_for(task: str | None) -> list[str]:
    from labbench.nets.metrics import METRICS

    return [n for n, info in METRICS.items() if task is None or task in info.tasks]


def default_metric(task: str) -> str:
    from labbench.nets.metrics import default_metric as dm

    return dm(task)


def param_label(name: str) -> str:
    """A plain label for an Optuna parameter name ("units_2" → "Units, layer 2")."""
    from labbench.search.space import L2_SWITCH, SETTINGS

    if name.startswith("units_"):
        return f"Units, layer {name.split('_', 1)[1]}"
    if name == L2_SWITCH:
        return "L2 penalty on"
    info = SETTINGS.get(name)
    if info is None:            # another family's setting (the maps' grid rows, neighbourhood ...)
        info = family_setting(name)
    return info.label if info is not None else name.replace("_", " ")


def family_setting(name: str):
    """The ``SettingInfo`` of ``name`` in any registered family's table (network first), or None."""
    from labbench.families import family_names, get_family

    for fam in family_names():
        info = get_family(fam).settings.get(name)
        if info is not None:
            return info
    return None


def loss_label(family: str | None) -> str:
    """What a family's per-epoch validation loss is, for the learning-curve axis (MAPS.md: the
    held-out quantisation error for the prototype families, the held-out reconstruction error for
    Hebbian features; short, it is an axis title)."""
    if family in ("som", "competitive", "neural_gas"):
        return "quantisation error"
    if family == "hebbian":
        return "reconstruction error"
    return "validation loss"


def searched_names(book: TrialBook) -> list[str]:
    if book.searched:
        return list(book.searched)
    seen: dict[str, None] = {}
    for rec in book.ordered():
        for k in rec.params:
            seen.setdefault(k, None)
    return list(seen)


# ---------------------------------------------------------------------------------- insight
def best_so_far(done: Sequence[TrialRecord], direction: str) -> tuple[list[float], list[float]]:
    """Trial numbers and the running best of the finished trials (``insight.best_so_far``)."""
    if not done:
        return [], []
    from labbench.search import insight

    pairs = insight.best_so_far([(r.number, r.value) for r in done], direction)
    return [float(n) for n, _ in pairs], [float(b) for _, b in pairs]


def importance_of(url: str, name: str) -> tuple[dict[str, float], str]:
    """``importance`` of a stored search, opened here (runs in a helper process)."""
    import optuna

    from labbench.search.storage import quiet_optuna_warnings
    from labbench.search.strategy import route_optuna_logging

    route_optuna_logging()
    quiet_optuna_warnings()
    from labbench.search.stored import read_storage

    return importance(optuna.load_study(study_name=name, storage=read_storage(url)))


def importance(study) -> tuple[dict[str, float], str]:
    """(name → share, message) for a study, from ``insight.param_importance`` (off the GUI thread)."""
    from labbench.search import insight

    out = insight.param_importance(study)
    return dict(out.get("values") or {}), str(out.get("message") or "")


# ---------------------------------------------------------------------------------- storage
def snapshot(trial, sign: float = 1.0) -> TrialSnapshot:
    """An Optuna FrozenTrial as plain data (called off the GUI thread).

    ``sign``: the study's ``intermediate_sign`` (the runner reports ``sign × loss`` per epoch so
    the pruner always minimises); the finished trial's ``curve`` attr holds the plain loss.
    """
    attrs = trial.user_attrs
    state = states.trial_key(trial)            # the one table of states (cancelled included)
    reason = str(attrs.get("end_reason", "") or "")
    curve = attrs.get("curve") or {}
    if curve.get("epoch") and curve.get("val_loss"):
        epochs = tuple(int(e) for e in curve["epoch"])
        loss = tuple(_f(v) for v in curve["val_loss"])
    else:
        steps = sorted(trial.intermediate_values)
        epochs = tuple(int(s) for s in steps)
        loss = tuple(sign * _f(trial.intermediate_values[s]) for s in steps)
    settings = attrs.get("settings") or {}
    return TrialSnapshot(
        number=trial.number,
        state=state,
        value=_f(trial.value) if trial.value is not None and state == "complete" else None,
        params=dict(trial.params),
        settings=dict(settings),
        epochs=epochs,
        val_loss=loss,
        fold_scores=tuple(_f(v) for v in attrs.get("fold_scores", []) or []),
        cv_std=_f(attrs["cv_std"]) if attrs.get("cv_std") is not None else None,
        duration_s=float(attrs.get("duration_s", 0.0) or 0.0),
        reason=reason,
        epochs_total=int(settings.get("epochs", 0) or 0),
        worker=str(attrs.get("worker", "") or ""),
    )


def _f(v: Any) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def read_study(study) -> tuple[list[TrialSnapshot], int | None, Mapping[str, Any]]:
    """Every trial of a study as snapshots, the best trial's number, the study attrs."""
    trials = study.get_trials(deepcopy=False)
    attrs = dict(study.user_attrs)
    sign = float(attrs.get("intermediate_sign", 1.0) or 1.0)
    snaps = [snapshot(t, sign) for t in trials]
    best = ranking.best_trial(trials, attrs.get("direction") or study.direction.name.lower())
    return snaps, (None if best is None else best.number), attrs


def changed_only(snaps: Iterable[TrialSnapshot], seen: dict[int, tuple]) -> list[TrialSnapshot]:
    out = []
    for s in snaps:
        key = (s.state, s.value, len(s.epochs))
        if seen.get(s.number) != key:
            seen[s.number] = key
            out.append(s)
    return out
