"""The import layers of pyproject.toml ([tool.importlinter]) hold, and breaking one fails.

Runs import-linter (``lint-imports``) in a fresh process on this checkout; the contracts and the
layer picture are in DEVELOPERS.md ("Layers"). The second test proves the check can fail: a copy
of the package with a Qt import in ``labbench/search`` must break the "core never imports Qt"
contract.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

pytest.importorskip("importlinter")

ROOT = Path(__file__).resolve().parents[1]
LINT = "import sys; from importlinter.cli import lint_imports_command; sys.exit(lint_imports_command())"


def _lint(root: Path) -> subprocess.CompletedProcess:
    """lint-imports on the package under ``root`` with ``root``'s pyproject.toml."""
    env = {**os.environ, "PYTHONPATH": str(root)}
    return subprocess.run(
        [sys.executable, "-c", LINT, "--no-cache", "--no-logo", str(root / "pyproject.toml")],
        cwd=root, env=env, capture_output=True, text=True, timeout=300)


def test_layers_hold():
    done = _lint(ROOT)
    assert done.returncode == 0, done.stdout[-4000:] + done.stderr[-2000:]
    assert "0 broken" in done.stdout


def test_a_qt_import_in_the_core_fails(tmp_path):
    shutil.copytree(ROOT / "labbench", tmp_path / "labbench",
                    ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", tmp_path / "pyproject.toml")
    (tmp_path / "labbench" / "search" / "_bad.py").write_text("import PySide6\n", encoding="utf-8")
    done = _lint(tmp_path)
    assert done.returncode != 0
    assert "labbench.search._bad -> PySide6" in done.stdout, done.stdout[-4000:]
