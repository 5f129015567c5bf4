"""labbench's own colours, as plain mappings (no Qt, no imports): the window and the report share them.

A bench sheet is drawn in ink on paper: a warm off-white paper with near-black ink (light), or a
deep blue-grey slate with chalk (dark). One accent marks the winner (a bottle green), one the trial
being trained now (amber), one the trial the user picked (violet). Pruned trials are slate blue,
failures brick red, trials stopped by the user plain grey. The band of learning curves is a tint of
the ink, so it stays quiet behind the three lines that matter.

Every colour is a ``#rrggbb`` string. ``LIGHT`` and ``DARK`` have the same keys:

- ``paper``, ``ink``, ``muted`` (secondary text), ``rule`` (grid and divider lines), ``panel``
  (a card's background, a shade off the paper)
- ``best``, ``running``, ``selected``, ``complete``, ``pruned``, ``failed``, ``cancelled``, ``waiting``
  (one per trial state and role)
- ``band`` (the 10-90 % envelope of the learning curves), ``band_mid`` (its median line),
  ``good_span`` (where the top-quartile trials sit on a setting's range), ``range`` (the whole range)
- ``climb`` (the best-so-far step line), ``milestone`` (a point where the best improved)
"""

LIGHT = {
    "paper": "#fbfaf6",
    "panel": "#f3f1ea",
    "ink": "#22262b",
    "muted": "#6b7079",
    "rule": "#d9d6cc",
    "best": "#1f8a5b",
    "running": "#d9822b",
    "selected": "#7a3fb0",
    "complete": "#5b6472",
    "pruned": "#6f7fb8",
    "failed": "#b8433a",
    "cancelled": "#8e8e8e",
    "waiting": "#8e8e8e",
    "band": "#9aa3ae",
    "band_mid": "#6b7582",
    "good_span": "#1f8a5b",
    "range": "#d4d8dd",
    "climb": "#1f8a5b",
    "milestone": "#145c3c",
}

DARK = {
    "paper": "#1d2126",
    "panel": "#252a30",
    "ink": "#e6e3da",
    "muted": "#a0a6ae",
    "rule": "#3a4048",
    "best": "#4cc38a",
    "running": "#f0a35e",
    "selected": "#c39bef",
    "complete": "#a9b1bd",
    "pruned": "#98a6d8",
    "failed": "#e2766c",
    "cancelled": "#9a9a9a",
    "waiting": "#9a9a9a",
    "band": "#6d7784",
    "band_mid": "#9aa4b1",
    "good_span": "#4cc38a",
    "range": "#3f4650",
    "climb": "#4cc38a",
    "milestone": "#8fe0b6",
}



def colours(dark: bool = False) -> dict:
    """The mapping for a light (default) or dark background."""
    return DARK if dark else LIGHT
