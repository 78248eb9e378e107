"""Layer 1, the structure of a model: staircase forms, the modal certificate, the Kalman
decomposition, the minimal realization, per-mode classification and the exact path.

Imports only :mod:`plantcore.core`.
"""

from plantcore.structure.distance import (
                                          DistanceEstimate,
                                          distance_to_uncontrollability,
                                          distance_to_unobservability,
)
from plantcore.structure.exact import (
                                          ExactPartSizes,
                                          exact_minimal_order,
                                          exact_part_sizes,
                                          exact_transfer_matrix,
)
from plantcore.structure.kalman import (
                                          PART_NAMES,
                                          KalmanDecomposition,
                                          PartSizes,
                                          kalman_decomposition,
)
from plantcore.structure.minimal import MinimalRealization, minimal_realization
from plantcore.structure.modes import Mode, classify_modes
from plantcore.structure.staircase import (
                                          StaircaseForm,
                                          controllability_staircase,
                                          observability_staircase,
)

__all__ = ["DistanceEstimate", "ExactPartSizes", "KalmanDecomposition", "MinimalRealization",
           "Mode", "PART_NAMES", "PartSizes", "StaircaseForm", "classify_modes",
           "controllability_staircase", "distance_to_uncontrollability",
           "distance_to_unobservability", "exact_minimal_order", "exact_part_sizes",
           "exact_transfer_matrix", "kalman_decomposition", "minimal_realization",
           "observability_staircase"]
