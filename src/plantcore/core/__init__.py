"""Layer 0, the core: the model, rank decisions, equilibration, errors, progress and wording.

Nothing here imports another plantcore layer; every other layer may import from here.
"""

from plantcore.core.equilibration import Equilibration, equilibrate, io_scaled
from plantcore.core.errors import AccuracyWarning, ModelFileError, NumericalBreakdown
from plantcore.core.model import StateSpaceModel, as_model, from_transfer_function
from plantcore.core.rank import (
                                 DEFAULT_RELATIVE_TOLERANCE,
                                 FRAGILITY_FACTOR,
                                 RankDecision,
                                 any_fragile,
                                 decide_rank,
                                 resolve_tolerance,
)
from plantcore.core.wording import SAFETY_CAUTION, describe_direction

__all__ = ["AccuracyWarning", "DEFAULT_RELATIVE_TOLERANCE", "Equilibration", "FRAGILITY_FACTOR",
           "ModelFileError", "NumericalBreakdown", "RankDecision", "SAFETY_CAUTION",
           "StateSpaceModel", "any_fragile", "as_model", "decide_rank", "describe_direction",
           "equilibrate", "from_transfer_function", "io_scaled", "resolve_tolerance"]
