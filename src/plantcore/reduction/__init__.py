"""Layer 2, reduction and comparison: Gramians, Hankel singular values, balanced truncation,
peak gain and H2 norms, and the equivalence certificate.

Imports :mod:`plantcore.core` and :mod:`plantcore.structure`.
"""

from plantcore.reduction.balanced import (
                                          ReducedModel,
                                          balanced_truncation,
                                          hankel_singular_values,
                                          truncation_error,
)
from plantcore.reduction.equivalence import EquivalenceCertificate, check_equivalence
from plantcore.reduction.gramians import GramianFactors, gramian_factors
from plantcore.reduction.norms import PeakGain, h2_norm, peak_gain

__all__ = ["EquivalenceCertificate", "GramianFactors", "PeakGain", "ReducedModel",
           "balanced_truncation", "check_equivalence", "gramian_factors", "h2_norm",
           "hankel_singular_values", "peak_gain", "truncation_error"]
