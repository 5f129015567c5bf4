"""The settings tables and default searched spaces of the four map and group families
(``labbench.families.maps`` holds the families themselves).

Choice names come from the engine's registries (``labbench.maps``), never a second list.
"""

from __future__ import annotations

from typing import Any

from labbench.families.settings import SettingInfo
from labbench.maps.competitive import COMPETITIVE_INITS
from labbench.maps.competitive import TRAININGS as COMPETITIVE_TRAININGS
from labbench.maps.hebbian import RULES
from labbench.maps.record import TOPOLOGIES
from labbench.maps.schedule import DECAYS
from labbench.maps.som import NEIGHBOURHOODS, SOM_INITS, TRAININGS

UNIT_COST_DEFAULT = 0.01


def _table(*infos: SettingInfo) -> dict[str, SettingInfo]:
    return {s.name: s for s in infos}


def _rates(initial: float, final: float, when: tuple | None = None) -> tuple[SettingInfo, SettingInfo]:
    return (
        SettingInfo("learning_rate", "Learning rate", "float", initial,
                    "Share of the distance to a row a winning unit moves at the start of training; "
                    "it falls to the final learning rate by the last update.",
                    low=1e-6, high=1.0, when=when),
        SettingInfo("final_learning_rate", "Final learning rate", "float", final,
                    "The learning rate at the last update (a value above the initial rate keeps the "
                    "rate constant).", low=1e-8, high=1.0, when=when),
    )


def _epochs(default: int) -> SettingInfo:
    return SettingInfo("epochs", "Epochs", "int", default,
                       "Full passes over each fold's training rows; the schedules fall from their "
                       "initial to their final values over all of them.", low=1, high=100_000)


def _unit_cost(what: str) -> SettingInfo:
    return SettingInfo("unit_cost", "Cost per " + what, "float", UNIT_COST_DEFAULT,
                       f"The share of the held-out error one more {what} must remove to be worth "
                       f"having: the penalised error adds it once per {what}. Fixed for a whole "
                       "search.", low=0.0, high=1.0)


SOM_SETTINGS = _table(
    SettingInfo("rows", "Map rows", "int", 8, "Rows of units on the map.", low=1, high=200),
    SettingInfo("cols", "Map columns", "int", 8, "Columns of units on the map.", low=1, high=200),
    SettingInfo("topology", "Grid", "choice", "rectangular",
                "Rectangular grid (8 neighbours around a unit) or hexagonal grid (6 neighbours, all "
                "at the same distance).", options=TOPOLOGIES),
    SettingInfo("training", "Training", "choice", "online",
                "online: every row moves the units at once, with a falling learning rate "
                "(Kohonen 1982); batch: every epoch each unit becomes the neighbourhood-weighted "
                "mean of the rows (Kohonen's batch map), with no learning rate.", options=TRAININGS),
    *_rates(0.5, 0.01, when=("training", ("online",))),
    SettingInfo("radius", "Neighbourhood radius", "float", 0.0,
                "Initial reach of the neighbourhood on the grid, in units; 0 means half the longer "
                "side of the map. A wide start orders the map, a narrow end fits it to the rows.",
                low=0.0, high=1000.0),
    SettingInfo("final_radius", "Final neighbourhood radius", "float", 0.5,
                "The neighbourhood radius at the end of training, in units (a value above the "
                "initial radius keeps it constant).", low=0.01, high=1000.0),
    SettingInfo("decay", "Decay", "choice", "exponential",
                "How the learning rate and the radius fall from their initial to their final "
                "values: exponential (geometric) or linear.", options=DECAYS),
    SettingInfo("neighbourhood", "Neighbourhood", "choice", "gaussian",
                "gaussian: units move less the farther they are from the winner on the grid; "
                "bubble: every unit within the radius moves fully, the others not at all.",
                options=NEIGHBOURHOODS),
    SettingInfo("init", "Initial map", "choice", "pca_plane",
                "pca_plane: the map starts spread over the plane of the first two principal "
                "components (Kohonen's linear initialisation; no randomness); random_rows: each "
                "unit starts at a randomly drawn training row.", options=SOM_INITS),
    _epochs(30),
    SettingInfo("groups", "Groups", "int", 0,
                "Number of groups the map's units are merged into after training (Ward's method, "
                "neighbouring units only, so every group is one region of the map); 0 makes every "
                "unit its own group.", low=0, high=10_000),
    _unit_cost("unit"),
)

COMPETITIVE_SETTINGS = _table(
    SettingInfo("units", "Units", "int", 8, "Number of prototypes (one group each).", low=1, high=10_000),
    SettingInfo("training", "Training", "choice", "online",
                "online: every row moves its nearest unit, with a falling learning rate; batch: "
                "every epoch each unit becomes the mean of the rows it wins (Lloyd's iteration), "
                "with no learning rate and no conscience.", options=COMPETITIVE_TRAININGS),
    *_rates(0.5, 0.01, when=("training", ("online",))),
    SettingInfo("init", "Initial prototypes", "choice", "kmeans++",
                "kmeans++: spread-out training rows (Arthur & Vassilvitskii 2007); random_rows: "
                "randomly drawn training rows.", options=COMPETITIVE_INITS),
    SettingInfo("conscience", "Conscience", "float", 0.0,
                "Strength of the handicap on units that win more than their share (DeSieno 1988), "
                "so that no unit stays unused; 0 turns it off (plain winner takes all). Online "
                "training only.", low=0.0, high=1000.0, can_be_off=True, when=("training", ("online",))),
    _epochs(30),
    _unit_cost("unit"),
)

NEURAL_GAS_SETTINGS = _table(
    SettingInfo("units", "Units", "int", 10, "Number of prototypes (one group each).", low=1, high=10_000),
    *_rates(0.5, 0.005),
    SettingInfo("neighbourhood_range", "Neighbourhood range", "float", 5.0,
                "Initial lambda: a unit ranked r-th nearest to a row moves exp(-r / lambda) as far "
                "as the nearest one; large values move many units, small ones only the winner.",
                low=1e-3, high=10_000.0),
    SettingInfo("final_neighbourhood_range", "Final neighbourhood range", "float", 0.01,
                "lambda at the last update (a value above the initial range keeps it constant).",
                low=1e-4, high=10_000.0),
    SettingInfo("init", "Initial prototypes", "choice", "random_rows",
                "random_rows: randomly drawn training rows; kmeans++: spread-out training rows "
                "(Arthur & Vassilvitskii 2007).", options=COMPETITIVE_INITS),
    _epochs(30),
    _unit_cost("unit"),
)

HEBBIAN_SETTINGS = _table(
    SettingInfo("rule", "Rule", "choice", "sanger",
                "sanger: several components (Sanger's generalised Hebbian algorithm, 1989); oja: one "
                "component (Oja's rule, 1982); hebb: the plain Hebbian rule, which grows without "
                "bound and is stopped as diverged (shown for teaching only).", options=RULES),
    SettingInfo("components", "Components", "int", 2,
                "Number of features learned (Oja's rule learns one).", low=1, high=10_000),
    SettingInfo("learning_rate", "Learning rate", "float", 0.01,
                "Step size of the weight updates at the start; too large diverges.",
                low=1e-8, high=1.0),
    SettingInfo("final_learning_rate", "Final learning rate", "float", 0.0001,
                "The learning rate at the last update (a value above the initial rate keeps the "
                "rate constant).", low=1e-10, high=1.0),
    _epochs(20),
    _unit_cost("component"),
)

SOM_SPACE: dict[str, Any] = {
    "rows": {"low": 4, "high": 12},
    "cols": {"low": 4, "high": 12},
    "learning_rate": {"low": 0.05, "high": 1.0, "log": True},
    "radius": {"low": 1.0, "high": 6.0},
    "final_radius": 0.5,
    "epochs": 20,
    "groups": 0,
}

COMPETITIVE_SPACE: dict[str, Any] = {
    "units": {"low": 2, "high": 12},
    "learning_rate": {"low": 0.05, "high": 1.0, "log": True},
    "conscience": {"low": 0.01, "high": 10.0, "log": True, "off": True},
    "epochs": 20,
}

NEURAL_GAS_SPACE: dict[str, Any] = {
    "units": {"low": 2, "high": 12},
    "learning_rate": {"low": 0.05, "high": 1.0, "log": True},
    "neighbourhood_range": {"low": 0.5, "high": 10.0, "log": True},
    "epochs": 20,
}

HEBBIAN_SPACE: dict[str, Any] = {
    "rule": "sanger",
    "components": {"low": 1, "high": 5},
    "learning_rate": {"low": 1e-3, "high": 0.03, "log": True},
    "epochs": 10,
}
