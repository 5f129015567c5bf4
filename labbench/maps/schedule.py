"""Schedules: how a learning rate, a neighbourhood radius or a neighbourhood range goes from its
initial to its final value over training.

``fraction`` is the share of the training done: 0 at the first update, 1 at the last one (for
online rules one update is one row; for the batch map one update is one epoch). Two shapes:

* ``"exponential"``: v0 * (v1 / v0) ** fraction - the geometric decay of Ritter, Martinetz &
  Schulten (Neural Computation and Self-Organizing Maps, 1992) and of neural gas (Martinetz,
  Berkovich & Schulten 1993); needs v0, v1 > 0;
* ``"linear"``: v0 + (v1 - v0) * fraction - the linearly falling rate and radius Kohonen
  suggests for the ordering phase (Self-Organizing Maps, 3rd ed. 2001, section 3.7).

A final value above the initial one is taken as the initial one (the value stays constant):
schedules in labbench only fall or stay level.
"""

from __future__ import annotations

import numpy as np

DECAYS = ("exponential", "linear")


def decay(initial: float, final: float, fraction: np.ndarray | float, kind: str = "exponential",
          dtype: np.dtype | type = np.float64) -> np.ndarray:
    """The scheduled value at ``fraction`` (array or scalar in [0, 1]), in ``dtype``."""
    v0 = float(initial)
    v1 = min(float(final), v0)
    f = np.asarray(fraction, dtype=np.float64)
    if kind == "exponential":
        if v0 <= 0.0 or v1 <= 0.0:
            raise ValueError(f"an exponential schedule needs positive values (got {v0} and {v1})")
        out = v0 * (v1 / v0) ** f
    elif kind == "linear":
        out = v0 + (v1 - v0) * f
    else:
        raise ValueError(f"decay {kind!r} is not one of {', '.join(DECAYS)}")
    return out.astype(dtype, copy=False)
