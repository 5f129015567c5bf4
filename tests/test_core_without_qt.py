"""The core must import on a machine with no display and never load Qt (DESIGN rule)."""

from __future__ import annotations

import pkgutil
import subprocess
import sys

import labbench

CORE_PACKAGES = [
    m.name
    for m in pkgutil.walk_packages(labbench.__path__, prefix="labbench.")
    if m.name.split(".")[1] not in ("gui", "__main__")
]


def test_every_core_module_imports_without_loading_qt():
    modules = [m for m in CORE_PACKAGES if not m.startswith("labbench.gui")]
    code = (
        "import importlib, sys\n"
        f"mods = {modules!r}\n"
        "for m in mods:\n"
        "    importlib.import_module(m)\n"
        "bad = sorted(k for k in sys.modules if k.split('.')[0] in ('PySide6', 'pyqtgraph', 'superqt', 'shiboken6'))\n"
        "print(len(mods)); assert not bad, bad\n"
    )
    env = {"PATH": "/usr/bin:/bin", "HOME": "/tmp"}  # no DISPLAY, no QT_QPA_PLATFORM
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert out.returncode == 0, out.stderr
    assert int(out.stdout.strip()) == len(modules) >= 2
