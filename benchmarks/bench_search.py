"""Search overhead, its phases, and two workers against one (issue 13), as medians of rounds.

1. Overhead: the shipped orchard demo spec (TPE, median pruner, one worker, SQLite on disk) with
   ``--trials`` trials (default 200). In each round the search runs, then (order alternating)
   the same settings are trained directly in this process, one after another, each for exactly
   the epochs it trained in the search (pruned trials stop where they stopped): no Optuna, no
   storage, no processes. Overhead = (first trial start → last trial end) / reference − 1, the
   time outside training as a share of the training time; goal ≤ 10 % (stretch 5 %). The
   reference runs minutes apart from the search, and this machine's speed moves by up to ±35 %
   within minutes (the same trainings), so the same runs are also measured by the worker's own
   clock: span / (the wall time the worker spent in ``run_trial`` on the epochs the search
   used) − 1. That counts the worker's idle time between trials, the hand-over and the epochs a
   pruned trial trains after the prune decision as overhead, and nothing of the machine's drift;
   the line below it prints the drift (reference / the worker's time for the same trials). Worker
   start-up (spawn, imports, preparing the folds once) is paid once per run and reported apart.
   The controller's own time is split into phases by wrapping the calls it makes (exclusive
   time, so a storage read inside the sampler counts as a read): suggestion (the sampler in
   ``study.ask``), storage reads (every read of the trial list or one trial, and the orphan
   check), writes (claim, user attrs, intermediate values, tell), prune checks and hand-off
   (pipes to the worker and handling its messages). ``--workload second`` adds a workload of
   ~1 s trials (goal ≤ 2 %).
2. Two workers vs one over a whole 40-trial run (``--scaling-trials``) of ~1 s trials (digits,
   random sampler, no pruning, no early stopping), rounds alternating 1 and 2 workers;
   goal ≥ 1.7 ×. Beside it the machine's own ceiling: the same trainings in two plain
   processes vs one.
3. Trials of one shape trained together (``[search] together``) against one at a time: whole
   runs of ``--together-trials`` trials on two workloads (digits, 64 relu units; the orchard
   demo, 32 relu units; batch 32, 30 epochs, learning rate and L2 searched, random sampler: both
   runs train the very same settings), rounds alternating; the ratio is one at a time /
   together (above 1: together is faster). No goal of its own: the engine's "4 configurations" rows of bench_engine.py hold
   the issue's goals for stacked configurations.

The machine may be shared with other jobs: the load average is printed with every line.

    python benchmarks/bench_search.py [--rounds 3] [--trials 200] [--only overhead|scaling|together]
"""

from __future__ import annotations

import argparse
import collections
import functools
import os
import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from paired import Ratio, load_avg  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def write_table(folder: Path, which: str) -> Path:
    if which == "orchard":                 # the project's own (invented) demo set
        return Path(shutil.copy(ROOT / "demo_sets" / "orchard.csv", folder / "orchard.csv"))
    from sklearn import datasets

    frame = datasets.load_digits(as_frame=True).frame
    frame["target"] = frame["target"].map(lambda v: f"c{v}")
    path = folder / f"{which}.csv"
    frame.to_csv(path, index=False)
    return path


def orchard_spec(folder: Path, trials: int) -> Path:
    write_table(folder, "orchard")
    text = (ROOT / "demo_sets" / "orchard.toml").read_text(encoding="utf-8")
    text = text.replace("trials = 20", f"trials = {trials}")
    path = folder / "orchard.toml"
    path.write_text(text, encoding="utf-8")
    return path


def digits_spec(folder: Path, name: str, *, trials: int, epochs: int, sampler="random",
                pruner="none", space: str | None = None, search: str = "") -> Path:
    csv = write_table(folder, "digits")
    text = f"""
[data]
path = "{csv.name}"
target = "target"
[evaluation]
folds = 5
holdout = 0.2
seed = 11
seed_spread = 0
[search]
trials = {trials}
sampler = "{sampler}"
pruner = "{pruner}"
workers = 1
{search}
[space]
""" + (space or f"""
learning_rate = {{ low = 0.001, high = 0.05, log = true }}
hidden_layers = 1
hidden_units = {{ low = 96, high = 128 }}
epochs = {epochs}
patience = 0
batch_size = 32
activation = {{ choices = ["relu", "tanh"] }}
""")
    path = folder / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    return path


class Clock:
    """When the first trial started and the last one ended (event times)."""

    def __init__(self):
        self.first_start = self.last_end = None
        self.trials = 0

    def __call__(self, event):
        from labbench.search import events as ev

        now = time.perf_counter()
        if isinstance(event, ev.TrialStarted) and self.first_start is None:
            self.first_start = now
        elif isinstance(event, ev.TrialEnded):
            self.trials += 1
            self.last_end = now


class Phases:
    """Exclusive time of the controller's calls, by phase (nested calls are subtracted)."""

    def __init__(self):
        self.total = collections.Counter()
        self.calls = collections.Counter()
        self._stack: list[list[float]] = []
        self._thread = None
        self._undo = []

    def wrap(self, owner, name: str, phase: str) -> None:
        original = getattr(owner, name)
        phases = self

        @functools.wraps(original)
        def timed(*args, **kwargs):
            if threading.get_ident() != phases._thread:      # the heartbeat thread: not counted
                return original(*args, **kwargs)
            phases._stack.append([0.0])
            start = time.perf_counter()
            try:
                return original(*args, **kwargs)
            finally:
                spent = time.perf_counter() - start
                inner = phases._stack.pop()[0]
                phases.total[phase] += spent - inner
                phases.calls[phase] += 1
                if phases._stack:
                    phases._stack[-1][0] += spent

        setattr(owner, name, timed)
        self._undo.append((owner, name, original))

    def _statement(self, *args, **kwargs) -> None:
        if threading.get_ident() == self._thread:
            self.calls["SQL statements"] += 1

    def install(self) -> None:
        import optuna
        import sqlalchemy
        from optuna.storages import RDBStorage

        from labbench.search import optuna_adapter, orphans, runner, strategy, trial_end, workers

        self._thread = threading.get_ident()
        # database round trips of the controller's thread (a count the machine's load cannot
        # inflate, unlike the times)
        sqlalchemy.event.listen(sqlalchemy.engine.Engine, "before_cursor_execute", self._statement)
        self._undo.append((None, "sql", self._statement))
        # writes collected by optuna_adapter.one_transaction run when its block ends
        make = optuna_adapter.starting_storage_class
        phases = self

        def starting(*args, **kwargs):
            cls = make(*args, **kwargs)
            if hasattr(cls, "flush"):
                phases.wrap(cls, "flush", "writes")
            return cls

        for module in (optuna_adapter, orphans):
            if hasattr(module, "starting_storage_class"):
                self._undo.append((module, "starting_storage_class", make))
                setattr(module, "starting_storage_class", starting)
        self.wrap(optuna.study.Study, "ask", "suggestion")
        self.wrap(optuna.study.Study, "tell", "writes")
        self.wrap(optuna.study.Study, "get_trials", "storage reads")
        # Optuna wraps an RDB storage in its (private) cache class; time that class's reads too.
        # A benchmark may; labbench's own modules reach private Optuna names only through
        # labbench.search.optuna_adapter.
        from optuna.storages._cached_storage import _CachedStorage
        for cls in (RDBStorage, _CachedStorage):
            for name in ("get_all_trials", "get_trial", "get_study_user_attrs",
                         "get_study_system_attrs", "get_study_directions"):
                if name in vars(cls):
                    self.wrap(cls, name, "storage reads")
        self.wrap(runner, "reclaim_orphans", "storage reads")
        self.wrap(orphans, "claim", "writes")
        self.wrap(runner, "write_user_attrs", "writes")
        self.wrap(trial_end, "write_user_attrs", "writes")
        self.wrap(trial_end, "write_intermediate_values", "writes")
        self.wrap(strategy.PruneCheck, "__call__", "prune checks")
        self.wrap(workers.WorkerPool, "assign", "hand-off")
        self.wrap(runner.SearchRunner, "_handle", "hand-off")

    def uninstall(self) -> None:
        import sqlalchemy

        for owner, name, original in reversed(self._undo):
            if owner is None:
                sqlalchemy.event.remove(sqlalchemy.engine.Engine, "before_cursor_execute", original)
            else:
                setattr(owner, name, original)
        self._undo.clear()


class WorkerTime:
    """The worker's own clock: per trial, the wall time it spent in ``run_trial`` (building the
    stack, training, scoring) and the epochs it trained, from the result it sends; of those, the
    share the search used (a pruned trial trains on until the stop reaches it: the epochs after
    the prune decision are counted as overhead, not training)."""

    def __init__(self):
        self.used = 0.0           # worker seconds spent on epochs the search used
        self.worked = 0.0         # all worker seconds in run_trial
        self._undo = None

    def install(self) -> None:
        from labbench.search.trial_end import TrialEndings

        original = TrialEndings._done
        clock = self

        @functools.wraps(original)
        def done(runner, flight, result):
            if runner.together == 1:
                seconds, trained = float(result["duration_s"]), int(result["epochs_run"])
                used = flight.stop_epoch if flight.stopping == "pruned" else trained
                clock.worked += seconds
                clock.used += seconds * min(1.0, used / trained) if trained else seconds
            return original(runner, flight, result)

        TrialEndings._done = done
        self._undo = (TrialEndings, original)

    def uninstall(self) -> None:
        owner, original = self._undo
        owner._done = original


def search(spec_path: Path, workers: int, phases: Phases | None = None,
           worker_time: WorkerTime | None = None):
    from labbench.search.runner import SearchRunner
    from labbench.search.spec import load_spec

    clock = Clock()
    runner = SearchRunner(load_spec(spec_path), clock, workers=workers, fresh=True)
    hooks = [h for h in (phases, worker_time) if h is not None]
    for hook in hooks:
        hook.install()
    try:
        t0 = clock.t0 = time.perf_counter()
        outcome = runner.run(threading.Event())
        total = time.perf_counter() - t0
    finally:
        for hook in reversed(hooks):
            hook.uninstall()
    return runner, clock, outcome, total


def stored_work(runner) -> list[tuple[dict, int]]:
    """(settings, epochs it trained) of every trial the search trained."""
    out = []
    for t in runner.study.get_trials(deepcopy=False):
        if "settings" in t.user_attrs and t.user_attrs.get("epochs_run"):
            out.append((t.user_attrs["settings"], int(t.user_attrs["epochs_run"])))
    return out


def train_directly(prepared, work, seed: int) -> float:
    """Wall time of training ``work`` in this process on one BLAS thread, nothing else."""
    from threadpoolctl import threadpool_limits

    from labbench.search.objective import run_trial

    with threadpool_limits(1):
        t0 = time.perf_counter()
        for settings, epochs in work:
            seen = []
            run_trial(prepared, settings, seed=seed, on_epoch=seen.append,
                      should_stop=lambda: len(seen) >= epochs)
        return time.perf_counter() - t0


def overhead(spec: Path, rounds: int, label: str, goal: float, seed: int) -> None:
    ratio = Ratio(f"overhead, {label}: time outside training / training", goal)
    in_run = Ratio("  the same runs by the worker's clock (span / its training − 1)", goal)
    drift = []                          # the reference against the worker's own training time
    per_trial = collections.Counter()
    counts = collections.Counter()
    startups, n_trials = [], 0
    for r in range(rounds):
        phases, worker = Phases(), WorkerTime()
        runner = reference = None

        def run_search():
            nonlocal runner
            runner, clock, _, total = search(spec, 1, phases, worker)
            return clock

        if r % 2 == 0:
            clock = run_search()
            work = stored_work(runner)
            reference = train_directly(runner.prepared, work, seed)
        else:                                # the reference first needs the settings: take
            prev = work                      # those of the previous round (same spec, same seed)
            reference = train_directly(prepared, prev, seed)
            clock = run_search()
            work = stored_work(runner)
            if work != prev:
                reference = train_directly(runner.prepared, work, seed)
        prepared = runner.prepared
        span = clock.last_end - clock.first_start
        ratio.add(span / reference - 1.0)
        if worker.used > 0:
            in_run.add(span / worker.used - 1.0)
            drift.append(reference / worker.used)
        startups.append(clock.first_start - clock.t0)
        n_trials = len(work)
        for phase, seconds in phases.total.items():
            per_trial[phase] += seconds / n_trials / rounds
        for phase, calls in phases.calls.items():
            counts[phase] += calls / n_trials / rounds
        mine = (f"; by the worker's clock: it trained {worker.worked:.2f} s, the search used "
                f"{worker.used:.2f} s of it, overhead {100 * in_run.values[-1]:.1f} %"
                if worker.used > 0 else "")
        print(f"    round {r + 1}: {n_trials} trials, search span {span:.2f} s, reference "
              f"{reference:.2f} s ({1000 * reference / n_trials:.0f} ms per trial), overhead "
              f"{100 * ratio.values[-1]:.1f} %{mine}   ({load_avg()})", flush=True)
    print(ratio.line(70))
    if in_run.values:
        print(in_run.line(70))
        print(f"    the reference / the worker's training time of the same trials: "
              f"{', '.join(f'{d:.2f}' for d in drift)} (the machine's speed between the two runs)")
    print(f"    worker start-up (once per run): median {sorted(startups)[len(startups) // 2]:.2f} s")
    print("    controller time per trial, by phase (mean over rounds; calls per trial):")
    for phase in ("suggestion", "storage reads", "writes", "prune checks", "hand-off"):
        print(f"      {phase:<14s} {1000 * per_trial[phase]:7.2f} ms   ({counts[phase]:.1f} calls)")
    print(f"      {'total':<14s} {1000 * sum(per_trial.values()):7.2f} ms")
    print(f"    database statements of the controller per trial: {counts['SQL statements']:.1f}")


def _train_all(spec_path: str, work) -> float:
    import logging

    from labbench.search.prepare import prepare
    from labbench.search.spec import load_spec

    logging.getLogger("labbench").setLevel(logging.ERROR)
    prepared = prepare(load_spec(spec_path))
    return train_directly(prepared, work, 11)


def scaling(folder: Path, trials: int, epochs: int, rounds: int) -> None:
    spec = digits_spec(folder, "scaling", trials=trials, epochs=epochs)
    print(f"\n[2] two workers vs one: whole runs of {trials} trials, digits (1,437 training rows × 61), "
          f"5 folds, {epochs} epochs, 96–128 units, random sampler, no pruning   ({load_avg()})")
    ratio = Ratio("two workers vs one, whole run (one / two)", 1.7, at_least=True)
    steady = Ratio("two workers vs one, first start → last end", None)
    ceiling = Ratio("the machine's ceiling: 2 plain processes vs 1", None)
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    work = None
    for r in range(rounds):
        times = {}
        spans = {}
        for workers in ((1, 2) if r % 2 == 0 else (2, 1)):
            runner, clock, _, total = search(spec, workers)
            times[workers], spans[workers] = total, clock.last_end - clock.first_start
            work = work or stored_work(runner)
            print(f"    round {r + 1}, {workers} worker(s): whole run {total:.2f} s, trials "
                  f"{spans[workers]:.2f} s   ({load_avg()})", flush=True)
        ratio.add(times[1] / times[2])
        steady.add(spans[1] / spans[2])
        with ctx.Pool(2) as pool:
            one = pool.apply(_train_all, (str(spec), work))
            two = max(pool.starmap(_train_all, [(str(spec), work[0::2]), (str(spec), work[1::2])]))
        ceiling.add(one / two)
        print(f"    round {r + 1}: plain processes, 1: {one:.2f} s, 2: {two:.2f} s   ({load_avg()})",
              flush=True)
    for line in (ratio, steady, ceiling):
        print(line.line(70))


ONE_SHAPE = """
learning_rate = { low = 0.001, high = 0.05, log = true }
l2 = { low = 1e-5, high = 1e-2, log = true }
hidden_layers = 1
hidden_units = 64
epochs = %d
patience = 0
batch_size = 32
activation = "relu"
"""


def orchard_one_shape(folder: Path, name: str, trials: int, epochs: int, search: str) -> Path:
    """The orchard demo with the network's shape fixed (learning rate and L2 searched)."""
    write_table(folder, "orchard")
    text = (ROOT / "demo_sets" / "orchard.toml").read_text(encoding="utf-8")
    head = text[:text.index("[space]")]
    head = head.replace("trials = 20", f"trials = {trials}").replace('sampler = "tpe"',
                                                                   'sampler = "random"')
    head = head.replace('pruner = "median"', 'pruner = "none"').replace("workers = 1",
                                                                     f"workers = 1\n{search}")
    path = folder / f"{name}.toml"
    path.write_text(head + "[space]\n" + ONE_SHAPE.replace("hidden_units = 64", "hidden_units = 32")
                    % epochs, encoding="utf-8")
    return path


def together(folder: Path, trials: int, epochs: int, rounds: int) -> None:
    from labbench.search.together import AUTO

    workloads = {
        "digits (1,437 training rows × 61, 10 classes, 64 relu units)":
            {n: digits_spec(folder, f"together{n}", trials=trials, epochs=epochs,
                            space=ONE_SHAPE % epochs, search=f"together = {n}") for n in (1, AUTO)},
        "orchard demo (1,200 training rows, 3 grades, 32 relu units)":
            {n: orchard_one_shape(folder, f"orchard{n}", trials, epochs, f"together = {n}")
             for n in (1, AUTO)},
    }
    for label, specs in workloads.items():
        print(f"\n[3] trials of one shape together ({AUTO}) vs one at a time: whole runs of "
              f"{trials} trials, {label}, 5 folds, batch 32, {epochs} epochs, random sampler, "
              f"no pruning, 1 worker   ({load_avg()})")
        whole = Ratio(f"one at a time / {AUTO} together, whole run", None)
        spans = Ratio(f"one at a time / {AUTO} together, first start → last end", None)
        for r in range(rounds):
            times, span, work = {}, {}, {}
            for n in ((1, AUTO) if r % 2 == 0 else (AUTO, 1)):
                runner, clock, _, total = search(specs[n], 1)
                times[n], span[n] = total, clock.last_end - clock.first_start
                work[n] = sorted(str(w) for w in stored_work(runner))
                print(f"    round {r + 1}, together = {n}: whole run {total:.2f} s, trials "
                      f"{span[n]:.2f} s   ({load_avg()})", flush=True)
            if work[1] != work[AUTO]:
                print("    (the two runs trained different settings: this round is not paired)")
                continue
            whole.add(times[1] / times[AUTO])
            spans.add(span[1] / span[AUTO])
        for line in (whole, spans):
            print(line.line(70))


def main() -> int:
    import logging

    logging.getLogger("labbench").setLevel(logging.ERROR)   # the digits' blank pixels warn
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--trials", type=int, default=200)
    parser.add_argument("--scaling-trials", type=int, default=40)
    parser.add_argument("--scaling-epochs", type=int, default=120,
                        help="epochs per trial of the scaling test (≈1 s trials on an idle machine)")
    parser.add_argument("--only", choices=("overhead", "scaling", "together"))
    parser.add_argument("--together-trials", type=int, default=40)
    parser.add_argument("--together-epochs", type=int, default=30)
    parser.add_argument("--workload", choices=("orchard", "second"), action="append",
                        help="overhead workload(s) (default: orchard)")
    args = parser.parse_args()
    import numpy  # noqa: F401  (loaded so threadpoolctl can see its BLAS)

    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores; {load_avg()}")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.only in (None, "overhead"):
            for workload in args.workload or ("orchard",):
                if workload == "orchard":
                    spec = orchard_spec(folder, args.trials)
                    print(f"\n[1] overhead: the orchard demo, {args.trials} trials, TPE, median pruner, "
                          f"SQLite, 1 worker   ({load_avg()})")
                    overhead(spec, args.rounds, "orchard demo", 0.10, seed=7)
                else:
                    spec = digits_spec(folder, "second", trials=max(10, args.trials // 10),
                                       epochs=args.scaling_epochs, sampler="tpe", pruner="median")
                    print(f"\n[1b] overhead: ≈1 s trials (digits, {args.scaling_epochs} epochs), TPE, "
                          f"median pruner   ({load_avg()})")
                    overhead(spec, args.rounds, "≈1 s trials", 0.02, seed=11)
        if args.only in (None, "scaling"):
            scaling(folder, args.scaling_trials, args.scaling_epochs, args.rounds)
        if args.only in (None, "together"):
            together(folder, args.together_trials, args.together_epochs, args.rounds)
    return 0


if __name__ == "__main__":
    sys.exit(main())
