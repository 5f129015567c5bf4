"""How labbench writes a number for people: the one place for it (CLI, report, window, files).

The rule (``number``): **four significant digits, trailing zeros kept**, so a column of scores
lines up and ``0.8`` reads as the measured ``0.8000`` rather than a rounded guess:

* ``0.8`` → ``0.8000``, ``12.5`` → ``12.50``, ``1234.56`` → ``1235``, ``12345.6`` → ``12346``
  (a whole number below 100 000 is never put in exponent form);
* below 0.001 or from 100 000 on, exponent form with the same four digits and a short
  exponent: ``0.000123`` → ``1.230e-4``, ``123456`` → ``1.235e5``;
* ``0`` → ``0``; ``None`` and NaN → ``missing`` (``n/a`` by default); ±inf → ``inf`` / ``-inf``.

``digits`` changes the number of significant digits (e.g. 3 for a setting in a dense table).
Also here: ``setting`` (a setting's value: ``on``/``off`` for switches), ``duration``
(``45s``, ``3m05s``, ``2h10m``; ``long=True``: ``3 min 05 s``), ``percent`` (a share as ``42%``) and ``tick`` (an axis label
whose decimals follow the tick step). Plain Python, no Qt: the window imports the same functions.
"""

from __future__ import annotations

import math
from typing import Any

DIGITS = 4                 # significant digits of a score or measured number
SMALL, LARGE = 1e-3, 1e5   # outside [SMALL, LARGE) a number is written in exponent form


def _exponent(text: str) -> str:
    """``1.230e-04`` → ``1.230e-4``; ``1.235e+05`` → ``1.235e5``."""
    mantissa, exp = text.split("e")
    return f"{mantissa}e{int(exp)}"


def number(value: Any, digits: int = DIGITS, *, missing: str = "n/a") -> str:
    """A score or any measured number by the module's rule (see the module text)."""
    if value is None or isinstance(value, bool):
        return missing if value is None else str(value)
    try:
        x = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(x):
        return missing
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if x == 0:
        return "0"
    digits = max(1, int(digits))
    rounded = float(f"{x:.{digits}g}")          # 9.99996 → 10.0 before the decimals are chosen
    if not SMALL <= abs(rounded) < LARGE:
        return _exponent(f"{x:.{digits - 1}e}")
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(rounded))))
    return f"{x:.{decimals}f}"


def setting(value: Any) -> str:
    """A setting's value: switches as on/off, numbers by ``number`` without trailing zeros (a
    setting is exact, not measured: momentum ``0.9``, learning rate ``3e-4``), text as it is."""
    if isinstance(value, bool):
        return "on" if value else "off"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        text = number(value)
        mantissa, e, exp = text.partition("e")
        if "." in mantissa:
            mantissa = mantissa.rstrip("0").rstrip(".")
        return mantissa + e + exp
    return "" if value is None else str(value)


def duration(seconds: float | None, *, long: bool = False, missing: str = "?") -> str:
    """Seconds as a short text: ``45s``, ``3m05s``, ``2h10m`` (a progress line, a table column);
    ``long``: ``45 s``, ``3 min 05 s``, ``2 h 10 min`` (a sentence, a label in the window)."""
    if seconds is None or (isinstance(seconds, float) and not math.isfinite(seconds)):
        return missing
    s = int(round(max(0.0, float(seconds))))
    h, m, sec = s // 3600, (s % 3600) // 60, s % 60
    if s < 60:
        return f"{s} s" if long else f"{s}s"
    if s < 3600:
        return f"{m} min {sec:02d} s" if long else f"{m}m{sec:02d}s"
    return f"{h} h {m:02d} min" if long else f"{h}h{m:02d}m"


def percent(share: float | None, digits: int = 0, *, missing: str = "n/a") -> str:
    """A share of 1 as a percentage: ``0.4231`` → ``42%`` (``digits`` decimals)."""
    if share is None or not math.isfinite(float(share)):
        return missing
    return f"{100.0 * float(share):.{digits}f}%"


def tick(value: float, step: float) -> str:
    """An axis label: as many decimals as the tick step needs (a 0.25 step: two), exponent form
    outside [SMALL, LARGE) like ``number``."""
    if value == 0:
        return "0"
    if abs(value) >= LARGE or abs(value) < SMALL:
        return _exponent(f"{value:.1e}")
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    if step * 10**decimals % 1 > 1e-6:          # e.g. a 0.25 step needs one more decimal
        decimals += 1
    return f"{value:.{decimals}f}"
