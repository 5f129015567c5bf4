"""A window killed in the middle of a search (SIGKILL: no close, no clean-up) leaves nothing
RUNNING: the search process notices that the window is gone and ends its trials as cancelled."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time

import optuna
import pytest

from tests.gui.conftest import ROOT

pytestmark = [pytest.mark.slow, pytest.mark.skipif(os.name != "posix", reason="SIGKILL is POSIX")]

SCRIPT = textwrap.dedent("""
    import sys, time
    def main():
        from PySide6.QtCore import QSettings, QTimer
        from labbench.gui.app import make_app
        from labbench.gui.window import MainWindow
        app = make_app()
        w = MainWindow(QSettings(sys.argv[2], QSettings.Format.IniFormat))
        w.quiet_dialogs = True
        w.show()
        assert w.open_path(sys.argv[1])
        assert w.start()
        def tick():
            if any(r.epochs for r in w.session.book.records.values()):
                print("training", flush=True)
        t = QTimer(); t.timeout.connect(tick); t.start(50)
        app.exec()
    if __name__ == "__main__":
        main()
""")


def test_killing_the_window_leaves_no_running_trial(tmp_path, orchard_csv):
    spec = tmp_path / "killed.toml"
    spec.write_text(textwrap.dedent(f"""
        [data]
        path = "{orchard_csv.name}"
        target = "grade"
        ignore = ["crate_id"]
        [evaluation]
        folds = 3
        seed_spread = 0
        [search]
        trials = 40
        pruner = "none"
        [space]
        epochs = 500
        patience = 0
        hidden_units = 8
    """), encoding="utf-8")
    script = tmp_path / "window.py"
    script.write_text(SCRIPT, encoding="utf-8")
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, str(script), str(spec), str(tmp_path / "s.ini")],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
    try:
        line = proc.stdout.readline()
        assert line.strip() == "training"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(30)
    finally:
        if proc.poll() is None:
            proc.kill()
    storage = f"sqlite:///{tmp_path / 'killed.db'}"
    deadline = time.monotonic() + 90
    while True:
        states = [t.state.name for t in optuna.load_study(study_name="killed", storage=storage).get_trials()]
        if "RUNNING" not in states or time.monotonic() > deadline:
            break
        time.sleep(0.5)
    assert states and "RUNNING" not in states
    reasons = [t.user_attrs.get("end_reason") for t in
               optuna.load_study(study_name="killed", storage=storage).get_trials()]
    assert "cancelled by the user" in reasons


# the same start-up as ``labbench SPEC`` (run_app: open_window, install_sigterm), then Start
TERM_SCRIPT = textwrap.dedent("""
    import sys
    def main():
        from PySide6.QtCore import QSettings, QTimer
        from labbench.gui.app import install_sigterm, make_app
        from labbench.gui.window import MainWindow
        app = make_app()
        w = MainWindow(QSettings(sys.argv[2], QSettings.Format.IniFormat))
        w.quiet_dialogs = True
        install_sigterm(app, w)
        w.show()
        assert w.open_path(sys.argv[1])
        assert w.start()
        said = []
        def tick():
            if not said and any(r.epochs for r in w.session.book.records.values()):
                said.append(1)
                print("training", flush=True)
        t = QTimer(); t.timeout.connect(tick); t.start(50)
        sys.exit(app.exec())
    if __name__ == "__main__":
        main()
""")


def descendants(pid: int) -> set[int]:
    """Every process below ``pid`` (Linux /proc: the 4th field of /proc/<pid>/stat is the parent)."""
    parents: dict[int, int] = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as fh:
                    parents[int(d)] = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                pass
    out, todo = set(), [pid]
    while todo:
        p = todo.pop()
        kids = [c for c, pp in parents.items() if pp == p]
        out.update(kids)
        todo.extend(kids)
    return out


def alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


@pytest.mark.skipif(not os.path.isdir("/proc"), reason="reads the process tree from Linux /proc")
def test_sigterm_ends_every_child_and_stores_the_trials_as_stopped(tmp_path, orchard_csv):
    spec = tmp_path / "termed.toml"
    spec.write_text(textwrap.dedent(f"""
        [data]
        path = "{orchard_csv.name}"
        target = "grade"
        ignore = ["crate_id"]
        [evaluation]
        folds = 3
        seed_spread = 0
        [search]
        trials = 40
        pruner = "none"
        workers = 2
        [space]
        epochs = 500
        hidden_units = 8
    """), encoding="utf-8")
    script = tmp_path / "window.py"
    script.write_text(TERM_SCRIPT, encoding="utf-8")
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, str(script), str(spec), str(tmp_path / "s.ini")],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
    try:
        assert proc.stdout.readline().strip() == "training"
        children = descendants(proc.pid)
        assert len(children) >= 3          # the search process, its 2 training processes, trackers
        os.kill(proc.pid, signal.SIGTERM)
        assert proc.wait(60) == 0           # the window closed itself (not killed by the signal)
    finally:
        if proc.poll() is None:
            proc.kill()
    deadline = time.monotonic() + 10
    while any(alive(c) for c in children) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not [c for c in children if alive(c)]
    trials = optuna.load_study(study_name="termed", storage=f"sqlite:///{tmp_path / 'termed.db'}").get_trials()
    assert trials and "RUNNING" not in [t.state.name for t in trials]
    assert "cancelled by the user" in [t.user_attrs.get("end_reason") for t in trials]
