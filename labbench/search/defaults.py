"""The search space a network spec gets when it has no ``[space]`` section (and a new table in the window).

A first search should search: the settings a practitioner would otherwise pick by hand (learning
rate, layers, units, batch size, activation, weight decay) get ranges that cover what works for
small tabular networks, and ``epochs`` is a generous maximum that early stopping cuts short, so
it needs no search of its own. A spec with a ``[space]`` section keeps its meaning: every setting
it leaves out is fixed at that setting's default.

The ranges are common practice for Adam-trained tabular networks (learning rates 1e-4 to 1e-1 on a
log scale, tens to a few hundred units, one or two layers, weight decay off or 1e-6 to 1e-2); they
were checked by ``benchmarks/bench_quality.py`` (the README's quality table), not derived.
"""

from __future__ import annotations

from typing import Any

from labbench.families.network import DEFAULT_SPACE   # declared with the network's settings

__all__ = ["DEFAULT_SPACE", "default_space_dict"]


def default_space_dict() -> dict[str, Any]:
    """A fresh copy of the default searched space, in the spec file's shape."""
    return {k: (dict(v) if isinstance(v, dict) else v) for k, v in DEFAULT_SPACE.items()}
