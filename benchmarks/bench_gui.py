"""Event-loop stalls of the window while a search runs at full speed.

A QTimer ticks every 5 ms on the GUI thread; the gap between two ticks beyond those 5 ms is a
stall (time the event loop could not answer the user). Measured twice in the same run:

1. reference: the window open on the orchard demo, no search;
2. the same window during a real search of the orchard demo (short epochs, so events arrive as
   fast as the engine makes them, the plots redraw, the table grows, importance is recomputed),
   with the controller in its own process (the window's default);
3. second reference: the same search with the controller in a worker QThread of the window's
   process (``SearchSession.in_process = True``), where its Python work competes with the GUI
   thread for the interpreter lock.

Prints p50 / p99 / max stall for each and the ratios; the goal is p99 < 50 ms during the search.

After the searches it times saving every picture of the run page (PNG and SVG), 5 times each:
the part on the GUI thread when saved from a panel's button (drawing; the file is written on a
helper thread) against a whole save done in place (drawing, encoding and writing). The goal is
under 100 ms on the GUI thread per picture.

    python benchmarks/bench_gui.py [--trials 30] [--epochs 40] [--workers 2] [--no-thread-reference]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def percentile(values, q):
    import numpy as np

    return float(np.percentile(np.asarray(values, dtype=float), q)) if values else float("nan")


def export_times(window, work: Path) -> None:
    import numpy as np

    window.steps.setCurrentRow(2)
    window.session.flush()
    print(f"{'picture':34s} {'gui-thread ms':>14s} {'in place ms':>12s} {'ratio':>6s}")
    ratios = []
    for panel in window.watch.panels:
        for suffix in (".png", ".svg"):
            gui, whole = [], []
            for i in range(5):
                t0 = time.perf_counter()
                thread = panel.export_in_background(work / f"bg{i}{suffix}")
                gui.append((time.perf_counter() - t0) * 1000)
                thread.join()
                t0 = time.perf_counter()
                panel.export(work / f"in{i}{suffix}")
                whole.append((time.perf_counter() - t0) * 1000)
            r = np.median(np.asarray(gui) / np.asarray(whole))
            ratios.append(r)
            print(f"{panel.title + ' ' + suffix:34s} {np.median(gui):8.1f} ±{np.std(gui):4.1f} "
                  f"{np.median(whole):8.1f} ±{np.std(whole):4.1f} {r:6.2f}")
    print(f"median ratio gui-thread / in place: {np.median(ratios):.2f}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=30)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--epochs", type=int, default=40)
    parser.add_argument("--seconds-idle", type=float, default=3.0)
    parser.add_argument("--no-thread-reference", action="store_true",
                        help="skip the second search with the controller in a thread")
    args = parser.parse_args(argv)
    if not os.environ.get("QT_QPA_PLATFORM") and not os.environ.get("DISPLAY"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"

    from PySide6.QtCore import QElapsedTimer, QSettings, Qt, QTimer

    from labbench.gui.app import make_app
    from labbench.gui.window import MainWindow

    work = Path(tempfile.mkdtemp(prefix="labbench-bench-gui-"))
    csv = work / "orchard.csv"
    shutil.copy(ROOT / "demo_sets" / "orchard.csv", csv)
    app = make_app()
    window = MainWindow(QSettings(str(work / "settings.ini"), QSettings.Format.IniFormat))
    window.quiet_dialogs = True
    window.resize(1440, 900)
    window.show()
    window.open_path(str(csv))
    for name, _kind, use in window.data._row_widgets():
        if name == "crate_id":
            use.setChecked(False)
    sp = window.space
    sp.rows["epochs"].set_raw(args.epochs)
    sp.rows["learning_rate"].set_raw({"low": 1e-3, "high": 3e-2, "log": True})
    sp.rows["hidden_units"].set_raw({"low": 8, "high": 64, "log": True})
    sp.rows["activation"].set_raw({"choices": ["relu", "tanh"]})
    sp.trials.setValue(args.trials)
    sp.workers.setValue(args.workers)
    sp.folds.setValue(5)
    sp.seed_spread.setValue(0)
    window.spec_path = str(work / "bench.toml")
    window.steps.setCurrentRow(2)

    clock = QElapsedTimer()
    gaps: dict[str, list[float]] = {"idle": [], "search": [], "in-thread": []}
    books = {}
    state = {"phase": "idle", "last": None, "t0": time.monotonic(), "events": 0}

    def tick() -> None:
        now = clock.nsecsElapsed() / 1e6
        if state["last"] is not None:
            gaps[state["phase"]].append(max(0.0, now - state["last"] - 5.0))
        state["last"] = now
        if state["phase"] == "idle" and time.monotonic() - state["t0"] > args.seconds_idle:
            state["phase"] = "search"
            state["last"] = None
            if not window.start():
                print("the search did not start:", window.problem_label.toolTip())
                app.quit()
        elif state["phase"] in ("search", "in-thread") and not window.session.running \
                and window.session.book.ended and window.session.synced:
            books[state["phase"]] = window.session.book
            window.session.book = type(window.session.book)()   # keep the finished one for the summary
            if state["phase"] == "in-thread" or args.no_thread_reference:
                app.quit()
                return
            state["phase"], state["last"] = "in-thread", None
            window.session.in_process = True
            window.spec_path = str(work / "bench_thread.toml")
            window.dirty = True
            if not window.start():
                app.quit()

    timer = QTimer()
    timer.setTimerType(Qt.TimerType.PreciseTimer)
    timer.setInterval(5)
    timer.timeout.connect(tick)
    clock.start()
    timer.start()
    app.exec()
    for phase, book in books.items():
        took = sum(gaps[phase]) / 1000 + 0.005 * len(gaps[phase])
        n_epochs = sum(len(r.epochs) for r in book.records.values())
        print(f"{phase}: {len(book.records)} trials, {n_epochs} epoch events, workers={args.workers}, "
              f"{book.ended.reason if book.ended else '?'}, {took:.1f} s")
    print(f"{'':10s} {'ticks':>7s} {'p50 ms':>8s} {'p99 ms':>8s} {'max ms':>8s}")
    for phase, g in gaps.items():
        if g:
            print(f"{phase:10s} {len(g):7d} {percentile(g, 50):8.2f} {percentile(g, 99):8.2f} {max(g):8.2f}")
    p99_idle, p99_run = percentile(gaps["idle"], 99), percentile(gaps["search"], 99)
    print(f"ratio p99 search / idle: {p99_run / max(p99_idle, 0.01):.2f}")
    if gaps["in-thread"]:
        p99_thread = percentile(gaps["in-thread"], 99)
        print(f"ratio p99 controller-in-thread / controller-in-process: {p99_thread / max(p99_run, 0.01):.2f}")
    print(f"goal p99 < 50 ms during the search: {'met' if p99_run < 50 else 'NOT met'} ({p99_run:.1f} ms)")
    if books:       # the pictures of the finished search, not of an empty book
        window.session.book = books.get("search") or next(iter(books.values()))
        window.session._drawn = None
    export_times(window, work)
    window.session.close()
    shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
