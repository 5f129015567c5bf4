"""The winner check after the search, as rich text for the best panel (from finalize's summary)."""

from __future__ import annotations

import html
import math
from typing import Any, Mapping

from labbench.gui import core


def _n(v: Any) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    return f"{v:.4g}" if isinstance(v, float) else str(v)


def winner_html(summary: Mapping[str, Any], metric: str = "") -> str:
    """Hold-out score, seed spread, runner-up, warnings and the caution, all from the summary."""
    e = html.escape
    word = e(core.metric_label(summary.get("metric") or metric or "score"))
    parts = [f"<h3 style='margin-bottom:2px'>Winner: trial {e(_n(summary.get('trial_number')))}</h3>"]
    rows = [("Cross-validated", f"{_n(summary.get('cv_mean'))} ± {_n(summary.get('cv_std'))}"),
            (f"Hold-out ({_n(summary.get('holdout_rows'))} rows, scored once)",
             _n(summary.get("holdout_score")))]
    spread = summary.get("seed_spread") or {}
    if spread.get("scores"):
        rows.append((f"Across {len(spread['scores'])} seeds",
                     f"{_n(spread.get('mean'))} ± {_n(spread.get('std'))} "
                     f"({_n(spread.get('min'))} to {_n(spread.get('max'))})"))
    else:
        rows.append(("Across seeds", "not measured"))
    parts.append("<table>" + "".join(
        f"<tr><td style='padding-right:12px'>{e(a)}</td><td><b>{e(b)}</b></td></tr>" for a, b in rows)
        + f"</table><p style='margin-top:2px'>All scores: {word}.</p>")
    comparison = (summary.get("cv_vs_holdout") or {}).get("text")
    if comparison:
        parts.append(f"<p>{e(comparison)}</p>")
    runner = summary.get("runner_up") or {}
    if runner.get("text"):
        parts.append(f"<p>{e(runner['text'])}</p>")
    for w in summary.get("warnings") or []:
        parts.append(f"<p><b>⚠ {e(w)}</b></p>")
    if summary.get("caution"):
        parts.append(f"<p><i>{e(summary['caution'])}</i></p>")
    return "".join(parts)
