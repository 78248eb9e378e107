"""plantcore: find what a linear model's inputs can move and outputs can see, and remove the rest.

The public API is what ``__all__`` lists; everything else is internal.  The package is
built in layers whose imports only point down (see "How the code is organized" in the
README): ``core`` -> ``structure`` -> ``reduction`` -> ``analysis``; ``files``,
``estimation`` and ``sweeps`` beside them; ``reports`` on top; ``cli`` and ``demo`` above all.
"""

from plantcore.analysis import Analysis, analyze
from plantcore.core import (AccuracyWarning, ModelFileError, NumericalBreakdown, RankDecision,
                            StateSpaceModel, as_model, from_transfer_function)
from plantcore.core.errors import HiddenModeWarning, SamplingWarning
from plantcore.core.version import __version__
from plantcore.demo import run_demo
from plantcore.estimation import (ConstrainedJacobians, NonlinearObservability,
                                  ObservabilityAudit, audit_from_file,
                                  audit_linearized_observability, constrain_observability,
                                  nonlinear_observability)
from plantcore.examples import example_path, list_examples, load_example
from plantcore.files import load_model, save_model
from plantcore.files.candidate_files import load_candidates
from plantcore.files.response_files import (ImpulseResponseData, load_impulse_response,
                                            save_impulse_response)
from plantcore.large import (LowRankFactor, LowRankGramians, LowRankReduction, PeakErrorEstimate,
                             StructuralReduction, low_rank_gramians, structural_reduction)
from plantcore.reduction import (EquivalenceCertificate, PeakGain, ReducedModel,
                                 balanced_truncation, check_equivalence, h2_norm,
                                 hankel_singular_values, peak_gain)
from plantcore.reduction.discretization import (ContinuousFromSampled, SampledModel,
                                                SamplingComparison, compare_sampling,
                                                continuous_from_sampled, discretize)
from plantcore.reduction.gramian_matrices import (Gramian, controllability_gramian,
                                                  observability_gramian)
from plantcore.reduction.impulse_realization import ImpulseRealization, realize_impulse_response
from plantcore.reduction.markov import MarkovParameters, markov_parameters
from plantcore.reduction.singular_perturbation import (EliminatedStates, ResidualizedModel,
                                                       balanced_residualization,
                                                       eliminate_states)
from plantcore.reduction.steady_state_gain import SteadyStateGain, steady_state_gain
from plantcore.reports import (install_rich_display, plot_eigenvalue_map,
                               plot_frequency_response, plot_hankel_singular_values,
                               plot_sweep_map, write_html_report)
from plantcore.structure import (ExactPartSizes, KalmanDecomposition, MinimalRealization, Mode,
                                 PartSizes, StaircaseForm, classify_modes,
                                 controllability_staircase, exact_minimal_order,
                                 exact_part_sizes, exact_transfer_matrix, kalman_decomposition,
                                 minimal_realization, observability_staircase)
from plantcore.structure.placement import (PlacementSuggestion, RankedCandidate,
                                           suggest_actuators, suggest_sensors)
from plantcore.structure.removed_modes import RemovedMode
from plantcore.structure.structural_matching import StructuralPlacement, structural_placement
from plantcore.structure.zeros import TransmissionZeros, transmission_zeros
from plantcore.sweeps import SweepResult, SweepSpec, grid, load_sweep_spec, random_points, sweep

__all__ = [
    "plot_eigenvalue_map",
    "plot_frequency_response",
    "plot_hankel_singular_values",
    "plot_sweep_map",
    "structural_reduction",
    "StructuralReduction",
    "low_rank_gramians",
    "LowRankGramians",
    "LowRankFactor",
    "LowRankReduction",
    "PeakErrorEstimate",
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
    "HiddenModeWarning",
    "RemovedMode",
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
    "transmission_zeros",
    "TransmissionZeros",
    "steady_state_gain",
    "SteadyStateGain",
    "controllability_gramian",
    "observability_gramian",
    "Gramian",
    "discretize",
    "SampledModel",
    "continuous_from_sampled",
    "ContinuousFromSampled",
    "compare_sampling",
    "SamplingComparison",
    "SamplingWarning",
    "balanced_residualization",
    "ResidualizedModel",
    "eliminate_states",
    "EliminatedStates",
    "markov_parameters",
    "MarkovParameters",
    "realize_impulse_response",
    "ImpulseRealization",
    "load_impulse_response",
    "save_impulse_response",
    "ImpulseResponseData",
    "suggest_actuators",
    "suggest_sensors",
    "PlacementSuggestion",
    "RankedCandidate",
    "structural_placement",
    "StructuralPlacement",
    "load_candidates",
]

# A short repr and a notebook display for every public result (plantcore.reports.display).
install_rich_display([globals()[name] for name in __all__])
