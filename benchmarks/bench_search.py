"""Search overhead and worker scaling of ``labbench.search.runner`` (issue 3 §7).

1. Overhead: a 200-trial search (seeded TPE, no pruning, one worker, SQLite on disk) of a small
   workload (the orchard demo, ≈50 ms per trial), a tiny one (≈10 ms) and a medium one (≈250 ms),
   each against a reference measured in the same run: the same 200 settings trained directly
   in this process, one after another, with no Optuna, no storage and no processes. The overhead
   is (search wall time − reference) / reference; goal ≤ 5 %. Worker start-up (spawn, imports,
   preparing the folds once) is reported apart, since it is paid once per run, not per trial.
2. Throughput with 2 workers vs 1 on the same trials (random sampler, no pruning); goal ≥ 1.8 ×.

Data: the orchard demo set; scikit-learn's bundled breast-cancer set (569 rows, 30 features) for
the tiny workload and its digits set (1,797 rows, 64 features) for the heavier scaling test.

Run:  python benchmarks/bench_search.py [--trials 200] [--scaling-trials 24]
The machine may be shared: the load average is printed before and after each part.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import threading
import time
from pathlib import Path


def write_table(folder: Path, which: str) -> Path:
    if which == "orchard":                 # the project's own (invented) demo set
        import shutil

        demo = Path(__file__).resolve().parents[1] / "demo_sets" / "orchard.csv"
        return Path(shutil.copy(demo, folder / "orchard.csv"))
    from sklearn import datasets

    loader = {"cancer": datasets.load_breast_cancer, "digits": datasets.load_digits}[which]
    frame = loader(as_frame=True).frame
    frame["target"] = frame["target"].map(lambda v: f"c{v}")
    path = folder / f"{which}.csv"
    frame.to_csv(path, index=False)
    return path


def write_spec(folder: Path, csv: Path, *, name: str, sampler: str, epochs: int, trials: int,
               units: str, workers: int = 1) -> Path:
    target = "grade" if csv.stem == "orchard" else "target"
    ignore = 'ignore = ["crate_id"]' if csv.stem == "orchard" else ""
    text = f"""
[data]
path = "{csv.name}"
target = "{target}"
{ignore}
[evaluation]
folds = 5
holdout = 0.2
seed = 11
seed_spread = 0
[search]
trials = {trials}
sampler = "{sampler}"
pruner = "none"
workers = {workers}
[space]
learning_rate = {{ low = 0.001, high = 0.05, log = true }}
hidden_layers = 1
hidden_units = {units}
epochs = {epochs}
batch_size = {{ choices = [32, 64] }}
activation = {{ choices = ["relu", "tanh"] }}
"""
    path = folder / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    return path


class Clock:
    """Records when the first trial started and when the search ended (event times)."""

    def __init__(self):
        self.first_start = None
        self.ended = None
        self.trials = 0

    def __call__(self, event):
        from labbench.search import events as ev

        now = time.perf_counter()
        if isinstance(event, ev.TrialStarted) and self.first_start is None:
            self.first_start = now
        elif isinstance(event, ev.TrialEnded):
            self.trials += 1
            self.last_end = now
        elif isinstance(event, ev.SearchEnded):
            self.ended = now


def search(spec_path: Path, workers: int):
    from labbench.search.runner import SearchRunner
    from labbench.search.spec import load_spec

    clock = Clock()
    runner = SearchRunner(load_spec(spec_path), clock, workers=workers, fresh=True)
    t0 = clock.t0 = time.perf_counter()
    outcome = runner.run(threading.Event())
    total = time.perf_counter() - t0
    return runner, clock, outcome, total


def controller_cpu() -> float:
    """CPU seconds used by this process (all its threads), not by the workers."""
    import resource

    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def load_avg() -> str:
    return "load average %.2f %.2f %.2f" % os.getloadavg()


WORKLOADS = {
    # name: (data set, epochs, units range, description)
    "tiny": ("cancer", 15, "{ low = 8, high = 32 }",
             "breast cancer (455 training rows × 30), 5 folds, 15 epochs, 8–32 units"),
    "small": ("orchard", 30, "{ low = 16, high = 64 }",
              "the orchard demo (1,200 training rows × 12 columns, 3 classes), 5 folds, "
              "30 epochs, 16–64 units"),
    "medium": ("digits", 40, "{ low = 64, high = 128 }",
               "digits (1,437 training rows × 61), 5 folds, 40 epochs, 64–128 units"),
}


def overhead(folder: Path, trials: int, workload: str) -> None:
    from threadpoolctl import threadpool_limits

    from labbench.search.objective import run_trial

    which, epochs, units, text = WORKLOADS[workload]
    csv = write_table(folder, which)
    spec = write_spec(folder, csv, name=f"overhead_{workload}", sampler="tpe", epochs=epochs,
                      trials=trials, units=units)
    print(f"\n[1] overhead, {workload} workload: {trials} trials of {text}; TPE, no pruning, "
          f"SQLite, 1 worker   ({load_avg()})")
    cpu0 = controller_cpu()
    runner, clock, outcome, total = search(spec, 1)
    cpu = controller_cpu() - cpu0
    startup = clock.first_start - clock.t0
    searching = clock.last_end - clock.first_start
    settings = [t.user_attrs["settings"] for t in runner.study.get_trials(deepcopy=False)]
    prepared = runner.prepared
    with threadpool_limits(1):            # as in a worker (one BLAS thread each)
        t0, c0 = time.perf_counter(), time.process_time()
        for s in settings:
            run_trial(prepared, s, seed=11, on_epoch=lambda v: None, should_stop=lambda: False)
        reference = time.perf_counter() - t0
        reference_cpu = time.process_time() - c0
    n = len(settings)
    print(f"    reference (same {n} settings trained in-process, nothing else): {reference:.2f} s "
          f"({1000 * reference / n:.0f} ms per trial)")
    print(f"    search, first trial start → last trial end: {searching:.2f} s; worker start-up "
          f"{startup:.2f} s (once per run); whole run {total:.2f} s")
    print(f"    overhead (sampler + storage + hand-off): {1000 * (searching - reference) / n:.1f} ms "
          f"per trial = {100 * (searching - reference) / reference:.1f} % of trial time "
          f"(goal ≤ 5 %)")
    print(f"    with start-up: {100 * (total - reference) / reference:.1f} %   ({load_avg()})")
    worker_cpu = runner.worker_cpu_s
    print(f"    CPU time (less sensitive to other load than wall time): training in the worker "
          f"{worker_cpu:.2f} s vs {reference_cpu:.2f} s in-process "
          f"({100 * (worker_cpu - reference_cpu) / reference_cpu:+.1f} %: the hand-off on the "
          f"worker's side); controller {cpu:.2f} s = {1000 * cpu / n:.1f} ms per trial = "
          f"{100 * cpu / reference_cpu:.1f} % of trial CPU, spent beside the worker on the other core")


def scaling(folder: Path, trials: int, epochs: int = 40) -> None:
    csv = write_table(folder, "digits")
    spec = write_spec(folder, csv, name="scaling", sampler="random", epochs=epochs, trials=trials,
                      units="{ low = 64, high = 128 }")
    print(f"\n[2] throughput: {trials} trials, digits (1,437 training rows × 61), 5 folds, "
          f"{epochs} epochs, 64–128 units, random sampler   ({load_avg()})")
    rates: dict[int, list[float]] = {1: [], 2: []}
    settings: list = []
    for workers in (1, 2, 1, 2):         # alternated: the machine's load drifts
        runner, clock, outcome, total = search(spec, workers)
        settings = settings or [t.user_attrs["settings"] for t in runner.study.get_trials()]
        span = clock.last_end - clock.first_start
        rates[workers].append(clock.trials / span)
        print(f"    {workers} worker(s): {clock.trials} trials in {span:.2f} s "
              f"({rates[workers][-1]:.2f} trials/s; whole run {total:.2f} s)   ({load_avg()})")
    best = max(rates[2]) / max(rates[1])
    print(f"    2 workers vs 1 (best run of each): {best:.2f} × (goal ≥ 1.8 ×) on "
          f"{os.cpu_count()} cores; per pair: "
          + ", ".join(f"{b / a:.2f} ×" for a, b in zip(rates[1], rates[2])))
    ceiling = machine_ceiling(spec, settings)
    print(f"    reference: the same trainings in 2 plain processes vs 1 (no search, no storage): "
          f"{ceiling:.2f} × — what this machine gives two busy processes   ({load_avg()})")


def _train_all(spec_path: str, settings: list) -> float:
    """Train the settings one after another in this process; returns the wall time."""
    import logging

    from threadpoolctl import threadpool_limits

    from labbench.search.objective import run_trial
    from labbench.search.prepare import prepare
    from labbench.search.spec import load_spec

    logging.getLogger("labbench").setLevel(logging.ERROR)
    prepared = prepare(load_spec(spec_path))
    with threadpool_limits(1):
        t0 = time.perf_counter()
        for s in settings:
            run_trial(prepared, s, seed=11, on_epoch=lambda v: None, should_stop=lambda: False)
        return time.perf_counter() - t0


def machine_ceiling(spec: Path, settings: list) -> float:
    """Throughput of 2 processes training half the list each, over 1 process training it all."""
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(2) as pool:
        one = pool.apply(_train_all, (str(spec), settings))
        halves = [settings[0::2], settings[1::2]]
        two = max(pool.starmap(_train_all, [(str(spec), h) for h in halves]))
    return one / two


def main() -> int:
    import logging

    logging.getLogger("labbench").setLevel(logging.ERROR)   # the digits' blank pixels warn
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=200)
    parser.add_argument("--scaling-trials", type=int, default=32)
    parser.add_argument("--scaling-epochs", type=int, default=40,
                        help="epochs per trial of the scaling test (longer trials: less overhead)")
    parser.add_argument("--only", choices=("overhead", "scaling"))
    parser.add_argument("--workload", choices=tuple(WORKLOADS), action="append",
                        help="overhead workload(s) (default: both)")
    args = parser.parse_args()
    import numpy  # noqa: F401  (loaded so threadpoolctl can see its BLAS)

    try:
        from threadpoolctl import threadpool_info

        blas = [f"{i.get('internal_api')} {i.get('version')} ({i.get('threading_layer')}, "
                f"{i.get('num_threads')} threads, {i.get('architecture')})" for i in threadpool_info()]
        print("BLAS:", "; ".join(blas) or "unknown")
    except ImportError:
        print("BLAS: threadpoolctl not installed")
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.only in (None, "overhead"):
            for workload in args.workload or tuple(WORKLOADS):
                overhead(folder, args.trials, workload)
        if args.only in (None, "scaling"):
            scaling(folder, args.scaling_trials, args.scaling_epochs)
    return 0


if __name__ == "__main__":
    sys.exit(main())
