"""Scaling of a regression target, fitted on training rows only.

A network whose output must reach values like 65,000 from inputs scaled to mean 0 and sd 1 needs
huge output weights, so a learning rate a user would pick (1e-3 to 1e-1) barely moves it; the
target is therefore trained in scaled units (common practice) and every score, prediction and
export maps the output back with :meth:`TargetScaler.inverse`.

Methods (the ``[data] target_scaling`` key):

* ``"standard"`` (default): ``z = (y - center) / scale`` with the training mean and standard
  deviation (``ddof=0``); ``scale`` is 1 when the training target is constant.
* ``"log"``: ``z = (log(y) - center) / scale`` with the mean and standard deviation of ``log(y)``
  over the training rows, for positive, right-skewed targets (prices, counts of things that are
  never zero, durations). The natural log, not ``log1p``: ``log`` treats 0.01–0.1 and 1000–10000
  alike (a model of relative error whatever the unit), while ``log1p`` is close to linear for
  small values and so depends on the unit the column happens to be written in. Zero and negative
  values are refused with one :class:`DataError` line naming the column (use ``"standard"``, or
  shift the column so that it is positive).
* ``"none"``: the target as it is (``center`` 0, ``scale`` 1).

Inverse: ``y = center + scale * z`` (``standard``, ``none``), ``y = exp(center + scale * z)``
(``log``), always computed in float64. The state is plain Python (``method``, ``center``,
``scale``), so a bundle keeps it in its JSON metadata.
"""

from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

from labbench.errors import DataError

TARGET_SCALINGS = ("standard", "log", "none")
DEFAULT_TARGET_SCALING = "standard"


class TargetScaler:
    """Fit on training targets; ``transform`` to training units, ``inverse`` back to the target's own."""

    def __init__(self, method: str = DEFAULT_TARGET_SCALING, column: str = "the target"):
        if method not in TARGET_SCALINGS:
            raise DataError(f"target_scaling = {method!r}; use \"standard\" (mean 0, sd 1), \"log\" "
                            "(log of a positive target, then mean 0, sd 1) or \"none\"")
        self.method = method
        self.column = str(column)
        self.center = 0.0
        self.scale = 1.0
        self.fitted = method == "none"

    # ------------------------------------------------------------------ fitting
    def _check_positive(self, y: np.ndarray, where: str) -> None:
        bad = np.flatnonzero(~(y > 0))
        if bad.size:
            shown = ", ".join(f"{v:g}" for v in y[bad[:3]])
            raise DataError(
                f"{where}column {self.column!r}: target_scaling = \"log\" needs positive values, but "
                f"{bad.size} row(s) hold zero or less ({shown}{', ...' if bad.size > 3 else ''}); use "
                "target_scaling = \"standard\", or shift the column so that every value is above 0")

    def fit(self, y, where: str = "") -> "TargetScaler":
        """Fit on the training targets ``y`` (and nothing else). ``where``: e.g. "data.csv: "."""
        y = np.asarray(y, dtype=np.float64).reshape(-1)
        if self.method == "none":
            self.center, self.scale = 0.0, 1.0
        else:
            if self.method == "log":
                self._check_positive(y, where)
                y = np.log(y)
            if y.size == 0 or not np.all(np.isfinite(y)):
                raise DataError(f"{where}column {self.column!r}: the training target is empty or "
                                "not finite; check the target column")
            center, scale = float(np.mean(y)), float(np.std(y))
            self.center = center
            self.scale = scale if math.isfinite(scale) and scale > 0 else 1.0
        self.fitted = True
        return self

    def fit_transform(self, y, where: str = "") -> np.ndarray:
        return self.fit(y, where).transform(y, where)

    # ------------------------------------------------------------------ mapping
    def transform(self, y, where: str = "") -> np.ndarray:
        """Target units -> training units (float64)."""
        y = np.asarray(y, dtype=np.float64)
        if self.method == "none":
            return y.copy()
        if self.method == "log":
            self._check_positive(y.reshape(-1), where)
            y = np.log(y)
        return (y - self.center) / self.scale

    def inverse(self, z) -> np.ndarray:
        """Training units (a network's output) -> the target's own units (float64)."""
        z = np.asarray(z, dtype=np.float64)
        if self.method == "none":
            return z.copy()
        y = z * self.scale + self.center
        if self.method == "log":
            with np.errstate(over="ignore"):
                y = np.exp(y)
        return y

    __call__ = inverse   # a scaler is the per-member inverse StackTrainer takes

    @property
    def is_identity(self) -> bool:
        return self.method == "none"

    # ------------------------------------------------------------------ state
    def to_state(self) -> dict[str, Any]:
        return {"method": self.method, "center": float(self.center), "scale": float(self.scale)}

    @classmethod
    def from_state(cls, state: Mapping[str, Any] | None, column: str = "the target") -> "TargetScaler":
        """Rebuild from :meth:`to_state`; ``None`` (a bundle written before target scaling
        existed) gives ``"none"``. Raises ValueError on a malformed state."""
        if state is None:
            return cls("none", column)
        if not isinstance(state, Mapping):
            raise ValueError(f"target scaling state must be a table, not {type(state).__name__}")
        method = state.get("method")
        if method not in TARGET_SCALINGS:
            raise ValueError(f"target scaling method {method!r} is not one of {', '.join(TARGET_SCALINGS)}")
        center, scale = state.get("center", 0.0), state.get("scale", 1.0)
        for name, value in (("center", center), ("scale", scale)):
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise ValueError(f"target scaling {name} {value!r} is not a finite number")
        if scale <= 0:
            raise ValueError(f"target scaling scale {scale!r} is not above 0")
        out = cls(method, column)
        out.center, out.scale, out.fitted = float(center), float(scale), True
        return out

    def __repr__(self) -> str:
        return f"TargetScaler({self.method!r}, center={self.center!r}, scale={self.scale!r})"
