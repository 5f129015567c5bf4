"""One search shared by 1, 2, 4 and 8 ``labbench run`` processes on one local PostgreSQL server.

For each process count N a new database is created and N processes (one worker each) start
together on one new search, each adding ``--trials`` trials of a small workload (scikit-learn's
breast-cancer set, 3 folds, a few epochs: ≈0.1–0.3 s of training per trial). Printed per N:

* trials per minute, counted from the stored trial times (first trial started → last trial
  finished), so process start-up and each process's closing refit are left out;
* per process, the seconds spent waiting on the database while it searched (every SQL statement
  and commit between its first trial's start and its last trial's end, timed inside the process
  through SQLAlchemy's cursor events and ``Session.commit``) and their share of that time;
* the ratio of trials per minute to the one-process figure of the same run.

The database is the bottleneck when adding processes stops adding trials per minute *while* the
time waiting on it grows. On a machine with few cores the CPU runs out first: every process is a
controller plus a worker, so 8 processes are 16 busy processes on 2 cores, and their waits then
include waiting for a core. Numbers from a 2-core machine can show the database cost per trial
and whether it grows with N; they cannot show where a real server with many clients saturates.

Optuna's gRPC storage proxy (``optuna.storages.run_grpc_proxy_server`` / ``GrpcStorageProxy``)
puts one server process between many clients and the database, caching trials, to relieve a
database with very many clients. It is not measured here: it needs grpcio (not installed), and
labbench's shared-search guarantees rely on the RDB storage in each process (a trial is claimed for
the process that runs it, batched writes go straight to the tables), which a proxy would change.

Run:  python benchmarks/bench_shared.py [--trials 12] [--counts 1,2,4,8] [--url postgresql+psycopg://…]
Without ``--url`` a throwaway server is started from /usr/lib/postgresql/*/bin on 127.0.0.1 (as
the ``postgres`` user when run as root) and removed at the end. The machine may be shared: the
load average is printed before and after.

Measured here (2 cores shared with five other jobs, load average ≈ 7–8; PostgreSQL 15 on the same
2 cores; 12 trials per process; one run, so treat differences under ~20 % as noise):

    processes  trials/min  × of 1   database wait per process (share of its search time)
        1         294       1.00     2.1 s  (85 %)
        2         473       1.61     1.9 s  (81 %)
        4         446       1.52     4.4 s  (86 %)
        8         415       1.41    10.4 s  (88 %)
    67 SQL statements + commits per trial at every count.

Reading: with trials this small (≈0.1 s of training) a process spends most of its controller time
in database round trips (≈2.6 ms each alone, ≈13 ms each with 8 processes), so one process is
bound by database latency and a second one nearly doubles the rate. Beyond 2 processes the rate
stops growing and each statement waits longer: the 2 cores are used up (8 processes = 16 busy
processes plus the server's backends), so this machine cannot tell a saturated database from a
saturated CPU. What it does show: the database work per trial is fixed (67 statements), so on a
real server it is ≈ 67 × round-trip time per trial — about 0.1–0.2 s on a LAN, small against
trials that take seconds; with hundreds of tiny trials per minute from many machines, the
server's round trips are what to watch, and that is where a caching proxy (below) would help.
"""

from __future__ import annotations

import argparse
import glob
import json
import os
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# Started as each `labbench run` process: time the database, then run the real command.
TIMED = r"""
import atexit, json, os, sys, time
import sqlalchemy, sqlalchemy.event, sqlalchemy.orm
spent = []          # (wall-clock start, seconds) of every statement and commit
starts = {}

@sqlalchemy.event.listens_for(sqlalchemy.engine.Engine, "before_cursor_execute")
def _before(conn, cursor, statement, params, context, many):
    starts[id(cursor)] = (time.time(), time.perf_counter())

@sqlalchemy.event.listens_for(sqlalchemy.engine.Engine, "after_cursor_execute")
def _after(conn, cursor, statement, params, context, many):
    wall, t = starts.pop(id(cursor), (time.time(), time.perf_counter()))
    spent.append((wall, time.perf_counter() - t))

_commit = sqlalchemy.orm.Session.commit
def commit(self, *a, **k):
    wall, t = time.time(), time.perf_counter()
    try:
        return _commit(self, *a, **k)
    finally:
        spent.append((wall, time.perf_counter() - t))
sqlalchemy.orm.Session.commit = commit

@atexit.register
def _report():
    with open(os.environ["BENCH_DB_WAIT"], "w") as f:
        json.dump({"pid": os.getpid(), "waits": spent}, f)

from labbench.cli import main
sys.argv = ["labbench"] + sys.argv[1:]
sys.exit(main())
"""

SPACE = """
learning_rate = { low = 0.003, high = 0.1, log = true }
hidden_layers = 1
hidden_units = { low = 4, high = 24 }
epochs = 6
batch_size = 32
"""


def _spec(folder: Path) -> Path:
    from sklearn.datasets import load_breast_cancer

    frame = load_breast_cancer(as_frame=True).frame
    frame["target"] = frame["target"].map({0: "malignant", 1: "benign"})
    frame.to_csv(folder / "cancer.csv", index=False)
    spec = folder / "shared.toml"
    spec.write_text(f"""
[data]
path = "cancer.csv"
target = "target"
[evaluation]
folds = 3
holdout = 0.2
seed = 1
seed_spread = 0
[search]
name = "shared"
trials = 1
sampler = "random"
pruner = "none"
workers = 1
[space]
{SPACE}
""", encoding="utf-8")
    return spec


class Throwaway:
    """initdb + pg_ctl in a temporary folder, loopback only (as ``postgres`` when root)."""

    def __init__(self):
        dirs = sorted(glob.glob("/usr/lib/postgresql/*/bin"))
        if not dirs:
            sys.exit("no PostgreSQL server binaries in /usr/lib/postgresql/*/bin; give --url")
        self.bin = Path(dirs[-1])
        self.as_user = ["runuser", "-u", "postgres", "--"] if os.geteuid() == 0 else []
        self.folder = Path(tempfile.mkdtemp(prefix="bench-pg-"))
        if self.as_user:
            shutil.chown(self.folder, "postgres")
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            self.port = s.getsockname()[1]
        data = self.folder / "data"
        self._run("initdb", "-D", str(data), "-U", "postgres", "--auth=trust", "-E", "UTF8",
                  "--no-sync")
        self._run("pg_ctl", "-D", str(data), "-l", str(self.folder / "log"), "-w", "-o",
                  f"-c listen_addresses=127.0.0.1 -p {self.port} -k {self.folder} "
                  "-c max_connections=200", "start")
        self.data = data

    def _run(self, tool: str, *args: str) -> None:
        subprocess.run([*self.as_user, str(self.bin / tool), *args], check=True,
                       capture_output=True, cwd=self.folder, env={**os.environ, "LC_ALL": "C"})

    def base(self) -> str:
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}"

    def stop(self) -> None:
        self._run("pg_ctl", "-D", str(self.data), "-m", "fast", "-w", "stop")
        shutil.rmtree(self.folder, ignore_errors=True)


def _new_database(base: str) -> str:
    import sqlalchemy

    name = f"bench_{uuid.uuid4().hex[:10]}"
    engine = sqlalchemy.create_engine(f"{base}/postgres", isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(sqlalchemy.text(f'CREATE DATABASE "{name}"'))
    engine.dispose()
    return f"{base}/{name}"


def one_count(n: int, trials: int, spec: Path, base: str, folder: Path) -> dict:
    import optuna

    url = _new_database(base)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        filter(None, [str(ROOT), os.environ.get("PYTHONPATH", "")]))}
    procs = []
    for i in range(n):
        wait_file = folder / f"wait_{n}_{i}.json"
        procs.append((subprocess.Popen(
            [sys.executable, "-c", TIMED, "run", str(spec), "--storage", url, "--trials",
             str(trials), "--quiet", "--out", str(folder / f"out_{n}_{i}")],
            env={**env, "BENCH_DB_WAIT": str(wait_file)}, stdout=subprocess.DEVNULL,
            stderr=subprocess.PIPE, text=True, cwd=folder), wait_file))
    for proc, _ in procs:
        _, err = proc.communicate(timeout=1800)
        if proc.returncode != 0:
            sys.exit(f"a labbench run failed ({proc.returncode}):\n{err}")
    study = optuna.load_study(study_name="shared", storage=url)
    done = [t for t in study.get_trials(deepcopy=False) if t.datetime_complete is not None]
    span = (max(t.datetime_complete for t in done) - min(t.datetime_start for t in done))
    per_proc = []
    for proc, wait_file in procs:
        mine = [t for t in done if t.system_attrs.get("labbench_owner", {}).get("pid") == proc.pid]
        if not mine:
            continue
        first = min(t.datetime_start for t in mine).timestamp()   # naive local time, as Optuna
        last = max(t.datetime_complete for t in mine).timestamp()  # stores it
        inside = [d for w, d in json.loads(wait_file.read_text())["waits"] if first <= w <= last]
        wait = sum(inside)
        per_proc.append((wait, wait / (last - first) if last > first else float("nan"),
                         len(inside) / len(mine)))
    return {"n": n, "trials": len(done), "per_min": 60.0 * len(done) / span.total_seconds(),
            "waits": per_proc}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--trials", type=int, default=12, help="trials per process")
    parser.add_argument("--counts", default="1,2,4,8")
    parser.add_argument("--url", help="server URL without database (postgresql+psycopg://u@h:p)")
    args = parser.parse_args()
    print(f"load average before: {os.getloadavg()}; cores: {os.cpu_count()}")
    server = None if args.url else Throwaway()
    base = args.url.rstrip("/") if args.url else server.base()
    rows = []
    try:
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp)
            spec = _spec(folder)
            for n in (int(c) for c in args.counts.split(",")):
                rows.append(one_count(n, args.trials, spec, base, folder))
                r = rows[-1]
                waits = [w[0] for w in r["waits"]]
                shares = [w[1] for w in r["waits"]]
                calls = [w[2] for w in r["waits"]]
                print(f"{n} process(es): {r['trials']} trials, {r['per_min']:.0f} trials/min "
                      f"(× {r['per_min'] / rows[0]['per_min']:.2f} of {rows[0]['n']}); "
                      f"database wait per process: median {statistics.median(waits):.2f} s "
                      f"(range {min(waits):.2f}–{max(waits):.2f}), "
                      f"{100 * statistics.median(shares):.1f} % of its search time, "
                      f"{statistics.median(calls):.0f} statements + commits per trial", flush=True)
    finally:
        if server is not None:
            server.stop()
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
