"""How the records of the map and group families (``labbench.maps.record``) are exported.

The family classes of ``labbench.families.maps`` delegate their export hooks to this module.

Bundle entries (plain arrays, no pickle):

* prototype families ("som", "competitive", "neural_gas"): ``prototypes`` float64 (k, d) in the
  scaled input space, ``unit_group`` int64 (k,) (the group of each unit, 0..g-1, every group
  holding at least one unit); metadata entry ``maps`` = ``{"kind": "prototypes", "units": k,
  "groups": g, "shape": [rows, cols] or null, "topology": "rectangular" | "hexagonal" | null,
  "extra": {...}}`` (a self-organising map must have a shape with rows * cols = k and a topology);
* "hebbian": ``components`` float64 (c, d), rows = the learned weight vectors; metadata entry
  ``maps`` = ``{"kind": "components", "components": c, "rule": "oja" | "sanger" | "hebb",
  "extra": {...}}``.

Units and groups are numbered from 0 everywhere (bundle, numpy script, ONNX, ``labbench
predict``): unit u of a map sits at grid row ``u // cols``, column ``u % cols``.

ONNX (``onnx_body``), from the scaled inputs X [N, d] (double): ``distances`` [N, k] =
sqrt(max(0, |x|^2 - 2 x.p + |p|^2)) (the same expansion as ``labbench.maps.squared_distances``),
``unit`` [N] int64 = ArgMin (ties: the lowest index, as numpy.argmin), ``group`` [N] int64 =
Gather(unit_group, unit), ``distance`` [N] double = ReduceMin(distances); hebbian:
``components`` [N, c] = X W^T. ``onnx_outputs`` lists them for the graph.

``NUMPY_SOURCE`` is the numpy-only code added to the standalone script (``predict_with_numpy.py``):
it sets ``FORWARD[name]`` (the record's forward) and ``COLUMNS[name]`` (the output table) for the
four family names.
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from labbench.errors import BundleError
from labbench.maps.record import (PROTOTYPE_FAMILIES, SUBSPACE_FAMILIES, TOPOLOGIES,
                                  PrototypeRecord, SubspaceRecord, grid_positions)

MAP_FAMILIES = PROTOTYPE_FAMILIES + SUBSPACE_FAMILIES
RULES = ("oja", "sanger", "hebb")
#: graph outputs (MAPS.md): prototype families, then the hebbian family
PROTOTYPE_OUTPUTS = ("distances", "unit", "group", "distance")
SUBSPACE_OUTPUTS = ("components",)
OUTPUT_NAMES = PROTOTYPE_OUTPUTS + SUBSPACE_OUTPUTS
FIX = "save the model again from labbench"


def _fail(name: str, problem: str, fix: str = FIX) -> BundleError:
    return BundleError(f"{name}: {problem}; {fix}")


def is_prototype(record: Any) -> bool:
    return isinstance(record, PrototypeRecord)


# -- bundle ---------------------------------------------------------------------------------------

def bundle_entries(record: Any) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    """(arrays, metadata entries) of a map record for the ``.npz`` bundle."""
    if isinstance(record, PrototypeRecord):
        arrays = {"prototypes": np.ascontiguousarray(record.prototypes, dtype=np.float64),
                  "unit_group": np.ascontiguousarray(record.unit_group, dtype=np.int64)}
        meta = {"kind": "prototypes", "units": record.n_units, "groups": record.n_groups,
                "shape": list(record.shape) if record.shape is not None else None,
                "topology": record.topology if record.shape is not None else None,
                "extra": dict(record.extra)}
        return arrays, {"maps": meta}
    if isinstance(record, SubspaceRecord):
        arrays = {"components": np.ascontiguousarray(record.components, dtype=np.float64)}
        meta = {"kind": "components", "components": record.n_components, "rule": record.rule,
                "extra": dict(record.extra)}
        return arrays, {"maps": meta}
    raise TypeError(f"not a map record: {type(record).__name__}")


def _float_entry(arrays: Mapping[str, np.ndarray], key: str, name: str, n_inputs: int) -> np.ndarray:
    if key not in arrays:
        raise _fail(name, f"lacks the entry {key!r}")
    arr = arrays[key]
    if arr.dtype != np.float64 or arr.ndim != 2 or arr.shape[0] < 1:
        raise _fail(name, f"entry {key!r} is {arr.dtype} with shape {arr.shape}, expected float64 "
                    f"(rows, {n_inputs}) with at least one row")
    if arr.shape[1] != n_inputs:
        raise _fail(name, f"entry {key!r} has {arr.shape[1]} columns but the preprocessing gives "
                    f"{n_inputs} inputs")
    if not np.all(np.isfinite(arr)):
        raise _fail(name, f"entry {key!r} holds NaN or infinite values")
    return arr


def _int(value: Any) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def from_bundle(arrays: Mapping[str, np.ndarray], meta: Mapping[str, Any], name: str,
                n_inputs: int) -> PrototypeRecord | SubspaceRecord:
    """The checked record of a bundle of a map family; one ``BundleError`` line else."""
    family = meta.get("family")
    info = meta.get("maps")
    if family not in MAP_FAMILIES:
        raise _fail(name, f"family {family!r} is not one of the map families {', '.join(MAP_FAMILIES)}")
    if not isinstance(info, dict):
        raise _fail(name, "metadata lacks the 'maps' entry (what kind of map the arrays hold)")
    extra = info.get("extra") or {}
    if not isinstance(extra, dict):
        raise _fail(name, "metadata 'maps.extra' must be a table of plain values")
    if family in SUBSPACE_FAMILIES:
        if info.get("kind") != "components":
            raise _fail(name, f"metadata 'maps.kind' is {info.get('kind')!r}, expected 'components' "
                        f"for the {family} family")
        W = _float_entry(arrays, "components", name, n_inputs)
        if info.get("components") != W.shape[0]:
            raise _fail(name, f"metadata 'maps.components' says {info.get('components')!r} but the "
                        f"entry 'components' has {W.shape[0]} rows")
        if info.get("rule") not in RULES:
            raise _fail(name, f"metadata 'maps.rule' is {info.get('rule')!r}, expected one of {', '.join(RULES)}")
        stray = sorted(k for k in ("prototypes", "unit_group") if k in arrays)
        if stray:
            raise _fail(name, f"a {family} bundle must not hold {', '.join(stray)}")
        return SubspaceRecord(family=family, components=W.copy(), rule=info["rule"], extra=dict(extra))

    if info.get("kind") != "prototypes":
        raise _fail(name, f"metadata 'maps.kind' is {info.get('kind')!r}, expected 'prototypes' "
                    f"for the {family} family")
    P = _float_entry(arrays, "prototypes", name, n_inputs)
    k = P.shape[0]
    if info.get("units") != k:
        raise _fail(name, f"metadata 'maps.units' says {info.get('units')!r} but the entry "
                    f"'prototypes' has {k} rows")
    if "unit_group" not in arrays:
        raise _fail(name, "lacks the entry 'unit_group'")
    groups = arrays["unit_group"]
    if groups.dtype.kind not in "iu" or groups.shape != (k,):
        raise _fail(name, f"entry 'unit_group' is {groups.dtype} with shape {groups.shape}, "
                    f"expected int64 ({k},): one group per unit")
    g = info.get("groups")
    if not _int(g) or g < 1 or g > k:
        raise _fail(name, f"metadata 'maps.groups' is {g!r}, expected a whole number from 1 to {k}")
    if groups.min() < 0 or groups.max() >= g:
        raise _fail(name, f"entry 'unit_group' holds group numbers outside 0 to {g - 1}")
    empty = sorted(set(range(g)) - set(groups.tolist()))
    if empty:
        raise _fail(name, f"entry 'unit_group' leaves group(s) {', '.join(map(str, empty[:5]))} "
                    f"without a unit")
    shape, topology = info.get("shape"), info.get("topology")
    if shape is None:
        if family == "som":
            raise _fail(name, "a self-organising map needs its grid in metadata 'maps.shape' (rows, columns)")
        if topology is not None:
            raise _fail(name, "metadata 'maps.topology' is given without a grid shape")
        grid = None
    else:
        if (not isinstance(shape, list) or len(shape) != 2 or not all(_int(s) and s >= 1 for s in shape)):
            raise _fail(name, f"metadata 'maps.shape' is {shape!r}, expected [rows, columns]")
        if shape[0] * shape[1] != k:
            raise _fail(name, f"metadata 'maps.shape' {shape[0]} x {shape[1]} does not match the "
                        f"{k} prototypes")
        if topology not in TOPOLOGIES:
            raise _fail(name, f"metadata 'maps.topology' is {topology!r}, expected one of {', '.join(TOPOLOGIES)}")
        grid = (int(shape[0]), int(shape[1]))
    if "components" in arrays:
        raise _fail(name, f"a {family} bundle must not hold 'components'")
    return PrototypeRecord(family=family, prototypes=P.copy(), unit_group=groups.astype(np.int64),
                           shape=grid, topology=topology if grid is not None else None,
                           extra=dict(extra))


# -- ONNX -----------------------------------------------------------------------------------------

def onnx_body(record: Any, h: str, node, const) -> str:
    """Nodes from the scaled inputs ``h`` [N, d] (double) to the record's outputs; returns the name
    of the record's forward tensor ("distances" or "components"). The prototype families also
    produce "unit", "group" and "distance" (see ``onnx_outputs``)."""
    if isinstance(record, SubspaceRecord):
        return node("MatMul", [h, const("components_T", np.ascontiguousarray(record.components.T))],
                    "components")
    P = record.prototypes
    x2 = node("ReduceSumSquare", [h], "_lb.row_norm2", axes=[1], keepdims=1)         # [N, 1]
    cross = node("MatMul", [h, const("prototypes_T", np.ascontiguousarray(P.T))], "_lb.cross")
    twice = node("Mul", [cross, const("two", np.array(2.0))], "_lb.cross2")
    d2 = node("Add", [node("Sub", [x2, twice], "_lb.d2_part"),
                      const("prototype_norm2", (P * P).sum(axis=1)[None, :])], "_lb.d2_raw")
    d2 = node("Max", [d2, const("zero", np.array(0.0))], "_lb.d2")
    distances = node("Sqrt", [d2], "distances")
    unit = node("ArgMin", [distances], "unit", axis=1, keepdims=0, select_last_index=0)
    node("Gather", [const("unit_group", np.asarray(record.unit_group, np.int64)), unit], "group", axis=0)
    node("ReduceMin", [distances], "distance", axes=[1], keepdims=0)
    return distances


def onnx_outputs(record: Any) -> list[tuple[str, str, list]]:
    """(name, element type "double" | "int64", shape) of the graph outputs of a map record."""
    if isinstance(record, SubspaceRecord):
        return [("components", "double", ["N", record.n_components])]
    return [("distances", "double", ["N", record.n_units]), ("unit", "int64", ["N"]),
            ("group", "int64", ["N"]), ("distance", "double", ["N"])]


def output_columns(record: Any) -> list[str]:
    """The columns ``labbench predict`` writes for a map record (beside the id column)."""
    if isinstance(record, SubspaceRecord):
        return [f"component_{j + 1}" for j in range(record.n_components)]
    return ["unit", "group", "distance"]


def output_table(record: Any, scaled: np.ndarray) -> dict[str, np.ndarray]:
    """{column: values} of scaled rows: unit, group, distance (prototype families; unit and
    group int64, 0-based) or component_1..c (hebbian)."""
    if isinstance(record, SubspaceRecord):
        Y = record.forward(scaled)
        return {f"component_{j + 1}": Y[:, j] for j in range(Y.shape[1])}
    unit, group, distance = record.assign(scaled)
    return {"unit": unit.astype(np.int64), "group": group.astype(np.int64),
            "distance": distance.astype(np.float64)}


# -- the map's grid (U-matrix) --------------------------------------------------------------------

def grid_neighbours(shape: tuple[int, int], topology: str) -> list[np.ndarray]:
    """For each unit of a map, the indices of its grid neighbours: the neighbourhood of the
    topographic error (``labbench.maps.measures.grid_neighbours``: rectangular, the 8 units at
    Chebyshev distance 1; hexagonal, the 6 at distance 1)."""
    from labbench.maps.measures import grid_neighbours as neighbour_matrix

    near = neighbour_matrix(grid_positions(shape[0], shape[1], topology), topology)
    return [np.flatnonzero(row) for row in near]


def u_matrix(record: PrototypeRecord) -> np.ndarray:
    """(rows, cols) U-matrix of a map (Ultsch & Siemon 1990, the "U-height" of each unit): the
    mean Euclidean distance of each unit's prototype to the prototypes of its grid neighbours, in
    the scaled input space."""
    if record.shape is None:
        raise ValueError("a U-matrix needs a map with a grid")
    P = record.prototypes
    heights = np.array([np.sqrt(((P[nb] - P[u]) ** 2).sum(axis=1)).mean() if len(nb) else 0.0
                        for u, nb in enumerate(grid_neighbours(record.shape, record.topology or "rectangular"))])
    return heights.reshape(record.shape)


# -- the numpy-only script ------------------------------------------------------------------------

NUMPY_SOURCE = '''
def map_distances(model, X):
    """(N, k) Euclidean distances of the scaled rows to every prototype (entry "prototypes")."""
    P = model["prototypes"]
    d2 = (X * X).sum(axis=1)[:, None] - 2.0 * (X @ P.T) + (P * P).sum(axis=1)[None, :]
    return np.sqrt(np.maximum(d2, 0.0))


def map_columns(model, distances):
    """unit (best-matching prototype, ties to the lowest number), its group, and the distance."""
    unit = np.argmin(distances, axis=1)
    return {"unit": unit, "group": model["unit_group"][unit],
            "distance": distances[np.arange(len(unit)), unit]}


def hebbian_forward(model, X):
    """(N, c) projection of the scaled rows on the learned components (entry "components")."""
    return X @ model["components"].T


def hebbian_columns(model, Y):
    return {f"component_{j + 1}": Y[:, j] for j in range(Y.shape[1])}


for _name in ("som", "competitive", "neural_gas"):
    FORWARD[_name], COLUMNS[_name] = map_distances, map_columns
FORWARD["hebbian"], COLUMNS["hebbian"] = hebbian_forward, hebbian_columns
'''
