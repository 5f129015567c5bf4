"""Screenshots of the data page and the search page on the first day (a new user's table with an
id column, stray text and missing values), at 1366 × 768. Run under a display, e.g.
``xvfb-run -a -s "-screen 0 1366x768x24" python benchmarks/shots_first_day.py OUT_DIR``."""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def main() -> int:
    out = Path(sys.argv[1] if len(sys.argv) > 1 else "shots")
    out.mkdir(parents=True, exist_ok=True)
    from PySide6.QtCore import QSettings

    from benchmarks.bench_first_day import invented_table
    from labbench.gui.app import make_app
    from labbench.gui.window import MainWindow

    app = make_app()
    tmp = Path(tempfile.mkdtemp(prefix="labbench-shots-"))
    csv = tmp / "field.csv"
    invented_table(csv, 3000)
    w = MainWindow(QSettings(str(tmp / "s.ini"), QSettings.Format.IniFormat))
    w.quiet_dialogs = True
    w.resize(1366, 768)
    w.show()

    def spin(seconds: float) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            app.processEvents()
            time.sleep(0.005)

    spin(0.5)
    w.open_path(str(csv))
    w.data.target_box.setCurrentText("grade")
    spin(4)
    names = [n for n, _k, _u in w.data._row_widgets()]
    w.data.columns.setCurrentCell(names.index("m2"), 0)
    spin(0.5)
    w.grab().save(str(out / "data_page_1366x768.png"))
    w.steps.setCurrentRow(1)
    spin(1)
    w.grab().save(str(out / "search_page_1366x768.png"))
    w.space.rows["learning_rate"].set_raw({"low": 0.1, "high": 0.001})
    w.space.rows["learning_rate"].changed.emit()
    spin(0.5)
    w.grab().save(str(out / "search_page_error_1366x768.png"))
    print("\n".join(str(p) for p in sorted(out.glob("*.png"))))
    return 0


if __name__ == "__main__":
    sys.exit(main())
