"""Test-wide settings: Qt renders offscreen, BLAS stays single-threaded per process."""

from __future__ import annotations

import os

# An empty QT_QPA_PLATFORM makes Qt try xcb and abort: set it when unset *or* empty.
if not os.environ.get("QT_QPA_PLATFORM"):
    os.environ["QT_QPA_PLATFORM"] = "offscreen"
