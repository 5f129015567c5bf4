"""How the search picks and stops trials: the Optuna sampler and pruner a spec asks for.

Pruners see one value per epoch: the fold-mean validation loss (step = epoch, 1-based). Optuna's
pruners compare intermediate values in the study's direction, and a loss is always "lower is
better", so for a study that maximises its metric the runner reports the loss with its sign
flipped (``intermediate_sign``); the ``curve`` trial attr always holds the plain loss.

Also here: routing Optuna's log lines into labbench's logging.
"""

from __future__ import annotations

import importlib.util
import logging
import math
import time
from typing import Any

from labbench.errors import SpecError
from labbench.search.optuna_adapter import grid_points_started, prune_decision
from labbench.search.space import Choices, Fixed, IntRange
from labbench.search.storage import quiet_optuna_warnings

# optuna is imported inside the functions: ≈1 s (python -X importtime); the spec reader and the
# window use the warm-up rules here without a search.

log = logging.getLogger("labbench.search.strategy")


def intermediate_sign(direction: str) -> float:
    """+1 when the study minimises, -1 when it maximises (see the module text)."""
    return -1.0 if direction == "maximize" else 1.0


def _source(spec: Any) -> str:
    return f"{spec.source_path}: " if getattr(spec, "source_path", None) else ""


def make_sampler(spec: Any):
    """The sampler of ``[search] sampler``, seeded with ``evaluation.seed``."""
    import optuna

    name = spec.search.sampler
    seed = int(spec.evaluation.seed)
    if name == "tpe":
        return optuna.samplers.TPESampler(seed=seed)
    if name == "random":
        return optuna.samplers.RandomSampler(seed=seed)
    if name == "grid":
        return _grid_sampler(spec.space.grid(), seed)
    if name == "qmc":
        _needs(spec, "scipy", "qmc")
        return optuna.samplers.QMCSampler(seed=seed, scramble=True, warn_independent_sampling=False)
    if name == "cmaes":
        _needs(spec, "cmaes", "cmaes")
        return optuna.samplers.CmaEsSampler(seed=seed, warn_independent_sampling=False)
    raise SpecError(f"{_source(spec)}search.sampler: {name!r} is not known; use tpe, random, grid, "
                    "qmc or cmaes")


def _grid_sampler(grid: dict, seed: int):
    """Optuna's grid sampler calls ``study.stop()`` once the grid is used up, which raises outside
    ``optimize`` (and leaves the trial RUNNING); the runner checks ``is_exhausted`` before every
    ask instead, so that call is dropped."""
    import optuna

    class AskTellGridSampler(optuna.samplers.GridSampler):
        def after_trial(self, study, trial, state, values) -> None:
            return None

        def all_started(self, study) -> bool:
            """Every grid point has a trial (running or finished). Optuna's ``is_exhausted``
            counts running points as open, which would repeat a point queued behind another."""
            return grid_points_started(self, study)

    return AskTellGridSampler(grid, seed=seed)


def _needs(spec: Any, module: str, sampler: str) -> None:
    if importlib.util.find_spec(module) is None:
        raise SpecError(f"{_source(spec)}search.sampler: {sampler!r} needs the Python package "
                        f"'{module}' (pip install {module}), or choose tpe or random")


def epoch_range(spec: Any) -> tuple[int, int]:
    """(fewest, most) epochs a trial of this space can train."""
    if "epochs" not in spec.space:        # a family without epochs trains one (families.base)
        return 1, 1
    s = spec.space["epochs"]
    if isinstance(s, Fixed):
        return int(s.value), int(s.value)
    if isinstance(s, Choices):
        return int(min(s.values)), int(max(s.values))
    if isinstance(s, IntRange):
        return int(s.low), int(s.high)
    raise AssertionError(f"epochs cannot be {s!r}")


#: Share of a trial's own maximum epochs that it trains before any pruner may judge it, and the
#: fewest epochs in any case. Chosen by measurement (benchmarks/bench_quality.py, see the README's
#: quality table): judging at 30 % of the *shortest* trial (3 epochs on a 10-200 range) stopped the
#: slow starters (small learning rates, many units), which are often the best, and cost accuracy.
WARMUP_SHARE = 0.5
MIN_WARMUP = 5
#: Complete trials the median pruner waits for before it compares anything.
PRUNER_STARTUP_TRIALS = 10


def trial_warmup(max_epochs: int) -> int:
    """Epochs a trial with at most ``max_epochs`` epochs trains before it may be pruned."""
    return max(MIN_WARMUP, math.ceil(WARMUP_SHARE * int(max_epochs)))


def warmup_epochs(spec: Any) -> int:
    """The shortest warm-up of any trial of this space (the warm-up of its fewest epochs)."""
    fewest, _ = epoch_range(spec)
    return trial_warmup(fewest)


def make_pruner(spec: Any):
    """The pruner of ``[search] pruner``; step = epoch (1-based), value = fold-mean val loss.

    Each trial's own warm-up (``trial_warmup`` of its maximum epochs) is enforced by
    ``PruneCheck``; the pruners get the shortest one so that they never undercut it."""
    import optuna

    name = spec.search.pruner
    warmup = warmup_epochs(spec)
    _, most = epoch_range(spec)
    if name == "none":
        return optuna.pruners.NopPruner()
    if name == "median":
        return optuna.pruners.MedianPruner(n_startup_trials=PRUNER_STARTUP_TRIALS,
                                           n_warmup_steps=warmup)
    if name == "halving":
        return optuna.pruners.SuccessiveHalvingPruner(min_resource=warmup, reduction_factor=3)
    if name == "hyperband":
        return optuna.pruners.HyperbandPruner(min_resource=warmup, max_resource=max(most, warmup + 1),
                                              reduction_factor=3)
    raise SpecError(f"{_source(spec)}search.pruner: {name!r} is not known; use none, median, "
                    "halving or hyperband")


class PruneCheck:
    """``should_prune`` for the controller, without a database round trip per epoch.

    Optuna's ``trial.should_prune()`` re-reads every unfinished trial of the study from storage
    on each call (≈5 ms with SQLite), once per epoch. Here the median pruner sees a cached list
    of the COMPLETE trials instead: it is re-read after each trial this run tells (so a search
    of one process decides exactly as Optuna would) and otherwise at most every ``refresh_s``
    seconds (trials other processes finish on a shared database). Steps before the trial's own
    warm-up (``trial_warmup`` of its maximum epochs, when the caller gives them; else the
    shortest warm-up of the space) are never checked. The other pruners take Optuna's own path.
    """

    def __init__(self, study, pruner, warmup: int, refresh_s: float = 10.0):
        import optuna

        self.study, self.pruner, self.warmup, self.refresh_s = study, pruner, warmup, refresh_s
        self.enabled = not isinstance(pruner, optuna.pruners.NopPruner)
        self.cached = isinstance(pruner, optuna.pruners.PercentilePruner)
        self._complete: list | None = None
        self._read_at = 0.0

    def invalidate(self) -> None:
        self._complete = None

    def get_trials(self, deepcopy: bool = False, states=None):
        from optuna.trial import TrialState

        if states is not None and tuple(states) == (TrialState.COMPLETE,) and not deepcopy:
            if self._complete is None or time.monotonic() - self._read_at > self.refresh_s:
                self._complete = self.study.get_trials(deepcopy=False, states=states)
                self._read_at = time.monotonic()
            return self._complete
        return self.study.get_trials(deepcopy=deepcopy, states=states)

    def __getattr__(self, name: str):          # direction, study_name, the storage ...
        return getattr(self.study, name)

    def __call__(self, trial, epoch: int, max_epochs: int | None = None) -> bool:
        warmup = self.warmup if max_epochs is None else max(self.warmup, trial_warmup(max_epochs))
        if not self.enabled or epoch < warmup:
            return False
        if self.cached:
            return prune_decision(self.pruner, self, trial)
        return bool(trial.should_prune())


# --------------------------------------------------------------------------------------------
# Optuna's logging


def route_optuna_logging() -> None:
    """Optuna's log lines go through the "optuna" logger into labbench's handlers.

    Optuna's own stderr handler is removed and the logger propagates; its level follows the
    "labbench" logger (quiet by default: warnings only; ``-v`` shows info, ``-vv`` debug) and its
    records are re-emitted under "labbench.optuna" so the handler the command line (or the window)
    attached to "labbench" receives them.
    """
    import optuna

    optuna.logging.disable_default_handler()
    optuna.logging.enable_propagation()
    ours = logging.getLogger("labbench")
    level = ours.getEffectiveLevel()
    optuna_logger = logging.getLogger("optuna")
    optuna_logger.setLevel(max(level, logging.DEBUG))
    if not any(isinstance(h, _ToLabbench) for h in optuna_logger.handlers):
        optuna_logger.addHandler(_ToLabbench())
    quiet_optuna_warnings()


class _ToLabbench(logging.Handler):
    """Re-emits Optuna's records under "labbench.optuna" (one handler chain for everything)."""

    def emit(self, record: logging.LogRecord) -> None:
        target = logging.getLogger("labbench.optuna")
        if target.isEnabledFor(record.levelno):
            target.handle(record)
