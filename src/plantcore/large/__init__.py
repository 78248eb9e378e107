"""Large sparse models: structural pre-reduction, low-rank Gramians, balanced truncation.

Imports only :mod:`plantcore.core`; the dense reduction layer hands sparse models here (see
:func:`plantcore.hankel_singular_values` and :func:`plantcore.balanced_truncation`).  Nothing
in this package forms a dense ``n x n`` array.
"""

from plantcore.large.frequency import PeakErrorEstimate, estimate_peak_error, frequency_response
from plantcore.large.low_rank_balanced import (
                                               LowRankReduction,
                                               low_rank_balanced_truncation,
                                               low_rank_hankel_singular_values,
)
from plantcore.large.low_rank_gramians import LowRankFactor, LowRankGramians, low_rank_gramians
from plantcore.large.structural import StructuralReduction, structural_reduction

__all__ = ["LowRankFactor", "LowRankGramians", "LowRankReduction", "PeakErrorEstimate",
           "StructuralReduction", "estimate_peak_error", "frequency_response",
           "low_rank_balanced_truncation", "low_rank_gramians",
           "low_rank_hankel_singular_values", "structural_reduction"]
