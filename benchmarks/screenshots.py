"""Screenshots of every page of the window on the orchard demo, after a short real search.

    xvfb-run -a -s "-screen 0 1920x1080x24" python benchmarks/screenshots.py OUT_DIR [--trials 14]

Saves OUT_DIR/{data,search,run}_{1366x768,1920x1080,1366x768@2x}.png. Each size runs in its own
process (the scale factor must be set before Qt starts); the search runs once, in the first, and
the other two open the stored search (the run page shows what storage holds, as after a restart).

When the invented pump readings are there (demo_sets/pumps.*, a self-organising map without a
target), also OUT_DIR/map_{data,search,run,page,front}_<size>.png: a short SOM search of them (in the
first process; the others open it from storage and draw the map from the bundle it left).
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SIZES = [("1366x768", 1366, 768, 1), ("1920x1080", 1920, 1080, 1), ("1366x768@2x", 1366, 768, 2)]


def shoot(out: Path, work: Path, tag: str, width: int, height: int, run: bool, trials: int) -> None:
    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    from labbench.gui.app import make_app
    from labbench.gui.window import MainWindow

    app = make_app()
    window = MainWindow(QSettings(str(work / f"settings_{tag}.ini"), QSettings.Format.IniFormat))
    window.quiet_dialogs = True
    # the window's outer size: the screen less a desktop panel (about 40 px) and the title bar
    window.resize(width, height - 64)
    window.show()

    def wait(cond, seconds: float) -> bool:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            app.processEvents()
            if cond():
                return True
            time.sleep(0.02)
        return False

    spec = work / "orchard.toml"
    assert window.open_path(str(spec)), "the demo spec did not open"
    wait(lambda: False, 1.0)
    if run:
        window.space.trials.setValue(trials)
        window.space.rows["epochs"].set_raw({"low": 10, "high": 40})
        assert window.start(), window.problem_label.toolTip()
        wait(lambda: not window.session.running and window.session.synced, 900)
    else:
        window.steps.setCurrentRow(2)
        wait(lambda: window.session.synced, 60)
    wait(lambda: False, 6.0)        # importance (a helper process) and the last redraws
    window.session.flush()
    for row, name in enumerate(("data", "search", "run")):
        window.steps.setCurrentRow(row)
        wait(lambda: False, 0.6)
        if name == "run":
            window.watch.notebook.select(max(window.session.book.records, default=0) // 2)
            window.session.flush()
            wait(lambda: False, 0.4)
        path = out / f"{name}_{tag}.png"
        window.grab().save(str(path))
        print(f"{path} ({window.width()}x{window.height()} logical)")
    window.session.close()
    QApplication.closeAllWindows()
    if (work / "pumps.toml").exists():
        shoot_map(app, out, work, tag, width, height, run, trials)


def shoot_map(app, out: Path, work: Path, tag: str, width: int, height: int, run: bool, trials: int) -> None:
    """The map family's pages: the data without a target, its settings, the run, its map."""
    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    from labbench.gui.window import MainWindow

    window = MainWindow(QSettings(str(work / f"settings_map_{tag}.ini"), QSettings.Format.IniFormat))
    window.quiet_dialogs = True
    window.resize(width, height - 64)
    window.show()

    def wait(cond, seconds: float) -> bool:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            app.processEvents()
            if cond():
                return True
            time.sleep(0.02)
        return False

    assert window.open_path(str(work / "pumps.toml")), "the pumps spec did not open"
    wait(lambda: False, 1.0)
    if run:
        window.space.trials.setValue(trials)
        window.space.rows["groups"].set_raw(4)        # four regions: one per pump state, if it learns them
        assert window.start(), window.problem_label.toolTip()
        wait(lambda: not window.session.running and window.session.synced, 900)
    else:
        window.steps.setCurrentRow(2)
        wait(lambda: window.session.synced and window.session.book.winner is not None, 60)
        window.update_map()
    wait(lambda: False, 3.0)
    window.session.flush()
    for row, name in enumerate(("data", "search", "run", "page")):
        window.steps.setCurrentRow(row)
        wait(lambda: False, 0.6)
        path = out / f"map_{name}_{tag}.png"
        window.grab().save(str(path))
        print(f"{path} ({window.width()}x{window.height()} logical)")
    window.maps.right.setCurrentIndex(1)           # the trade-off front beside the groups
    wait(lambda: bool(window.maps.front.front), 20)
    wait(lambda: False, 0.6)
    path = out / f"map_front_{tag}.png"
    window.grab().save(str(path))
    print(f"{path} ({window.width()}x{window.height()} logical)")
    window.session.close()
    QApplication.closeAllWindows()


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--trials", type=int, default=14)
    parser.add_argument("--one", nargs=5, metavar=("TAG", "W", "H", "RUN", "WORK"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    out = args.out.resolve()
    out.mkdir(parents=True, exist_ok=True)
    if args.one:
        tag, w, h, run, work = args.one
        shoot(out, Path(work), tag, int(w), int(h), run == "1", args.trials)
        return 0
    work = Path(tempfile.mkdtemp(prefix="labbench-shots-"))
    for name in ("orchard.csv", "orchard.toml", "pumps.csv", "pumps.toml"):
        if (ROOT / "demo_sets" / name).exists():
            shutil.copy(ROOT / "demo_sets" / name, work / name)
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    for i, (tag, w, h, scale) in enumerate(SIZES):
        child_env = dict(env)
        if scale != 1:
            child_env["QT_SCALE_FACTOR"] = str(scale)
            w, h = w * scale, h * scale     # the screen in pixels; the window fills it in logical units
        subprocess.run([sys.executable, __file__, str(out), "--trials", str(args.trials),
                        "--one", tag, str(w // scale), str(h // scale), "1" if i == 0 else "0", str(work)],
                       env=child_env, check=True)
    shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
