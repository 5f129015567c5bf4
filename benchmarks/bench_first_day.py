"""Event-loop stalls of the window during the first-day actions (issue 11, section 3).

A heartbeat QTimer ticks every 5 ms while each action runs and for a settle time after it (the
work handed to threads finishes then); the figure is the longest gap between two ticks minus the
tick. Goal: no action blocks the event loop for more than 100 ms.

The table is invented: 3,000 rows with an id column, missing values, a column with stray text
and a 5-class target. Run: ``python benchmarks/bench_first_day.py [--rows 3000] [--repeats 3]``
(offscreen Qt unless a display is set). On a shared machine the figures vary: repeats give the
median and the spread.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

TICK_MS = 5


def invented_table(path: Path, rows: int) -> None:
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(2026)
    x = rng.normal(size=(rows, 6))
    height = rng.normal(170, 9, rows).round(1).astype(object)
    height[rng.random(rows) < 0.01] = "not measured"
    f = pd.DataFrame(x, columns=[f"m{i}" for i in range(6)])
    f.insert(0, "sample_id", np.arange(rows) + 10_000)
    f["height"] = height
    f.loc[rng.random(rows) < 0.05, "m2"] = np.nan
    f["site"] = rng.choice(["upper", "lower", "ridge", "creek"], rows)
    f["grade"] = np.digitize(x[:, 0] + 0.5 * x[:, 1] + rng.normal(0, 0.5, rows), [-1, -0.3, 0.3, 1])
    f["grade"] = f["grade"].map(dict(enumerate("ABCDE")))
    f.to_csv(path, index=False)


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=3000)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QElapsedTimer, QSettings, QTimer

    from labbench.gui.app import make_app
    from labbench.gui.window import MainWindow

    app = make_app()
    tmp = Path(tempfile.mkdtemp(prefix="labbench-firstday-"))
    csv = tmp / "field.csv"
    invented_table(csv, args.rows)
    clock = QElapsedTimer()
    clock.start()
    stamps: list[int] = []
    beat = QTimer()
    beat.setInterval(TICK_MS)
    beat.timeout.connect(lambda: stamps.append(clock.elapsed()))

    def spin(seconds: float, until=None) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end and not (until and until()):
            app.processEvents()
            time.sleep(0.001)

    def measure(action, settle: float = 1.5, until=None) -> float:
        stamps.clear()
        beat.start()
        spin(0.05)
        action()
        spin(settle, until)
        beat.stop()
        gaps = [b - a for a, b in zip(stamps, stamps[1:])]
        return max(gaps, default=0) - TICK_MS

    figures: dict[str, list[float]] = {}
    for rep in range(args.repeats):
        w = MainWindow(QSettings(str(tmp / f"s{rep}.ini"), QSettings.Format.IniFormat))
        w.quiet_dialogs = True
        w.resize(1366, 768)
        w.show()
        spin(0.5)
        spec = tmp / f"field{rep}.toml"
        acts = [
            ("open a 3,000-row CSV", lambda: w.open_path(str(csv)), 2.0, None),
            ("pick the target (profile + traps + estimate)", lambda: w.data.target_box.setCurrentText("grade"), 3.0, None),
            ("remedy: treat the stray text as missing", lambda: next(b for b in w.data.trap_list.buttons
                                                                   if b.text().startswith("Treat")).click(), 3.0, None),
            ("remedy: keep the id out", lambda: next(b for b in w.data.trap_list.buttons
                                                    if b.text() == "Keep it out").click(), 3.0, None),
            ("undo a space change", lambda: (w.space.rows["epochs"].set_raw(3), w.space.rows["epochs"].changed.emit(),
                                             w.act_undo.trigger()), 1.0, None),
        ]
        for name, act, settle, until in acts:
            figures.setdefault(name, []).append(measure(act, settle, until))
        sp = w.space
        sp.rows["epochs"].set_raw(3)
        sp.trials.setValue(3)
        sp.folds.setValue(3)
        sp.seed_spread.setValue(2)
        w.spec_path = str(spec)
        figures.setdefault("save the spec", []).append(measure(lambda: w.save_spec(), 0.5))
        figures.setdefault("start the search", []).append(measure(lambda: w.start(), 1.0))
        spin(240, lambda: not w.session.running and w.session.synced)
        for name, act in (("copy winning settings", lambda: w.take.copy_settings()),
                          ("save winner files", lambda: w.take.save_winner(str(tmp / f"win{rep}"))),
                          ("save model bundle", lambda: w.take.save_bundle(str(tmp / f"b{rep}.npz"))),
                          ("export ONNX", lambda: w.take.export_onnx(str(tmp / f"m{rep}.onnx")))):
            figures.setdefault(name, []).append(measure(act, 1.0))
        w.close()
        spin(2.0)
    print(f"event-loop stall per action, ms (tick {TICK_MS} ms; {args.repeats} runs; "
          f"{os.cpu_count()} cores, machine shared)")
    print(f"{'action':48s} {'median':>7s} {'min':>6s} {'max':>6s}")
    worst = 0.0
    for name, values in figures.items():
        worst = max(worst, max(values))
        print(f"{name:48s} {statistics.median(values):7.0f} {min(values):6.0f} {max(values):6.0f}")
    print(f"worst: {worst:.0f} ms (goal: ≤ 100 ms)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
