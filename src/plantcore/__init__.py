"""plantcore: find what a linear model's inputs can move and outputs can see, and remove the rest.

The public API is what ``__all__`` lists; everything else is internal.
"""

from .errors import AccuracyWarning, ModelFileError, NumericalBreakdown
from .kalman import KalmanDecomposition, PartSizes, kalman_decomposition
from .minimal import MinimalRealization, minimal_realization
from .model import StateSpaceModel, as_model, from_transfer_function
from .rank import RankDecision
from .staircase import StaircaseForm, controllability_staircase, observability_staircase

__version__ = "0.1.0"

__all__ = [
    "StateSpaceModel",
    "as_model",
    "from_transfer_function",
    "controllability_staircase",
    "observability_staircase",
    "StaircaseForm",
    "kalman_decomposition",
    "KalmanDecomposition",
    "PartSizes",
    "minimal_realization",
    "MinimalRealization",
    "RankDecision",
    "AccuracyWarning",
    "ModelFileError",
    "NumericalBreakdown",
]
