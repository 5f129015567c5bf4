"""The known model families, by name.

The network family and the four map and group families (som, competitive, neural_gas, hebbian;
labbench.families.maps) are built in. Another family registers itself with one line,
``labbench.families.register(FAMILY)``, or, for processes labbench starts itself (``labbench run``,
its worker processes, ``labbench predict``), through the environment variable
``LABBENCH_FAMILIES``: a comma-separated list of ``module:attribute`` naming ``Family`` objects,
imported on the first look-up in every process (workers inherit the variable).
"""

from __future__ import annotations

import importlib
import os
from typing import Any

from labbench.errors import SpecError

ENV = "LABBENCH_FAMILIES"
DEFAULT = "network"

_FAMILIES: dict[str, Any] = {}
_loaded_env: str | None = None


def register(family: Any) -> Any:
    """Make ``family`` known under ``family.name`` (a later one of the same name replaces it)."""
    if not getattr(family, "name", ""):
        raise ValueError("a family needs a name")
    _FAMILIES[family.name] = family
    return family


def _load() -> None:
    global _loaded_env
    if DEFAULT not in _FAMILIES:
        from labbench.families.maps import FAMILIES as MAP_FAMILIES
        from labbench.families.network import FAMILY

        register(FAMILY)
        for family in MAP_FAMILIES:
            register(family)
    extra = os.environ.get(ENV, "")
    if extra == _loaded_env:
        return
    _loaded_env = extra
    for item in filter(None, (part.strip() for part in extra.split(","))):
        module, _, attr = item.partition(":")
        try:
            register(getattr(importlib.import_module(module), attr or "FAMILY"))
        except (ImportError, AttributeError) as exc:
            raise SpecError(f"{ENV}: cannot load the family {item!r} ({exc}); write "
                            "module:attribute of an importable module") from None


def family_names() -> tuple[str, ...]:
    _load()
    return tuple(_FAMILIES)


def get_family(name: str | None = None, source: str | None = None, key: str = "model.family"):
    """The family called ``name`` (None: the network); an unknown name is a one-line SpecError."""
    _load()
    name = DEFAULT if name is None else name
    if name not in _FAMILIES:
        where = f"{source}: " if source else ""
        raise SpecError(f"{where}{key}: {name!r} is not a known model family; use one of "
                        + ", ".join(f'"{n}"' for n in _FAMILIES))
    return _FAMILIES[name]
