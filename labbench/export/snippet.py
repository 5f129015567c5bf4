"""The standalone prediction script written next to a bundle (numpy + the standard library only).

The script's source is :mod:`labbench.export.standalone`, a real module of this package (so it is
tested like the rest); the copy written beside a bundle has its bundle file name filled in and,
for a model family other than the network, that family's numpy code (``Family.numpy_source``)
added before the script's entry point.
"""

from __future__ import annotations

import os
from pathlib import Path

SNIPPET_NAME = "predict_with_numpy.py"
_SOURCE = Path(__file__).with_name("standalone.py")
_PLACEHOLDER = 'BUNDLE = "model.npz"'
_ENTRY = '\nif __name__ == "__main__":'


def snippet_text(bundle_name: str, family: str = "network") -> str:
    """The script's text for a bundle called ``bundle_name`` (a file name in the same folder)
    holding a model of ``family``."""
    from labbench.families import get_family

    source = _SOURCE.read_text(encoding="utf-8")
    if _PLACEHOLDER not in source or _ENTRY not in source:  # standalone.py must keep both lines
        raise RuntimeError("labbench.export.standalone lost its BUNDLE line or its entry point")
    extra = get_family(family).numpy_source.strip()
    if extra:
        source = source.replace(_ENTRY, f"\n# the {family} family's model\n{extra}\n\n{_ENTRY}", 1)
    return source.replace(_PLACEHOLDER, f"BUNDLE = {bundle_name!r}", 1)


def write_snippet(bundle_path: str | os.PathLike, out_path: str | os.PathLike | None = None) -> Path:
    """Write the script beside the bundle (default ``predict_with_numpy.py``); returns its path."""
    bundle = Path(bundle_path)
    target = Path(out_path) if out_path is not None else bundle.with_name(SNIPPET_NAME)
    if target.resolve().parent != bundle.resolve().parent:
        raise ValueError("the script looks for the bundle in its own folder; write it beside the bundle")
    from labbench.fileio import write_text

    from labbench.export.bundle import bundle_metadata

    family = bundle_metadata(bundle).get("family", "network")
    write_text(target, snippet_text(bundle.name, family))
    return target
