"""The standalone prediction script written next to a bundle (numpy + the standard library only).

The script's source is :mod:`labbench.export.standalone`, a real module of this package (so it is
tested like the rest); the copy written beside a bundle only has its bundle file name filled in.
"""

from __future__ import annotations

import os
from pathlib import Path

SNIPPET_NAME = "predict_with_numpy.py"
_SOURCE = Path(__file__).with_name("standalone.py")
_PLACEHOLDER = 'BUNDLE = "model.npz"'


def snippet_text(bundle_name: str) -> str:
    """The script's text for a bundle called ``bundle_name`` (a file name in the same folder)."""
    source = _SOURCE.read_text(encoding="utf-8")
    if _PLACEHOLDER not in source:  # a change of standalone.py must keep the placeholder line
        raise RuntimeError("labbench.export.standalone lost its BUNDLE line")
    return source.replace(_PLACEHOLDER, f"BUNDLE = {bundle_name!r}", 1)


def write_snippet(bundle_path: str | os.PathLike, out_path: str | os.PathLike | None = None) -> Path:
    """Write the script beside the bundle (default ``predict_with_numpy.py``); returns its path."""
    bundle = Path(bundle_path)
    target = Path(out_path) if out_path is not None else bundle.with_name(SNIPPET_NAME)
    if target.resolve().parent != bundle.resolve().parent:
        raise ValueError("the script looks for the bundle in its own folder; write it beside the bundle")
    from labbench.fileio import write_text

    write_text(target, snippet_text(bundle.name))
    return target
