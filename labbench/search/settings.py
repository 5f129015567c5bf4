"""The network family's settings table under its old name, and the setting kinds.

``SETTINGS`` is the network family's table (declared once in ``labbench.families.network``); the
window builds its editors and tooltips from it. The kinds (``Fixed``, ``FloatRange``,
``IntRange``, ``Choices``), ``SettingInfo`` and ``parse_setting`` live in
``labbench.families.settings`` and are shared by every family.
"""

from __future__ import annotations

from labbench.families.network import MAX_LAYERS, SETTINGS, SETTINGS_KEYS
from labbench.families.settings import (Choices, Fixed, FloatRange, IntRange, Setting,
                                        SettingInfo, parse_setting, show, spec_error)

__all__ = ["SETTINGS", "SETTINGS_KEYS", "MAX_LAYERS", "Fixed", "FloatRange", "IntRange",
           "Choices", "Setting", "SettingInfo", "parse_setting", "show", "spec_error"]
