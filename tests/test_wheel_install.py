"""An ordinary install carries the icons, the style sheet and the demo sets.

The slow test builds the wheel with PyPA's ``build`` (as a user's ``pip install .`` would, in an
isolated build environment), installs it with ``--no-deps`` into a fresh virtual environment that
reuses the already installed dependencies (``--system-site-packages``), and, from a folder outside
the checkout and without PYTHONPATH, runs the demo search from the installed package, writes its
report, and finds the icons and the style sheet inside the installed package. The quick tests
check ``labbench.assets`` and ``labbench demo`` from the checkout.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tomllib
import venv
from pathlib import Path

import pytest

from labbench.assets import copy_demo, demo_dir, demo_path, demo_to_open, resource_dir, resource_path
from labbench.cli import main
from labbench.errors import LabbenchError

ROOT = Path(__file__).resolve().parents[1]
SHIPPED = ("pyproject.toml", "README.md", "DEVELOPERS.md", "MANIFEST.in", "labbench", "resources",
           "demo_sets")


def test_the_package_list_names_every_subpackage():
    """pyproject.toml lists the packages by hand (the data folders are mapped into the package):
    every folder of labbench/ with an __init__.py must be in it, or the wheel would lack it."""
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "labbench").rglob("__init__.py")}
    assert found <= listed, f"add to [tool.setuptools] packages: {sorted(found - listed)}"
    assert listed - found == {"labbench.resources", "labbench.demo_sets"}


def test_assets_are_found_in_the_checkout():
    assert resource_dir() == ROOT / "resources"
    assert resource_path("labbench.qss").is_file()
    assert (resource_path("icons") / "start.svg").is_file()
    assert demo_dir() == ROOT / "demo_sets"
    assert demo_path() == ROOT / "demo_sets" / "orchard.toml"
    assert demo_to_open() == demo_path()          # a checkout is writable: the demo opens in place
    with pytest.raises(LabbenchError, match="orchard.toml"):
        demo_path("nope.toml")


def test_labbench_demo_copies_and_never_overwrites(tmp_path, capsys):
    target = tmp_path / "work"
    assert main(["demo", str(target)]) == 0
    out = capsys.readouterr().out
    assert f"labbench run {target / 'orchard.toml'}" in out
    for name in ("orchard.toml", "orchard.csv", "bakery.toml", "bakery.csv"):
        assert (target / name).read_bytes() == (ROOT / "demo_sets" / name).read_bytes()
    assert copy_demo(target)[0] == target / "orchard.toml"      # same bytes: kept, no error
    (target / "orchard.toml").write_text("# my own edits\n")
    assert main(["demo", str(target)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "orchard.toml" in err[0] and "differs" in err[0]
    assert (target / "orchard.toml").read_text() == "# my own edits\n"
    assert main(["demo", "--where"]) == 0
    assert capsys.readouterr().out.strip() == str(ROOT / "demo_sets")


def _run(args, **kwargs):
    done = subprocess.run(args, capture_output=True, text=True, timeout=240, **kwargs)
    assert done.returncode == 0, f"{args}\n{done.stdout}\n{done.stderr}"
    return done.stdout


@pytest.mark.slow
def test_a_wheel_carries_the_resources_and_runs_the_demo(tmp_path):
    src = tmp_path / "src"
    src.mkdir()
    skip = shutil.ignore_patterns("__pycache__", "*.pyc", "*.db", "*_out", "*.egg-info", "build",
                                  "screenshot.png")
    for name in SHIPPED:
        path = ROOT / name
        if path.is_dir():
            shutil.copytree(path, src / name, ignore=skip)
        else:
            shutil.copy2(path, src / name)
    _run([sys.executable, "-m", "build", "--wheel", "--outdir", str(tmp_path / "dist"), str(src)])
    wheel = next((tmp_path / "dist").glob("labbench-*.whl"))

    env_dir = tmp_path / "venv"
    # The dependencies come from this interpreter's site-packages, added as a plain path: with
    # system_site_packages=True the venv would also run that folder's .pth files, and an editable
    # install of labbench (`pip install -e .`, as CI does) puts an import hook there that would
    # shadow the wheel.
    venv.EnvBuilder(system_site_packages=False, with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    purelib = _run([str(python), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"])
    deps = [p for p in sys.path if p.endswith("site-packages") and "__editable__" not in p]
    Path(purelib.strip(), "_labbench_test_deps.pth").write_text("\n".join(deps) + "\n")
    # without PYTHONPATH: a labbench found there would count as "already installed" for pip
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps", "--no-index",
          "--quiet", str(wheel)], env=env)

    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    env["QT_QPA_PLATFORM"] = "offscreen"
    site = _run([str(python), "-c", "import labbench, sysconfig; print(labbench.__file__); "
                 "print(sysconfig.get_paths()['purelib'])"], cwd=elsewhere, env=env).split("\n")
    package = Path(site[0]).parent
    assert package == Path(site[1]) / "labbench", "labbench was not imported from the wheel"

    # the icons, the style sheet and the demo sets, found inside the installed package
    found = _run([str(python), "-c",
                  "from labbench.assets import resource_path, demo_path, demo_to_open\n"
                  "print(resource_path('labbench.qss')); print(resource_path('icons'))\n"
                  "print(demo_path('orchard.toml')); print(demo_to_open())"],
                 cwd=elsewhere, env=env).split("\n")
    assert Path(found[0]) == package / "resources" / "labbench.qss"
    assert Path(found[0]).read_bytes() == (ROOT / "resources" / "labbench.qss").read_bytes()
    icons = sorted(p.name for p in Path(found[1]).glob("*.svg"))
    assert icons == sorted(p.name for p in (ROOT / "resources" / "icons").glob("*.svg"))
    spec = Path(found[2])
    assert spec == package / "demo_sets" / "orchard.toml" and Path(found[3]) == spec
    for name in ("orchard.csv", "bakery.toml", "bakery.csv", "make_demo_sets.py"):
        assert (spec.parent / name).read_bytes() == (ROOT / "demo_sets" / name).read_bytes()

    # the demo search and its report, run by the installed command
    labbench = env_dir / "bin" / "labbench"
    assert _run([str(labbench), "demo", "--where"], cwd=elsewhere, env=env).strip() == str(spec.parent)
    _run([str(labbench), "run", str(spec), "--trials", "2", "--quiet"], cwd=elsewhere, env=env)
    assert (spec.parent / "orchard_out" / "winner.json").is_file()
    out = _run([str(labbench), "report", str(spec), "-o", str(elsewhere)], cwd=elsewhere, env=env)
    report = (elsewhere / "orchard_report.html").read_text(encoding="utf-8")
    assert str(elsewhere / "orchard_report.html") in out and "<svg" in report and "not a guarantee" in report
