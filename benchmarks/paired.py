"""Paired timing rounds for the benchmarks: ratios against a reference measured in the same run.

A ratio is measured in rounds; in each round the reference and the candidate run back to back (the
order alternates round to round, so a drift of the machine's load hits both sides alike), and the
round's ratio is candidate / reference. The report is the MEDIAN ratio over the rounds and its
spread (lowest – highest), never the best of N: a best-of-N hides exactly the slow runs a user
meets.
"""

from __future__ import annotations

import os
import statistics
import time
from dataclasses import dataclass, field
from typing import Callable


@dataclass
class Ratio:
    label: str
    goal: float | None = None            # the ratio must be <= goal (or >= goal when at_least)
    at_least: bool = False
    values: list[float] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def add(self, value: float) -> None:
        self.values.append(float(value))

    @property
    def median(self) -> float:
        return statistics.median(self.values) if self.values else float("nan")

    @property
    def spread(self) -> tuple[float, float]:
        return (min(self.values), max(self.values)) if self.values else (float("nan"),) * 2

    def met(self) -> str:
        if self.goal is None or not self.values:
            return ""
        ok = self.median >= self.goal if self.at_least else self.median <= self.goal
        return "met" if ok else "NOT met"

    def line(self, width: int = 58) -> str:
        low, high = self.spread
        goal = "" if self.goal is None else f"goal {'≥' if self.at_least else '≤'} {self.goal:g}"
        text = (f"{self.label:<{width}s} median {self.median:6.3f}  spread {low:.3f}–{high:.3f}"
                f"  (n={len(self.values)})  {goal:<10s} {self.met()}")
        return text + ("  " + "; ".join(self.notes) if self.notes else "")


def timed(fn: Callable[[], object]) -> tuple[float, object]:
    start = time.perf_counter()
    value = fn()
    return time.perf_counter() - start, value


def paired(reference: Callable[[], object], candidate: Callable[[], object], rounds: int,
           ratio: Ratio, *, on_round: Callable[[int, float, float, object, object], None] | None = None,
           per: float = 1.0):
    """``rounds`` rounds of (reference, candidate), order alternating; adds candidate/reference
    (divided by ``per``: a candidate doing ``per`` times the reference's work, per unit)."""
    for r in range(rounds):
        if r % 2 == 0:
            t_ref, v_ref = timed(reference)
            t_new, v_new = timed(candidate)
        else:
            t_new, v_new = timed(candidate)
            t_ref, v_ref = timed(reference)
        ratio.add(t_new / t_ref / per)
        if on_round is not None:
            on_round(r, t_ref, t_new, v_ref, v_new)
    return ratio


def load_avg() -> str:
    return "load average %.2f %.2f %.2f" % os.getloadavg()
