"""The report's picture of a self-organising map: its U-matrix (Ultsch 1990) drawn on the map's
own grid (squares or pointy-topped hexagons), in labbench's ink-on-paper colours, with the group
borders, the groups' numbers and each unit's hit count (see ``report_style`` for the SVG output).
matplotlib is imported only when a picture is drawn.
"""

from __future__ import annotations

import numpy as np

from labbench.export.report_style import PALETTE as C, axes, drawn_in_style, new_figure, svg_text
from labbench.families.maps_export import grid_neighbours, u_matrix
from labbench.maps import grid_positions

MAX_HIT_LABELS = 225          # write hit counts in the cells of maps up to 15 x 15
MAX_GROUP_LABELS = 12         # name the groups on the map up to this many


def merged(record) -> bool:
    """Whether the map's units were merged into fewer groups (else every unit is its own)."""
    return record.n_groups < record.n_units


# -- pictures -------------------------------------------------------------------------------------

def _cmap():
    from matplotlib.colors import LinearSegmentedColormap

    # labbench's ink on paper: low U-heights (inside a group) light, high ones (borders) dark;
    # the light end is the rule colour, so a cell never vanishes into the paper
    return LinearSegmentedColormap.from_list("labbench_u", [C["rule"], C["band"], C["ink"]])


def _border_segments(record) -> list[tuple[tuple[float, float], tuple[float, float]]]:
    """The cell edges between grid neighbours that lie in different groups."""
    pos = record.positions
    hexagonal = record.topology == "hexagonal"
    half = 1 / (2 * np.sqrt(3)) if hexagonal else 0.5        # half the length of a shared edge
    segments = []
    for u, nb in enumerate(grid_neighbours(record.shape, record.topology or "rectangular")):
        for v in nb:
            if v <= u or record.unit_group[u] == record.unit_group[v]:
                continue
            step = pos[v] - pos[u]
            if abs(np.hypot(*step) - 1.0) > 1e-9:       # a diagonal: no shared edge
                continue
            mid, perp = (pos[u] + pos[v]) / 2, np.array([-step[1], step[0]])
            segments.append((tuple(mid - perp * half), tuple(mid + perp * half)))
    return segments


@drawn_in_style
def u_matrix_picture(record, hits: np.ndarray | None = None) -> str:
    """The U-matrix of a map as cells on its grid (squares or hexagons), group borders drawn as
    ink lines, each group's number at its middle, and each unit's hit count when rows are given."""
    from matplotlib.collections import LineCollection, PatchCollection
    from matplotlib.patches import Rectangle, RegularPolygon

    rows, cols = record.shape
    heights = u_matrix(record).reshape(-1)
    pos = grid_positions(rows, cols, record.topology or "rectangular")
    hexagonal = record.topology == "hexagonal"
    aspect_h = (rows - 1) * (np.sqrt(3) / 2 if hexagonal else 1.0) + 1.2
    width = min(7.2, 1.6 + 0.42 * (cols + 1))
    fig = new_figure(min(6.5, max(2.4, 0.42 * aspect_h + 0.8)), width)
    ax = axes(fig)
    if hexagonal:
        cells = [RegularPolygon(p, numVertices=6, radius=1 / np.sqrt(3)) for p in pos]
    else:
        cells = [Rectangle((x - 0.5, y - 0.5), 1, 1) for x, y in pos]
    patches = PatchCollection(cells, cmap=_cmap(), edgecolor=C["paper"], linewidth=0.6)
    patches.set_array(heights)
    ax.add_collection(patches)
    if merged(record):
        ax.add_collection(LineCollection(_border_segments(record), colors=C["best"], linewidths=2.2))
    norm = patches.norm
    norm.autoscale(heights)
    if hits is not None and len(heights) <= MAX_HIT_LABELS:
        for (x, y), h, n in zip(pos, heights, hits):
            dark = norm(h) > 0.55
            ax.text(x, y, str(int(n)), ha="center", va="center", fontsize=7,
                    color=C["paper"] if dark else C["ink"])
    for j in range(record.n_groups if merged(record) and record.n_groups <= MAX_GROUP_LABELS else 0):
        members = pos[record.unit_group == j]
        centre = members.mean(axis=0)
        anchor = members[np.argmin(((members - centre) ** 2).sum(axis=1))]
        ax.annotate(f"group {j}", anchor, xytext=(0, 9 if hits is not None else 0),
                    textcoords="offset points", ha="center", va="center", fontsize=8,
                    fontweight="bold", color=C["milestone"],
                    bbox={"boxstyle": "round,pad=0.15", "fc": C["paper"], "ec": "none", "alpha": 0.85})
    pad = 0.7
    ax.set_xlim(pos[:, 0].min() - pad, pos[:, 0].max() + pad)
    ax.set_ylim(pos[:, 1].max() + pad, pos[:, 1].min() - pad)       # row 0 at the top
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    for side in ax.spines.values():
        side.set_visible(False)
    bar = fig.colorbar(patches, ax=ax, shrink=0.8, pad=0.02)
    bar.set_label("U-height: mean distance to the\nneighbouring prototypes (scaled)", fontsize=8)
    bar.outline.set_visible(False)
    return svg_text(fig, "umatrix", "U-matrix of the map: mean distance of each unit's prototype "
                    "to its grid neighbours, with the group borders")
