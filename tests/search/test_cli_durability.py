"""A real ``labbench run`` process killed (SIGKILL) or interrupted (SIGINT) in the middle of a trial.

Short heartbeat settings come through the hidden ``--heartbeat INTERVAL,GRACE`` option so a stale
trial is recognised within seconds (the defaults are 20 s / 120 s).
"""

from __future__ import annotations

import os
import signal
import subprocess
import time

import pytest

from runner_support import cli, iris_csv, load, write_spec

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX signals")

# Long enough trials (≈3 s each here) that a signal lands inside one.
SPACE = """
learning_rate = { low = 0.001, high = 0.01, log = true }
hidden_layers = 1
hidden_units = 8
epochs = 4000
patience = 0
batch_size = 8
"""


def _wait_for(predicate, timeout: float, proc: subprocess.Popen):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if proc.poll() is not None:
            out, err = proc.communicate()
            pytest.fail(f"labbench run ended early ({proc.returncode}):\n{err}")
        try:
            found = predicate()
        except Exception:            # the database may not exist yet
            found = None
        if found:
            return found
        time.sleep(0.1)
    proc.kill()
    pytest.fail("timed out waiting for the search to get there")


def _states(db):
    return [t.state.name for t in load(db).get_trials(deepcopy=False)]


def _running_with_epochs(db, finished: int):
    trials = load(db).get_trials(deepcopy=False)
    complete = [t for t in trials if t.state.name == "COMPLETE"]
    running = [t for t in trials if t.state.name == "RUNNING" and t.intermediate_values]
    return running[0] if len(complete) >= finished and running else None


def _gone(pid: int, timeout: float = 10.0) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return True
        try:                                   # a zombie child of nobody we wait for: also gone
            with open(f"/proc/{pid}/stat") as f:
                if f.read().split()[2] == "Z":
                    return True
        except OSError:
            return True
        time.sleep(0.1)
    return False


def test_sigkill_loses_no_finished_trial_and_the_orphan_is_retried(tmp_path):
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=20, space=SPACE, sampler="random")
    db = tmp_path / "exp.db"
    args = ["run", str(spec), "--heartbeat", "1,3", "--out", str(tmp_path / "o")]
    proc = subprocess.Popen(cli(*args, "--trials", "20"), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    _wait_for(lambda: _running_with_epochs(db, 2), 240, proc)
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=30)
    stored = load(db).get_trials(deepcopy=False)
    before = {t.number: (t.params, t.value, t.user_attrs)
              for t in stored if t.state.name == "COMPLETE"}
    assert len(before) >= 2
    # the trials in flight when the process died (read after the kill: no race). The one being
    # trained may have finished between the poll and the kill, so any RUNNING trial counts: the
    # one in training and those queued behind it are all orphans and all must be retried.
    orphans = [t for t in stored if t.state.name == "RUNNING"]
    assert orphans, "no trial was in flight when the process was killed"
    for orphan in orphans:
        if "worker" in orphan.user_attrs:   # a worker that trained it notices its controller is gone
            worker_pid = int(orphan.user_attrs["worker"].rsplit(":", 1)[1])
            assert _gone(worker_pid), "a worker outlived its killed controller"
    time.sleep(4.5)                  # let the orphans' heartbeats go stale (grace 3 s, 1 s resolution)

    rerun = subprocess.run(cli(*args, "--trials", str(len(orphans))), capture_output=True,
                           text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    trials = load(db).get_trials(deepcopy=False)
    after = {t.number: (t.params, t.value, t.user_attrs) for t in trials}
    for number, stored in before.items():           # every finished trial is still there, as it was
        assert after[number] == stored
    for orphan in orphans:
        old = next(t for t in trials if t.number == orphan.number)
        assert old.state.name == "FAIL"
        assert "ended before the trial finished" in old.user_attrs["end_reason"]   # its owner died
        retries = [t for t in trials if t.system_attrs.get("failed_trial") == orphan.number]
        assert len(retries) == 1
        assert retries[0].state.name == "COMPLETE" and retries[0].params == orphan.params
    assert "RUNNING" not in _states(db)


@pytest.mark.parametrize("target", ["process", "group"])
def test_ctrl_c_exits_130_and_leaves_no_running_trial(tmp_path, target):
    """SIGINT to the command alone, and to its whole process group (what a terminal's Ctrl-C
    does: the worker processes get it too and must leave the decision to the controller)."""
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=20, space=SPACE, workers=2)
    db = tmp_path / "exp.db"
    proc = subprocess.Popen(cli("run", str(spec), "--out", str(tmp_path / "o")),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    _wait_for(lambda: _running_with_epochs(db, 0), 240, proc)
    time.sleep(0.5)
    if target == "group":
        os.killpg(proc.pid, signal.SIGINT)
    else:
        proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "interrupted" in err
    trials = load(db).get_trials(deepcopy=False)
    assert "RUNNING" not in [t.state.name for t in trials]
    cancelled = [t for t in trials if t.user_attrs.get("end_reason") == "cancelled by the user"]
    assert cancelled and all(t.state.name == "FAIL" for t in cancelled)
    assert not (tmp_path / "o" / "winner.json").exists()
