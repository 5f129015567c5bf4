"""The numbers and shapes behind the window's views of a trained map or group model. No Qt.

Everything takes plain arrays (a record of ``labbench.maps.record``, the scaled rows, the rows in
their own units) and gives plain arrays; ``labbench.gui.map_views`` only draws them.

* ``neighbour_pairs`` - the units next to each other on a map's grid: on a rectangular grid the 8
  around a unit (Chebyshev distance 1, the definition the topographic error uses), on a hexagonal
  grid the 6 at distance 1.
* ``u_matrix`` - the unit-distance map (Ultsch 1990): each unit's mean Euclidean distance between
  its prototype and its grid neighbours' prototypes, in the scaled input space. High values are
  ridges between regions of the map, low values the inside of a region.
  Both are the report's own (``labbench.families.maps_export``: one rule for the window and the
  report), re-shaped here for drawing.
* ``cell_polygons`` - one square or hexagon per unit, centred on its grid position.
* ``hit_counts``, ``group_sizes``, ``group_profiles``, ``label_mix`` - what the rows do on the map.
* ``projection`` - the rows (and prototypes) on the first two principal components of the scaled
  rows (numpy SVD of the centred rows).
* ``ramp``, ``group_colours`` - colours from ``labbench.palette``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd

from labbench.families.maps_export import grid_neighbours
from labbench.families.maps_export import u_matrix as shared_u_matrix
from labbench.maps.record import PrototypeRecord, grid_positions
from labbench.palette import colours

ASSIGN_BLOCK = 20_000          # rows per block when the rows are assigned to their units

# group colours: labbench's own, picked to stay apart on paper and on slate; after the twelfth
# they repeat (a map with more groups shows them by number anyway)
GROUPS_LIGHT = ("#2f6f9f", "#c46a2b", "#3d8a4e", "#a83e5a", "#7b5ea7", "#8a7a2a", "#2a8a86",
                "#b0513a", "#5a6fb8", "#6b8f2f", "#9a4d8c", "#4d7080")
GROUPS_DARK = ("#6fa8d6", "#eb9a5e", "#74c488", "#e0789a", "#b39ae0", "#d1c06a", "#62c9c3",
               "#e98a6f", "#97a9ee", "#a9cc6a", "#d48bc6", "#8fb1c2")


# ------------------------------------------------------------------------------ the grid
def neighbour_pairs(shape: tuple[int, int], topology: str | None) -> np.ndarray:
    """(E, 2) unit pairs (i < j) that are neighbours on the grid (see the module docstring); the
    one rule of ``labbench.families.maps_export.grid_neighbours`` (the report's, the topographic
    error's)."""
    near = grid_neighbours(tuple(shape), topology or "rectangular")
    pairs = [(i, int(j)) for i, nb in enumerate(near) for j in nb if j > i]
    return np.array(pairs, dtype=np.int64).reshape(-1, 2)


def mesh_pairs(shape: tuple[int, int], topology: str | None) -> np.ndarray:
    """(E, 2) the links drawn between prototypes in the 2-D view: the 4 straight neighbours on a
    rectangular grid (diagonals would cross), the 6 on a hexagonal one."""
    if topology == "hexagonal":
        return neighbour_pairs(shape, topology)
    rows, cols = shape
    unit = np.arange(rows * cols).reshape(rows, cols)
    across = np.column_stack([unit[:, :-1].ravel(), unit[:, 1:].ravel()])
    down = np.column_stack([unit[:-1, :].ravel(), unit[1:, :].ravel()])
    return np.vstack([across, down]).astype(np.int64)


def u_matrix(prototypes: np.ndarray, shape: tuple[int, int], topology: str | None) -> np.ndarray:
    """(k,) each unit's mean distance to its grid neighbours' prototypes (Ultsch 1990): the report's
    ``labbench.families.maps_export.u_matrix``, one value per unit in unit order."""
    record = PrototypeRecord("som", prototypes, shape=tuple(shape), topology=topology or "rectangular")
    return np.asarray(shared_u_matrix(record), dtype=np.float64).reshape(-1)


def cell_polygons(shape: tuple[int, int], topology: str | None) -> np.ndarray:
    """(k, corners, 2) one cell per unit around its grid position: a unit square, or a
    pointy-topped hexagon whose neighbours touch it edge to edge (circumradius 1/sqrt(3))."""
    pos = grid_positions(shape[0], shape[1], topology or "rectangular")
    if topology == "hexagonal":
        radius = 1.0 / np.sqrt(3.0)
        angles = np.deg2rad(90.0 + 60.0 * np.arange(6))
        corner = np.column_stack([np.cos(angles), np.sin(angles)]) * radius
    else:
        corner = np.array([[-0.5, -0.5], [0.5, -0.5], [0.5, 0.5], [-0.5, 0.5]])
    return pos[:, None, :] + corner[None, :, :]


def group_borders(shape: tuple[int, int], topology: str | None, unit_group: np.ndarray) -> np.ndarray:
    """(E, 2, 2) the cell edges between touching units of different groups (the outline of each
    group's region on the map)."""
    cells = cell_polygons(shape, topology)
    groups = np.asarray(unit_group)
    out = []
    for i, j in mesh_pairs(shape, topology):
        if groups[i] == groups[j]:
            continue
        same = np.isclose(cells[i][:, None, :], cells[j][None, :, :], atol=1e-9).all(axis=2)
        corners = cells[i][same.any(axis=1)]
        if len(corners) == 2:
            out.append(corners)
    return np.array(out).reshape(-1, 2, 2)


# ------------------------------------------------------------------------------ the rows
def hit_counts(units: np.ndarray, k: int) -> np.ndarray:
    """(k,) how many rows have each unit as their best-matching unit."""
    return np.bincount(np.asarray(units, dtype=np.int64), minlength=k)[:k]


def group_sizes(groups: np.ndarray, n_groups: int) -> np.ndarray:
    return np.bincount(np.asarray(groups, dtype=np.int64), minlength=n_groups)[:n_groups]


def group_profiles(frame: pd.DataFrame, groups: np.ndarray, n_groups: int,
                   kinds: dict[str, str] | None = None) -> list[dict[str, Any]]:
    """One entry per column of ``frame`` (original units): for a numeric column the mean of each
    group and of all rows; for a categorical one each group's most frequent value and its share.

    Returns ``[{"column", "kind", "all": value, "groups": [value or None per group],
    "share": [share per group] (categorical only)}]``; an empty group gives None."""
    groups = np.asarray(groups, dtype=np.int64)
    out = []
    for col in frame.columns:
        s = frame[col]
        kind = (kinds or {}).get(col) or ("numeric" if pd.api.types.is_numeric_dtype(s) else "categorical")
        if kind == "numeric":
            v = pd.to_numeric(s, errors="coerce").to_numpy(dtype=np.float64)
            ok = np.isfinite(v)
            sums = np.bincount(groups[ok], v[ok], n_groups)[:n_groups]
            counts = np.bincount(groups[ok], minlength=n_groups)[:n_groups]
            means = [float(sums[g] / counts[g]) if counts[g] else None for g in range(n_groups)]
            out.append({"column": str(col), "kind": "numeric",
                        "all": float(v[ok].mean()) if ok.any() else None, "groups": means})
        else:
            text = s.astype("string")
            modes, shares = [], []
            for g in range(n_groups):
                part = text[groups == g].dropna()
                if len(part) == 0:
                    modes.append(None)
                    shares.append(None)
                    continue
                counts = part.value_counts()
                modes.append(str(counts.index[0]))
                shares.append(float(counts.iloc[0] / len(part)))
            overall = text.dropna().value_counts()
            out.append({"column": str(col), "kind": "categorical",
                        "all": str(overall.index[0]) if len(overall) else None,
                        "groups": modes, "share": shares})
    return out


def label_mix(label: Sequence[Any], groups: np.ndarray, n_groups: int) -> list[tuple[str, float] | None]:
    """Per group: the label value most of its rows carry and that share (None: an empty group).
    The label was never used in training; this only shows how the groups line up with it."""
    lab = pd.Series(np.asarray(label, dtype=object)).astype("string")
    groups = np.asarray(groups, dtype=np.int64)
    out: list[tuple[str, float] | None] = []
    for g in range(n_groups):
        part = lab[groups == g].dropna()
        if len(part) == 0:
            out.append(None)
            continue
        counts = part.value_counts()
        out.append((str(counts.index[0]), float(counts.iloc[0] / len(part))))
    return out


def projection(X: np.ndarray, *extra: np.ndarray) -> tuple[np.ndarray, list[np.ndarray], np.ndarray]:
    """The rows of X, and of every array in ``extra`` (prototypes), on the first two principal
    components of X: (rows (n, 2), [each extra (m, 2)], share of X's variance on each axis (2,)).

    Centre X at its mean and take the principal directions by numpy SVD of the centred rows'
    scatter matrix CᵀC (d × d: the right singular vectors of C, with the squared singular values;
    a table of 100,000 rows costs a d × d decomposition, not an n × d one); each axis's sign is
    fixed so that its largest loading is positive (a stable picture)."""
    X = np.asarray(X, dtype=np.float64)
    mean = X.mean(axis=0)
    C = X - mean
    _, var, vt = np.linalg.svd(C.T @ C)
    axes = vt[:2].copy()
    if axes.shape[0] < 2:           # one input column: the second axis is flat
        axes = np.vstack([axes, np.zeros((2 - axes.shape[0], X.shape[1]))])
    for a in axes:
        j = int(np.argmax(np.abs(a)))
        if a[j] < 0:
            a *= -1.0
    share = np.zeros(2)
    if var.sum() > 0:
        share[:min(2, len(var))] = (var / var.sum())[:2]
    return C @ axes.T, [(np.asarray(e, dtype=np.float64) - mean) @ axes.T for e in extra], share


# ------------------------------------------------------------------------------ colours
def _rgb(hex_colour: str) -> np.ndarray:
    h = hex_colour.lstrip("#")
    return np.array([int(h[i:i + 2], 16) for i in (0, 2, 4)], dtype=np.float64)


def ramp(values: np.ndarray, stops: Sequence[str], low: float | None = None,
         high: float | None = None) -> np.ndarray:
    """(n, 3) uint8 colours: ``values`` spread between ``low`` and ``high`` (default their range)
    along the colour ``stops`` (hex strings, evenly placed); NaN takes the first stop."""
    v = np.asarray(values, dtype=np.float64)
    finite = v[np.isfinite(v)]
    lo = float(finite.min()) if low is None and finite.size else (low or 0.0)
    hi = float(finite.max()) if high is None and finite.size else (high if high is not None else 1.0)
    t = np.zeros_like(v) if hi <= lo else np.clip((v - lo) / (hi - lo), 0.0, 1.0)
    t = np.where(np.isfinite(t), t, 0.0)
    rgb = np.array([_rgb(s) for s in stops])
    pos = t * (len(stops) - 1)
    i = np.minimum(pos.astype(int), len(stops) - 2) if len(stops) > 1 else np.zeros(len(v), int)
    f = (pos - i)[:, None]
    if len(stops) == 1:
        return np.repeat(rgb[:1], len(v), axis=0).astype(np.uint8)
    return np.round(rgb[i] * (1 - f) + rgb[i + 1] * f).astype(np.uint8)


def distance_stops(dark: bool) -> tuple[str, ...]:
    """The unit-distance map: paper for the inside of a region, ink for the ridges."""
    c = colours(dark)
    return (c["paper"], c["range"], c["band"], c["ink"])


def plane_stops(dark: bool) -> tuple[str, ...]:
    """One column over the map: low in the pruned slate blue, the middle on paper, high in the
    amber of the running trial (a diverging ramp around the column's middle)."""
    c = colours(dark)
    return (c["pruned"], c["paper"], c["running"])


def group_colours(n: int, dark: bool) -> list[str]:
    base = GROUPS_DARK if dark else GROUPS_LIGHT
    return [base[g % len(base)] for g in range(n)]


# ------------------------------------------------------------------------------ a model's rows
@dataclass
class MapData:
    """What the views need: a record, the rows it is shown with, and their names.

    ``X``: the scaled rows (n, d) in the record's input space; ``frame``: the same rows in their
    own units (the input columns); ``names``: the d scaled column names (numeric names, then
    "col=category"); ``centre`` / ``scale`` (d,): x = x' * scale + centre turns a scaled value back
    into the column's own units (one-hot columns: 0 and 1, so a prototype's value stays a share).
    ``label``: an optional column shown beside the groups (never used in training)."""

    record: Any
    X: np.ndarray
    frame: pd.DataFrame
    names: tuple[str, ...]
    centre: np.ndarray | None = None
    scale: np.ndarray | None = None
    kinds: dict[str, str] | None = None
    label: Any = None
    label_name: str = ""

    def __post_init__(self) -> None:
        self.X = np.asarray(self.X, dtype=np.float64)
        d = self.X.shape[1]
        self.centre = np.zeros(d) if self.centre is None else np.asarray(self.centre, dtype=np.float64)
        self.scale = np.ones(d) if self.scale is None else np.asarray(self.scale, dtype=np.float64)

    @property
    def is_map(self) -> bool:
        return getattr(self.record, "shape", None) is not None

    @property
    def ungrouped(self) -> bool:
        """A map whose units were not merged into groups (groups = 0): every unit is a group, too
        many to tell apart by colour."""
        return self.is_map and self.record.n_groups == self.record.n_units

    @property
    def has_prototypes(self) -> bool:
        return hasattr(self.record, "prototypes")

    def assignment(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(unit, group, distance) of every row (the record's own rule), worked out once, in
        blocks of rows (a large table never needs its whole row × unit distance matrix at once)."""
        cached = getattr(self, "_assigned", None)
        if cached is None:
            parts = [self.record.assign(self.X[i:i + ASSIGN_BLOCK]) for i in range(0, len(self.X), ASSIGN_BLOCK)]
            if parts:
                cached = tuple(np.concatenate([p[j] for p in parts]) for j in range(3))
            else:
                cached = (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0))
            self._assigned = cached
        return cached

    def plane(self, j: int) -> np.ndarray:
        """(k,) the prototypes' values of scaled column j, in the column's own units."""
        return self.record.prototypes[:, j] * self.scale[j] + self.centre[j]


def unscaling(preprocessor: Any) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    """(names, centre, scale) of a fitted ``labbench.data.Preprocessor`` from its plain state."""
    state = preprocessor.to_state()
    names = tuple(getattr(preprocessor, "feature_names_", ()) or ())
    numeric = list(state.get("numeric") or [])
    centre = list(map(float, state.get("center") or [0.0] * len(numeric)))
    scale = list(map(float, state.get("scale") or [1.0] * len(numeric)))
    extra = len(names) - len(numeric)
    return names, np.array(centre + [0.0] * extra), np.array(scale + [1.0] * extra)


def from_model(model: Any, frame: pd.DataFrame, label: Any = None, label_name: str = "") -> MapData:
    """MapData of a ``labbench.model.TrainedModel`` (a map family's winner) on ``frame``'s rows."""
    rows = frame.loc[:, list(model.features)]
    X = model.preprocessor.transform(rows)
    names, centre, scale = unscaling(model.preprocessor)
    if len(names) != X.shape[1]:
        names = tuple(f"input {j + 1}" for j in range(X.shape[1]))
    return MapData(model.record, X, rows.reset_index(drop=True), names, centre, scale,
                   dict(model.kinds), label, label_name)
