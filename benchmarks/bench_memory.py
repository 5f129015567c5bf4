"""Peak memory of ``labbench run`` on a generated 100,000 × 50 CSV (issue 13; goal ≤ 400 MB).

The table is invented here (seeded numpy: 50 numeric columns, a binary target from a noisy linear
rule), about 42 MB of text. ``labbench run`` runs it as a user would (a subprocess, one worker,
5 folds, ``--trials``, 3 epochs per trial), and the peak resident memory (``VmHWM``) of every
process of the run — the command (controller, the winner's refit and exports) and its worker — is
read from /proc while it runs; the largest is the figure (each process needs that much at once).
Rounds repeat the whole run; the median and spread are printed.

    python benchmarks/bench_memory.py [--rounds 2] [--rows 100000] [--trials 2]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from paired import load_avg  # noqa: E402


def write_csv(path: Path, rows: int, cols: int = 50, seed: int = 0) -> None:
    import numpy as np

    rng = np.random.default_rng(seed)
    X = rng.normal(size=(rows, cols)).astype(np.float32)
    w = rng.normal(size=cols)
    y = (X @ w + rng.normal(scale=2.0, size=rows) > 0).astype(int)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(",".join([f"x{i}" for i in range(cols)] + ["label"]) + "\n")
        for start in range(0, rows, 10_000):
            block = X[start:start + 10_000]
            lines = [",".join(f"{v:.5g}" for v in row) + f",c{t}"
                     for row, t in zip(block, y[start:start + 10_000])]
            fh.write("\n".join(lines) + "\n")


SPEC = """
[data]
path = "{csv}"
target = "label"
[evaluation]
folds = 5
holdout = 0.2
seed = 3
seed_spread = 0
[search]
trials = {trials}
sampler = "random"
pruner = "none"
workers = 1
[space]
learning_rate = {{ low = 0.001, high = 0.01, log = true }}
hidden_layers = 1
hidden_units = 64
epochs = 3
batch_size = 256
"""


def descendants(pid: int) -> list[int]:
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    ppid = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                continue
            children.setdefault(ppid, []).append(int(entry))
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        out.append(p)
        todo += children.get(p, [])
    return out


def peak_kb(pid: int) -> int | None:
    try:
        with open(f"/proc/{pid}/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


def one_run(folder: Path, trials: int) -> dict[str, float]:
    env = dict(os.environ)
    proc = subprocess.Popen([sys.executable, "-m", "labbench", "run", str(folder / "big.toml"),
                             "--fresh"], cwd=folder, env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, text=True)
    peaks: dict[int, int] = {}
    start = time.perf_counter()
    while proc.poll() is None:
        for pid in descendants(proc.pid):
            kb = peak_kb(pid)
            if kb is not None:
                peaks[pid] = max(peaks.get(pid, 0), kb)
        time.sleep(0.1)
    err = proc.stderr.read()
    if proc.returncode != 0:
        raise SystemExit(f"labbench run failed ({proc.returncode}):\n{err}")
    command = peaks.pop(proc.pid, 0)
    workers = max(peaks.values(), default=0)
    return {"command": command / 1024, "worker": workers / 1024,
            "largest": max(command, workers) / 1024, "seconds": time.perf_counter() - start}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--trials", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        csv = folder / "big.csv"
        write_csv(csv, args.rows)
        (folder / "big.toml").write_text(SPEC.format(csv=csv.name, trials=args.trials), encoding="utf-8")
        print(f"{args.rows:,} × 50 CSV, {csv.stat().st_size / 1e6:.0f} MB; labbench run, "
              f"{args.trials} trials, 1 worker   ({load_avg()})")
        runs = []
        for r in range(args.rounds):
            runs.append(one_run(folder, args.trials))
            print(f"    round {r + 1}: command {runs[-1]['command']:.0f} MB, worker "
                  f"{runs[-1]['worker']:.0f} MB, {runs[-1]['seconds']:.1f} s   ({load_avg()})",
                  flush=True)
    for key in ("command", "worker", "largest"):
        values = [r[key] for r in runs]
        extra = "  goal ≤ 400 MB " + ("met" if statistics.median(values) <= 400 else "NOT met") \
            if key == "largest" else ""
        print(f"peak memory, {key:<8s} median {statistics.median(values):6.0f} MB  spread "
              f"{min(values):.0f}–{max(values):.0f} MB  (n={len(values)}){extra}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
