"""The ``labbench`` command line.

``labbench``                 opens the window
``labbench SPEC.toml``       opens the window with that experiment loaded
``labbench --demo``          opens the window on a bundled demo set
``labbench run SPEC.toml``   runs the search headless (see ``labbench run --help``)
``labbench show SPEC|URL``   lists the trials of a search
``labbench predict ...``     predictions from a saved model bundle
``labbench report SPEC|URL`` writes the HTML report of a search
``labbench demo [FOLDER]``   copies the bundled demo sets into a folder (``--where``: where they are)

Exit codes: 0 done, 2 bad input (one line, no traceback), 130 interrupted (Ctrl-C).
Each subcommand lives next to the code it drives and registers itself through
``add_parser(subparsers)``, returning nothing; its handler is ``args.func(args) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import signal
import sys
import threading

from labbench import __version__
from labbench.assets import demo_to_open
from labbench.errors import LabbenchError

EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_INTERRUPTED = 130

# module path -> it defines add_parser(subparsers)
_COMMAND_MODULES = (
    "labbench.search.commands",   # run, show
    "labbench.export.commands",   # predict, report
    "labbench.assets",            # demo
)
_SUBCOMMANDS = ("run", "show", "predict", "report", "demo")

log = logging.getLogger("labbench")


def _setup_logging(verbose: int, quiet: bool) -> None:
    level = logging.WARNING
    if verbose == 1:
        level = logging.INFO
    elif verbose >= 2:
        level = logging.DEBUG
    if quiet:
        level = logging.ERROR
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("%(levelname)s %(name)s: %(message)s"))
    root = logging.getLogger("labbench")
    root.handlers[:] = [handler]
    root.setLevel(level)
    root.propagate = False


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="labbench",
        description="Tune small neural networks on tabular data: cross-validated search, "
        "hold-out check, seed spread, export.",
    )
    parser.add_argument("--version", action="version", version=f"labbench {__version__}")
    parser.add_argument("-v", "--verbose", action="count", default=0, help="more log lines (-vv: debug)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in _COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:  # a subcommand package not written yet
            if exc.name != name:
                raise
            continue
        module.add_parser(sub)
    return parser


def _gui_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="labbench", description="Open the labbench window.")
    parser.add_argument("spec", nargs="?", help="a spec file (.toml) or a CSV to open")
    parser.add_argument("--demo", action="store_true", help="open the window on a bundled demo set")
    parser.add_argument("-v", "--verbose", action="count", default=0)
    return parser


def _terminate(signum, frame) -> None:
    raise KeyboardInterrupt          # SIGTERM ends like Ctrl-C: temporary files are cleaned up


def main(argv: list[str] | None = None) -> int:
    saved = None                     # the window keeps the default SIGTERM behaviour
    argv = list(sys.argv[1:] if argv is None else argv)
    subcommand = next((a for a in argv if not a.startswith("-")), None) in _SUBCOMMANDS
    if subcommand and threading.current_thread() is threading.main_thread():
        saved = signal.signal(signal.SIGTERM, _terminate)
    try:
        return _main(argv)
    finally:
        if saved is not None:
            signal.signal(signal.SIGTERM, saved)


def _main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    first = next((a for a in argv if not a.startswith("-")), None)
    wants_help_or_version = any(a in ("-h", "--help", "--version") for a in argv) and first is None
    try:
        if first in _SUBCOMMANDS or wants_help_or_version:
            parser = build_parser()
            args = parser.parse_args(argv)
            _setup_logging(args.verbose, getattr(args, "quiet", False))
            if not getattr(args, "func", None):
                parser.print_help()
                return EXIT_BAD_INPUT
            return int(args.func(args))
        args = _gui_parser().parse_args(argv)
        _setup_logging(args.verbose, False)
        from labbench.gui.app import run_app  # Qt is loaded only here

        if args.demo:      # found through labbench.assets: also from an installed wheel
            return int(run_app(spec=str(demo_to_open()), demo=False))
        return int(run_app(spec=args.spec, demo=args.demo))
    except LabbenchError as exc:
        print(f"labbench: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("labbench: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED


def entry() -> None:
    sys.exit(main())


if __name__ == "__main__":
    entry()
