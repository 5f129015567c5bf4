"""Durability of the storage (issue 9, findings 1 and 3), through the storage functions:

* a trial is claimed (first heartbeat + owner) as it is created, so a process killed right after
  creating one leaves nothing RUNNING forever, and a trial whose owner on this machine is dead is
  reclaimed at once, with a reason and one retry with the same settings;
* a process that finds a search just created by another (attrs not written yet) joins it
  instead of refusing, and no refusal advises --fresh while trials are running.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time

import optuna
import pytest

from labbench.errors import SpecError
from labbench.search import orphans
from labbench.search.storage import Heartbeat, open_storage, open_study

ATTRS = {"data_sha256": "a" * 64, "metric": "rmse", "direction": "minimize", "task": "regression",
         "labbench_format": 1}
X = optuna.distributions.FloatDistribution(0.0, 1.0)

KILLED_AFTER_ASK = """
import os, signal, sys
import optuna
from labbench.search.storage import Heartbeat, open_storage
storage = open_storage(sys.argv[1], Heartbeat(20, 120))
study = optuna.create_study(study_name="exp", storage=storage)
trial = study.ask({"x": optuna.distributions.FloatDistribution(0.0, 1.0)})
os.kill(os.getpid(), signal.SIGKILL)       # before anything else is written for the trial
"""


def _open(url, attrs=ATTRS, fresh=False, heartbeat=Heartbeat(20, 120)):
    storage = open_storage(url, heartbeat)
    return open_study(storage, "exp", url=url, direction="minimize", attrs=attrs, fresh=fresh)


def test_a_process_killed_right_after_creating_a_trial_leaves_it_reclaimable_at_once(tmp_path):
    url = f"sqlite:///{tmp_path}/s.db"
    done = subprocess.run([sys.executable, "-c", KILLED_AFTER_ASK, url], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == -signal.SIGKILL, done.stderr
    study = optuna.load_study(study_name="exp", storage=open_storage(url, Heartbeat(20, 120)))
    [orphan] = study.get_trials()
    assert orphan.state.name == "RUNNING"
    assert orphan.system_attrs[orphans.OWNER_KEY]["pid"] != os.getpid()
    # a second process reclaims it at once (grace 120 s not waited for)
    assert orphans.reclaim_orphans(study) == [orphan.number]
    failed, again = study.get_trials()
    assert failed.state.name == "FAIL" and "ended before the trial finished" in \
        failed.user_attrs["end_reason"]
    assert again.state.name == "WAITING" and again.params == orphan.params
    assert orphans.reclaim_orphans(study) == []          # nothing twice


def test_a_trial_with_neither_heartbeat_nor_owner_is_reclaimed_after_the_grace_period(tmp_path):
    """What a process that is not labbench (or one killed between creating and claiming a trial)
    leaves: Optuna's own stale check never sees a trial without heartbeat."""
    url = f"sqlite:///{tmp_path}/s.db"
    plain_storage = optuna.storages.RDBStorage(url)
    study = optuna.create_study(study_name="exp", storage=plain_storage)
    study.ask({"x": X})
    ours = optuna.load_study(study_name="exp", storage=open_storage(url, Heartbeat(1, 2)))
    assert orphans.reclaim_orphans(ours) == []           # young: may still be claimed
    time.sleep(3.5)                                      # grace 2 s; SQLite keeps whole seconds
    assert orphans.reclaim_orphans(ours) == [0]
    failed = ours.get_trials()[0]
    assert failed.state.name == "FAIL" and "never recorded a heartbeat" in \
        failed.user_attrs["end_reason"]


def test_owners_elsewhere_alive_or_reused_are_told_apart(tmp_path):
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        here = orphans.me()
        with open(f"/proc/{sleeper.pid}/stat") as f:
            start = f.read().rsplit(")", 1)[1].split()[19]     # field 22 of proc(5)
        alive = {**here, "pid": sleeper.pid, "start": start}
        assert not orphans.owner_is_dead(alive)
        assert orphans.owner_is_dead({**alive, "start": str(int(start) + 1)})   # pid reused
        assert not orphans.owner_is_dead({**alive, "host": here["host"] + "-other"})
        assert not orphans.owner_is_dead({**alive, "boot": "another-boot"})
        assert not orphans.owner_is_dead(here)                                    # itself
        assert not orphans.owner_is_dead(None)
    finally:
        sleeper.kill()
        sleeper.wait()
    assert orphans.owner_is_dead(alive)                                           # now gone


def test_a_trial_of_another_machine_waits_for_its_heartbeat_to_go_stale(tmp_path):
    url = f"sqlite:///{tmp_path}/s.db"
    study, _ = _open(url, heartbeat=Heartbeat(1, 2))
    trial = study.ask({"x": X})
    storage = study._storage
    elsewhere = {**orphans.me(), "host": "another-machine", "pid": 1}
    storage.set_trial_system_attr(trial._trial_id, orphans.OWNER_KEY, elsewhere)
    assert orphans.reclaim_orphans(study) == []
    time.sleep(3.5)
    orphans.reclaim_orphans(study)
    failed = study.get_trials()[0]
    assert failed.state.name == "FAIL"
    assert failed.user_attrs["end_reason"]               # written when the trial was claimed


def test_a_process_joins_a_search_another_has_just_created(tmp_path):
    """The creator has made the study but not written its attrs yet (the race of four processes
    started together on a new name): the joiner waits for them instead of refusing."""
    url = f"sqlite:///{tmp_path}/s.db"
    storage = open_storage(url)
    creator = optuna.create_study(study_name="exp", storage=storage)

    def finish_creating():
        time.sleep(1.0)
        for key, value in ATTRS.items():
            creator.set_user_attr(key, value)

    thread = threading.Thread(target=finish_creating)
    thread.start()
    study, resumed = _open(url)
    thread.join()
    assert resumed and study._study_id == creator._study_id
    assert study.user_attrs["labbench_format"] == 1


def test_processes_started_together_all_create_or_join_one_search(tmp_path):
    url = f"sqlite:///{tmp_path}/s.db"
    open_storage(url)                                    # the tables exist (as after a first run)
    results, errors = [], []
    gate = threading.Barrier(6)

    def start():
        try:
            gate.wait()
            results.append(_open(url))
        except Exception as exc:
            errors.append(exc)

    threads = [threading.Thread(target=start) for _ in range(6)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert not errors
    assert len({study._study_id for study, _ in results}) == 1
    assert sorted(resumed for _, resumed in results) == [False] + [True] * 5


def test_no_refusal_advises_fresh_while_trials_are_running(tmp_path):
    url = f"sqlite:///{tmp_path}/s.db"
    study, _ = _open(url)
    study.ask({"x": X})                                  # running, owned by this live process
    with pytest.raises(SpecError, match="data file's contents changed") as info:
        _open(url, {**ATTRS, "data_sha256": "b" * 64})
    assert "--fresh" not in str(info.value) and "another [search] name" in str(info.value)
    with pytest.raises(SpecError, match="--fresh would delete search 'exp' while 1 of its"):
        _open(url, fresh=True)
    assert len(optuna.load_study(study_name="exp", storage=url).trials) == 1   # not deleted
