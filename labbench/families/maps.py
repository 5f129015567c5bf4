"""The map and group families: self-organising map ("som"), competitive learning, winner takes all
("competitive"), neural gas, winner takes most ("neural_gas") and Hebbian features ("hebbian").

They learn without a target (``needs_target = False``; task "unsupervised"): the y arrays the
search passes to ``stack`` are placeholders and are ignored. Each is scored on every fold's
held-out rows by the engine's measures (``labbench.maps.measures``; the default objective is the
penalised error). Their records are ``labbench.maps.PrototypeRecord`` / ``SubspaceRecord``; their
exports live in ``labbench.families.maps_export`` (imported when first needed). Settings tables
and default spaces: ``labbench.families.maps_settings``.

Resolved settings look like (som)::

    {"rows": 8, "cols": 8, "topology": "rectangular", "training": "online", "learning_rate": 0.5,
     "final_learning_rate": 0.01, "radius": 0.0, "final_radius": 0.5, "decay": "exponential",
     "neighbourhood": "gaussian", "init": "pca_plane", "epochs": 30, "groups": 0,
     "unit_cost": 0.001}
"""

from __future__ import annotations

from typing import Any, Callable, Mapping

import numpy as np

from labbench.families import maps_settings as tables
from labbench.families.base import Family
from labbench.families.settings import Choices, Fixed, FloatRange, IntRange, Setting, spec_error
from labbench.maps.competitive import CompetitiveLearning
from labbench.maps.hebbian import HebbianFeatures
from labbench.maps.measures import PEN
from labbench.maps.neural_gas import NeuralGas
from labbench.maps.som import SelfOrganisingMap
from labbench.maps.training import METRICS_OF, MapTraining
from labbench.nets.metrics import UNSUPERVISED


def _bounds(s: Setting) -> tuple[float, float] | None:
    """(lowest, highest) value a numeric setting can take; None for non-numbers."""
    if isinstance(s, Fixed):
        v = s.value
    elif isinstance(s, Choices):
        nums = [v for v in s.values if isinstance(v, (int, float)) and not isinstance(v, bool)]
        return (min(nums), max(nums)) if nums else None
    elif isinstance(s, (FloatRange, IntRange)):
        return (0.0 if getattr(s, "off", False) else s.low), s.high
    else:
        return None
    return (v, v) if isinstance(v, (int, float)) and not isinstance(v, bool) else None


class MapFamily(Family):
    """What the four map and group families share: no target, the engine's measures as metrics,
    a fixed ``unit_cost``, falling schedules, ``MapTraining`` stacks and the maps exporters."""

    needs_target = False
    #: (initial, final) settings whose final value may not be above the initial one
    schedules: tuple[tuple[str, str], ...] = ()

    # ---- objectives

    def metrics(self, task: str) -> tuple[str, ...]:
        return METRICS_OF[self.name] if task == UNSUPERVISED else ()

    def default_metric(self, task: str) -> str:
        return PEN

    # ---- the search space

    def check_space(self, space: Any) -> None:
        src = space.source
        if space.searched("unit_cost"):
            raise spec_error(src, "space.unit_cost", "is searched; fix unit_cost to one value (it "
                             "prices every unit, so trials scored with different prices cannot be "
                             "compared)")
        for initial, final in self.schedules:
            a, b = _bounds(space[initial]), _bounds(space[final])
            if a is None or b is None or (initial == "radius" and a[1] == 0):
                continue                           # radius 0: half the map's longer side
            if not space.searched(initial) and not space.searched(final) and b[0] > a[0]:
                raise spec_error(src, f"space.{final}", f"{b[0]:g} is above {initial} = {a[0]:g}; a "
                                 f"schedule only falls: make {final} at most {a[0]:g}")
            if b[0] > a[1]:
                raise spec_error(src, f"space.{final}", f"every value (from {b[0]:g}) is above "
                                 f"every {initial} (up to {a[1]:g}); a schedule only falls: lower "
                                 f"{final} or raise {initial}")
        super().check_space(space)

    # ---- training

    def method(self, settings: Mapping[str, Any]) -> Any:
        """The engine's method object (labbench.maps) for resolved settings."""
        raise NotImplementedError

    def stack(self, settings, task, n_outputs, X_train, y_train, X_val=None, y_val=None, *,
              seeds, metric=None, target_inverse=None, groups=None, dtype="float32", epochs=None):
        """A ``MapTraining`` of one member per training array (y arrays, ``target_inverse`` and
        ``groups`` do not apply to learning without a target and are ignored)."""
        full = self.complete(settings)
        return MapTraining(self.method(full), X_train, X_val, seeds=seeds,
                           epochs=int(full["epochs"] if epochs is None else epochs),
                           metric=metric, unit_cost=float(full["unit_cost"]),
                           groups=int(full.get("groups", 0)), dtype=dtype)

    # ---- export (labbench.families.maps_export, imported when first needed)

    @property
    def numpy_source(self) -> str:          # type: ignore[override]
        from labbench.families import maps_export

        return maps_export.NUMPY_SOURCE

    def bundle_entries(self, record):
        from labbench.families import maps_export

        return maps_export.bundle_entries(record)

    def from_bundle(self, arrays, meta, name, n_inputs, n_outputs):
        from labbench.families import maps_export

        return maps_export.from_bundle(arrays, meta, name, n_inputs)

    def onnx_body(self, record, h, n_inputs, node, const, net_type, task):
        from labbench.families import maps_export

        return maps_export.onnx_body(record, h, node, const)

    def onnx_dtype(self, record):
        return np.dtype(np.float64)


class SomFamily(MapFamily):
    name = "som"
    label = "Self-organising map"
    settings = tables.SOM_SETTINGS
    default_space = tables.SOM_SPACE
    schedules = (("learning_rate", "final_learning_rate"), ("radius", "final_radius"))

    def check_space(self, space: Any) -> None:
        rows, cols = _bounds(space["rows"]), _bounds(space["cols"])
        if rows[1] * cols[1] < 2:
            raise spec_error(space.source, "space.cols", "a 1 x 1 map has one unit; a map needs at "
                             "least two (make rows or cols at least 2)")
        groups = _bounds(space["groups"])
        if not space.searched("groups") and not space.searched("rows") \
                and not space.searched("cols") and groups[0] > rows[0] * cols[0]:
            raise spec_error(space.source, "space.groups", f"{groups[0]:g} groups on a "
                             f"{rows[0]:g} x {cols[0]:g} map of {rows[0] * cols[0]:g} units; use at "
                             "most as many groups as units (0: every unit its own group)")
        super().check_space(space)

    def method(self, s):
        rows, cols = int(s["rows"]), int(s["cols"])
        if rows * cols < 2:           # a searched 1 x 1 corner: the smallest map is 1 x 2
            cols = 2
        return SelfOrganisingMap(rows, cols, topology=s["topology"],
                                 learning_rate=s["learning_rate"],
                                 final_learning_rate=s["final_learning_rate"], radius=s["radius"],
                                 final_radius=s["final_radius"], decay=s["decay"],
                                 neighbourhood=s["neighbourhood"], init=s["init"],
                                 training=s["training"])


class CompetitiveFamily(MapFamily):
    name = "competitive"
    label = "Competitive learning (winner takes all)"
    settings = tables.COMPETITIVE_SETTINGS
    default_space = tables.COMPETITIVE_SPACE
    schedules = (("learning_rate", "final_learning_rate"),)

    def method(self, s):
        return CompetitiveLearning(int(s["units"]), learning_rate=s["learning_rate"],
                                   final_learning_rate=s["final_learning_rate"], init=s["init"],
                                   conscience=s["conscience"], training=s["training"])


class NeuralGasFamily(MapFamily):
    name = "neural_gas"
    label = "Neural gas (winner takes most)"
    settings = tables.NEURAL_GAS_SETTINGS
    default_space = tables.NEURAL_GAS_SPACE
    schedules = (("learning_rate", "final_learning_rate"),
                 ("neighbourhood_range", "final_neighbourhood_range"))

    def method(self, s):
        return NeuralGas(int(s["units"]), learning_rate=s["learning_rate"],
                         final_learning_rate=s["final_learning_rate"],
                         neighbourhood_range=s["neighbourhood_range"],
                         final_neighbourhood_range=s["final_neighbourhood_range"], init=s["init"])


class HebbianFamily(MapFamily):
    name = "hebbian"
    label = "Hebbian features (Oja / Sanger)"
    settings = tables.HEBBIAN_SETTINGS
    default_space = tables.HEBBIAN_SPACE
    schedules = (("learning_rate", "final_learning_rate"),)

    def check_space(self, space: Any) -> None:
        if space.values_of("rule") == ("oja",) and _bounds(space["components"])[0] > 1:
            raise spec_error(space.source, "space.components", "Oja's rule learns one component; "
                             "write components = 1 or rule = \"sanger\" for several")
        super().check_space(space)

    def resolve_one(self, space: Any, name: str, get: Callable[[str, Setting], Any],
                    resolved: Mapping[str, Any]) -> Any:
        if name == "components" and resolved.get("rule") == "oja":
            return 1                             # Oja's rule: one component, nothing to sample
        return super().resolve_one(space, name, get, resolved)

    def method(self, s):
        return HebbianFeatures(int(s["components"]), rule=s["rule"], learning_rate=s["learning_rate"],
                               final_learning_rate=s["final_learning_rate"])


SOM = SomFamily()
COMPETITIVE = CompetitiveFamily()
NEURAL_GAS = NeuralGasFamily()
HEBBIAN = HebbianFamily()
FAMILIES = (SOM, COMPETITIVE, NEURAL_GAS, HEBBIAN)
