"""Several trials of one shape trained as one stack in a worker (``[search] together``).

The controller asks a population of trials at once and groups them by the family's
``together_key`` (the network: layer sizes, activation, optimizer, batch size, epochs, patience,
initial weights); a group of one runs ``objective.run_trial`` as always. A larger group trains as
one ``StackTrainer`` with each trial's own learning rate, L2 and momentum and the same fold seeds
a trial alone gets (``member_seeds``), one stopping group per trial, so every trial keeps its own
epoch and ends with the numbers of its own run (tests/search/test_together.py). Each trial still
reports its own epochs and ends on its own: pruned or cancelled (``should_stop``), out of
patience, or diverged; its members then leave the stack and the others train on.

``together_count(spec)`` is how many trials the controller asks at once: 1 for a family that
trains one configuration per stack (the maps), else ``[search] together`` when given, else
``AUTO`` when the space fixes every setting of the shape (then every asked trial fits one
group), else 1 (a population of searched shapes rarely shares one, and asking several trials
before telling any costs the sampler information).
"""

from __future__ import annotations

import time
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from labbench.search import objective
from labbench.search.objective import EpochValues, _mean, member_seeds, one_line

#: Trials asked at once when the space fixes the shape. Measured (benchmarks/bench_engine.py,
#: W1): 4 configurations × 5 folds stacked cost 0.21 × scikit-learn against 0.34 × as four
#: trials; 16 cost 0.075 each, more than 4 do (0.052 each): the stack outgrows the caches.
AUTO = 4


def together_count(spec: Any) -> int:
    """Trials the controller asks at once (see the module text)."""
    family, space = spec.space.model, spec.space
    if not family.shape_settings:          # a family that trains one configuration per stack
        return 1
    given = getattr(spec.search, "together", None)
    if given is not None:
        return int(given)
    if any(space.searched(name) for name in family.shape_settings):
        return 1
    from labbench.search.limits import MEMORY_SHARE, memory_estimate, physical_memory

    ram = physical_memory()
    if ram and memory_estimate(spec)["trial"] * AUTO > MEMORY_SHARE * ram / 2:
        return 1                       # large networks: stacking them would crowd the memory
    return AUTO


def groups_of(family: Any, trials: Sequence[tuple[int, Mapping[str, Any]]]) -> list[list]:
    """The asked trials in groups of equal ``together_key``, in the order of their first trial
    (a trial whose key is None is a group of its own)."""
    groups: dict[Any, list] = {}
    out: list[list] = []
    for number, settings in trials:
        key = family.together_key(settings)
        if key is None:
            out.append([(number, settings)])
        elif key in groups:
            groups[key].append((number, settings))
        else:
            groups[key] = [(number, settings)]
            out.append(groups[key])
    return out


def run_together(prepared: Any, trials: Sequence[tuple[int, Mapping[str, Any]]], *, seed: int,
                 on_epoch: Callable[[int, EpochValues], None],
                 should_stop: Callable[[int], bool],
                 on_done: Callable[[int, dict[str, Any]], None],
                 dtype: str = "float32") -> None:
    """Train these trials (one shape) as one stack; ``on_done(number, result)`` once per trial,
    with the result dict of ``objective.run_trial`` plus ``cpu_s`` (this process's CPU time,
    shared evenly among the trials training in each epoch)."""
    if len(trials) == 1:
        number, settings = trials[0]
        cpu = time.process_time()
        result = objective.run_trial(prepared, settings, seed=seed, dtype=dtype,
                                     on_epoch=lambda values: on_epoch(number, values),
                                     should_stop=lambda: should_stop(number))
        result["cpu_s"] = time.process_time() - cpu
        on_done(number, result)
        return
    _Together(prepared, trials, seed, dtype).run(on_epoch, should_stop, on_done)


class _Together:
    def __init__(self, prepared, trials, seed, dtype):
        folds = prepared.fold_arrays
        k = len(folds.X_train)
        self.numbers = [int(number) for number, _ in trials]
        self.trainer = prepared.model.stack_together(
            [settings for _, settings in trials], prepared.task, prepared.n_outputs,
            folds.X_train, folds.y_train, folds.X_val, folds.y_val,
            seeds=member_seeds(seed, k), metric=prepared.metric,
            target_inverse=folds.target_inverse, dtype=dtype)
        self.live = dict(enumerate(self.numbers))        # group label -> trial number
        self.cpu = dict.fromkeys(self.live, 0.0)
        self.started = time.perf_counter()

    def _rows(self, label: int) -> np.ndarray:
        return np.flatnonzero(np.asarray(self.trainer.groups) == label)

    def _share_cpu(self) -> None:
        now = time.process_time()
        share = (now - self._cpu_at) / max(1, len(self.live))
        for label in self.live:
            self.cpu[label] += share
        self._cpu_at = now

    def _result(self, label: int, end: str, *, reason: str = "", epochs_run: int | None = None):
        trainer = self.trainer
        rows = self._rows(label)
        out: dict[str, Any] = {"end": end, "reason": reason, "fold_scores": [],
                               "epochs_run": int(trainer.epoch if epochs_run is None else epochs_run),
                               "duration_s": time.perf_counter() - self.started,
                               "cpu_s": self.cpu[label]}
        if end != "diverged":
            best = trainer.best_val_metric
            out["fold_scores"] = [float(v) for v in best[rows]]
            out["best_epoch"] = int(trainer.best_epoch[rows[0]])
        return out

    def run(self, on_epoch, should_stop, on_done) -> None:
        trainer = self.trainer
        self._cpu_at = time.process_time()

        def diverged(label, error) -> None:
            self._share_cpu()
            number = self.live.pop(label)
            on_done(number, self._result(label, "diverged", reason=one_line(str(error)),
                                         epochs_run=getattr(error, "epoch", None) or trainer.epoch))

        def each_epoch(scores) -> bool:
            self._share_cpu()
            ended = []
            for label, number in self.live.items():
                rows = self._rows(label)
                on_epoch(number, (int(scores.epoch), _mean(scores.train_loss[rows]),
                                  _mean(scores.val_loss[rows]), _mean(scores.val_metric[rows])))
                if should_stop(number):
                    ended.append((label, "stopped"))
                elif trainer.group_done(label):
                    ended.append((label, "complete"))        # its patience ran out
            if not ended:
                return True
            if any(end == "stopped" for _, end in ended):
                trainer.complete_kept_metric(scores)       # no patience: a skipped metric is kept
            for label, end in ended:
                on_done(self.live.pop(label), self._result(label, end))
            if not self.live:
                return False
            trainer.drop_groups(label for label, _ in ended)
            return True

        trainer.run(on_epoch=each_epoch, on_diverged=diverged)
        self._share_cpu()
        for label in list(self.live):               # every epoch ran
            on_done(self.live.pop(label), self._result(label, "complete"))
