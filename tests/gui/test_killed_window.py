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
