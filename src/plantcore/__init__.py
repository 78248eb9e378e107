"""plantcore: find what a linear model's inputs can move and outputs can see, and remove the rest.

The public API is what ``__all__`` lists; everything else is internal.
"""

from .errors import AccuracyWarning, ModelFileError, NumericalBreakdown
from .estimator import (ConstrainedJacobians, NonlinearObservability, ObservabilityAudit,
                        audit_from_file, audit_linearized_observability,
                        constrain_observability, nonlinear_observability)
from .equivalence import EquivalenceCertificate, check_equivalence
from .norms import PeakGain, h2_norm, peak_gain
from .exact import ExactPartSizes, exact_minimal_order, exact_part_sizes, exact_transfer_matrix
from .io import load_model, save_model
from .kalman import KalmanDecomposition, PartSizes, kalman_decomposition
from .minimal import MinimalRealization, minimal_realization
from .model import StateSpaceModel, as_model, from_transfer_function
from .rank import RankDecision
from .staircase import StaircaseForm, controllability_staircase, observability_staircase
from .modes import Mode, classify_modes
from .balanced import ReducedModel, balanced_truncation, hankel_singular_values
from .sweep import SweepResult, grid, random_points, sweep
from .sweep_spec import SweepSpec, load_sweep_spec
from .analysis import Analysis, analyze
from .examples import example_path, list_examples, load_example
from .html_report import write_html_report
from .demo import run_demo

__version__ = "0.1.0"

__all__ = [
    "audit_linearized_observability",
    "audit_from_file",
    "ObservabilityAudit",
    "nonlinear_observability",
    "NonlinearObservability",
    "constrain_observability",
    "ConstrainedJacobians",
    "peak_gain",
    "PeakGain",
    "h2_norm",
    "check_equivalence",
    "EquivalenceCertificate",
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
    "load_model",
    "save_model",
    "exact_part_sizes",
    "exact_minimal_order",
    "exact_transfer_matrix",
    "ExactPartSizes",
    "classify_modes",
    "Mode",
    "hankel_singular_values",
    "balanced_truncation",
    "ReducedModel",
    "sweep",
    "grid",
    "random_points",
    "SweepResult",
    "load_sweep_spec",
    "SweepSpec",
    "analyze",
    "Analysis",
    "list_examples",
    "example_path",
    "load_example",
    "write_html_report",
    "run_demo",
]
