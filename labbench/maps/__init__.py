"""Maps and groups: self-organising maps, competitive learning, neural gas and Hebbian feature
extraction, trained in numpy as stacks of members (folds, seeds). Qt-free.

``labbench.maps.record`` holds the trained-model records every other part (families, exports,
window) agrees on.
"""

from labbench.maps.record import (PROTOTYPE_FAMILIES, SUBSPACE_FAMILIES, TOPOLOGIES,
                                  PrototypeRecord, SubspaceRecord, grid_positions,
                                  squared_distances)

__all__ = ["PROTOTYPE_FAMILIES", "SUBSPACE_FAMILIES", "TOPOLOGIES", "PrototypeRecord",
           "SubspaceRecord", "grid_positions", "squared_distances"]
