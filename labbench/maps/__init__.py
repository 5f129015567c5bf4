"""Maps and groups: self-organising maps, competitive learning, neural gas and Hebbian feature
extraction, trained in numpy as stacks of members (folds, seeds). Qt-free.

One concept per module:

* ``record``      the trained-model records every part agrees on (PrototypeRecord, SubspaceRecord)
* ``members``     the rows and random generators of a stack of members, laid out for stepping
* ``schedule``    falling learning rates, radii and ranges (exponential, linear)
* ``init``        starting prototypes (random rows, k-means++, the principal-component plane)
* ``som``         the self-organising map, online and batch (Kohonen)
* ``competitive`` hard competitive learning with DeSieno's conscience
* ``neural_gas``  neural gas (Martinetz, Berkovich & Schulten 1993)
* ``hebbian``     Oja's rule, Sanger's generalised Hebbian algorithm, the plain Hebbian rule
* ``measures``    held-out quantisation, topographic, reconstruction, relative, penalised error
* ``groups``      a map's units merged into contiguous groups (Ward)
* ``stability``   adjusted Rand index and layout agreement between seeds
* ``training``    ``MapTraining``: a stack trained and scored per epoch (the families' Training)
"""

from labbench.maps.competitive import CompetitiveLearning
from labbench.maps.groups import ward_groups
from labbench.maps.hebbian import HebbianFeatures
from labbench.maps.measures import (grid_neighbours, grid_touching, quantisation_error,
                                    reconstruction_error, record_measures, topographic_error)
from labbench.maps.neural_gas import NeuralGas
from labbench.maps.record import (PROTOTYPE_FAMILIES, SUBSPACE_FAMILIES, TOPOLOGIES,
                                  PrototypeRecord, SubspaceRecord, grid_positions,
                                  squared_distances)
from labbench.maps.som import SelfOrganisingMap
from labbench.maps.stability import (adjusted_rand_index, layout_agreement, stability_of_records,
                                     stability_summary, verdict)
from labbench.maps.training import MapTraining

__all__ = ["PROTOTYPE_FAMILIES", "SUBSPACE_FAMILIES", "TOPOLOGIES", "PrototypeRecord",
           "SubspaceRecord", "grid_positions", "squared_distances",
           "SelfOrganisingMap", "CompetitiveLearning", "NeuralGas", "HebbianFeatures",
           "MapTraining", "grid_neighbours", "grid_touching", "quantisation_error",
           "topographic_error", "reconstruction_error", "record_measures", "ward_groups",
           "adjusted_rand_index", "layout_agreement", "stability_summary", "stability_of_records",
           "verdict"]
