"""Model families: the one seam between the search / export layers and a kind of model.

``Family`` (labbench.families.base) is the interface; ``get_family(name)`` finds one by name
(labbench.families.registry); the multilayer network (labbench.families.network) is the first.
See DEVELOPERS.md, "How to add a model family".
"""

from __future__ import annotations

from labbench.families.base import Family, Training
from labbench.families.registry import DEFAULT, ENV, family_names, get_family, register

__all__ = ["Family", "Training", "get_family", "family_names", "register", "DEFAULT", "ENV"]
