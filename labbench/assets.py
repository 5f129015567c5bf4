"""Where labbench's own files are: the icons and style sheet (``resources/``) and the demo sets
(``demo_sets/``), and the ``labbench demo`` command that copies a demo set out to work on.

The repository keeps both folders at its top level. An installed wheel carries them inside the
package, as ``labbench/resources`` and ``labbench/demo_sets`` (pyproject.toml maps the top-level
folders there). ``resource_dir()`` and ``demo_dir()`` look inside the package first and fall
back to the checkout, so a wheel install, ``pip install -e .`` and a plain ``PYTHONPATH`` checkout
all work. Qt-free: the window asks here for paths and loads them itself.
"""

from __future__ import annotations

import filecmp
import logging
import os
import shutil
import sys
from pathlib import Path

from labbench.errors import LabbenchError

log = logging.getLogger("labbench.assets")

_PACKAGE = Path(__file__).resolve().parent
DEMO_SPECS = ("orchard.toml", "bakery.toml", "pumps.toml")
DEFAULT_DEMO = "orchard.toml"


def _first_dir(name: str) -> Path:
    """``labbench/<name>`` of an installed package, else ``<checkout>/<name>``."""
    for folder in (_PACKAGE / name, _PACKAGE.parent / name):
        if folder.is_dir():
            return folder
    raise LabbenchError(f"{_PACKAGE / name}: labbench's {name} folder is missing; reinstall labbench "
                        f"(pip install labbench) or run it from a full checkout")


def resource_dir() -> Path:
    """The folder holding ``labbench.qss`` and ``icons/``."""
    return _first_dir("resources")


def resource_path(name: str) -> Path:
    """A file in the resources folder, e.g. ``resource_path("icons/start.svg")``."""
    return resource_dir() / name


def demo_dir() -> Path:
    """The folder holding the demo sets (CSV files, their specs, the generator)."""
    return _first_dir("demo_sets")


def demo_path(name: str = DEFAULT_DEMO) -> Path:
    """A demo file, e.g. ``demo_path("orchard.toml")``; LabbenchError when it is not there."""
    path = demo_dir() / name
    if not path.is_file():
        raise LabbenchError(f"{path}: no such demo file; the demo sets are "
                            f"{', '.join(sorted(p.name for p in demo_dir().glob('*.toml')))}")
    return path


def copy_demo(folder: str | Path) -> list[Path]:
    """Copy every demo spec and its CSV into ``folder`` (made if needed); returns the specs there.

    A file already there with the same bytes is kept; one with other bytes is never overwritten
    (one-line LabbenchError naming it), so a user's edits survive a second copy.
    """
    target = Path(folder)
    if target.exists() and not target.is_dir():
        raise LabbenchError(f"{target}: is a file; give a folder to copy the demo sets into")
    source = demo_dir()
    files = [source / n for n in DEMO_SPECS] + [source / n.replace(".toml", ".csv") for n in DEMO_SPECS]
    files.append(source / "README.md")
    for path in files:
        there = target / path.name
        if there.exists() and not filecmp.cmp(path, there, shallow=False):
            raise LabbenchError(f"{there}: already exists and differs from the demo file; "
                                f"choose another folder or move it away (nothing was copied)")
    target.mkdir(parents=True, exist_ok=True)
    for path in files:
        if path.is_file() and not (target / path.name).exists():
            shutil.copy2(path, target / path.name)
    return [target / n for n in DEMO_SPECS]


def demo_to_open(name: str = DEFAULT_DEMO) -> Path:
    """The demo spec ``labbench --demo`` opens: the one in place when its folder is writable (a
    checkout, a virtual environment), else a copy in ``~/labbench_demo`` (a read-only install),
    since a search writes its database and output folder beside its spec."""
    if os.access(demo_dir(), os.W_OK):
        return demo_path(name)
    copy_demo(Path.home() / "labbench_demo")
    return Path.home() / "labbench_demo" / name


# -- labbench demo -------------------------------------------------------------------------------

def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "demo", help="copy the invented demo sets into a folder to run them",
        description="Copy the demo sets (orchard: classes, bakery: a quantity, pumps: no target, "
        "for the maps) with their spec "
        "files into FOLDER, then run one with `labbench run FOLDER/orchard.toml`. "
        "--where prints where the installed demo files are instead.")
    p.add_argument("folder", nargs="?", default="labbench_demo",
                   help="where to copy them (default: ./labbench_demo)")
    p.add_argument("--where", action="store_true",
                   help="print the folder of the installed demo sets and copy nothing")
    p.set_defaults(func=_run_demo)


def _run_demo(args) -> int:
    if args.where:
        print(demo_dir())
        return 0
    specs = copy_demo(args.folder)
    print(f"demo sets copied into {Path(args.folder).resolve()}; run one with:", file=sys.stdout)
    for spec in specs:
        print(f"  labbench run {spec}")
    return 0
