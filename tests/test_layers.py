"""The import layers of pyproject.toml ([tool.importlinter]) hold, and breaking one fails.

Runs import-linter (``lint-imports``) in a fresh process on this checkout; the contracts and the
layer picture are in DEVELOPERS.md ("Layers"). The second test proves the check can fail: copies
of the package with one bad import each (Qt in ``labbench/search``, a command module imported by
export, data importing the search, nets importing data) must break a contract.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import importlinter  # noqa: F401  (the test extra installs it: missing, the check must fail)
import pytest

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


@pytest.mark.parametrize("where, line, broken", [
    ("search/_bad.py", "import PySide6\n", "labbench.search._bad -> PySide6"),       # Qt in the core
    ("export/_bad.py", "from labbench.search import commands\n",                     # a command
     "labbench.export._bad -> labbench.search.commands"),
    ("data/_bad.py", "import labbench.search.spec\n",                                # a layer above
     "labbench.data._bad -> labbench.search.spec"),
    ("nets/_bad.py", "import labbench.data\n", "labbench.nets._bad -> labbench.data"),
])
def test_a_broken_layer_fails(tmp_path, where, line, broken):
    shutil.copytree(ROOT / "labbench", tmp_path / "labbench",
                    ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", tmp_path / "pyproject.toml")
    (tmp_path / "labbench" / where).write_text(line, encoding="utf-8")
    done = _lint(tmp_path)
    assert done.returncode != 0
    assert broken in done.stdout, done.stdout[-4000:]
