"""The winner check after the search, as rich text for the best panel (from finalize's summary)."""

from __future__ import annotations

import html
from pathlib import Path
from typing import Any, Mapping, Sequence

from labbench.gui import core
from labbench.numbers import number as _n       # the one number format


def winner_html(summary: Mapping[str, Any], metric: str = "", files: Sequence[str] = ()) -> str:
    """The winner check in sentences: hold-out, seed spread, runner-up, warnings and the caution."""
    e = html.escape
    word = e(core.metric_label(summary.get("metric") or metric or "score"))
    # the numbers themselves head the sheet; here the check says what they mean
    parts = [f"<p style='margin:6px 0 0 0'><b>Winner check</b> (trial {e(str(summary.get('trial_number', '?')))}, "
             f"{word}, hold-out {e(_n(summary.get('holdout_score')))}).</p>"]
    comparison = (summary.get("cv_vs_holdout") or {}).get("text")
    if comparison:
        parts.append(f"<p style='margin:2px 0 0 0'>{e(comparison)}</p>")
    runner = summary.get("runner_up") or {}
    if runner.get("text"):
        parts.append(f"<p style='margin:2px 0 0 0'>{e(runner['text'])}</p>")
    stability = summary.get("stability") or (summary.get("scores") or {}).get("stability") or {}
    if stability.get("message") or stability.get("verdict"):
        # maps and groups: do other seeds give the same groups? (labbench.maps.stability)
        words = str(stability.get("verdict") or "").capitalize()
        message = str(stability.get("message") or "")
        if message in (summary.get("warnings") or []):
            message = ""            # said in full among the warnings below
        parts.append(f"<p style='margin:2px 0 0 0'><b>Groups across seeds: {e(words)}</b>"
                     f"{': ' + e(message) if message else ''}</p>")
    for w in summary.get("warnings") or []:
        parts.append(f"<p style='margin:2px 0 0 0'><b>⚠ {e(w)}</b></p>")
    if files:       # the hand-off files the search left, as labbench run leaves them
        folder = Path(files[0]).parent
        names = ", ".join(Path(f).name for f in files)
        parts.append(f"<p style='margin:2px 0 0 0'>Written to <b>{e(str(folder))}</b>: {e(names)}</p>")
    if summary.get("caution"):
        parts.append(f"<p style='margin:2px 0 0 0'><i>{e(summary['caution'])}</i></p>")
    return "".join(parts)
