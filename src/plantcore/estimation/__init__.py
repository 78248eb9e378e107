"""Observability of estimators: the audit of linearized (extended Kalman) Jacobian
sequences, Lie-derivative rank of symbolic models, observability-constrained Jacobians and
reading Jacobian files.

Imports the core and files layers.
"""

from plantcore.estimation.audit import ObservabilityAudit, audit_linearized_observability
from plantcore.estimation.constrained import ConstrainedJacobians, constrain_observability
from plantcore.estimation.jacobian_files import AUDIT_FILE_KEYS, audit_from_file
from plantcore.estimation.nonlinear import NonlinearObservability, nonlinear_observability

__all__ = ["AUDIT_FILE_KEYS", "ConstrainedJacobians", "NonlinearObservability",
           "ObservabilityAudit", "audit_from_file", "audit_linearized_observability",
           "constrain_observability", "nonlinear_observability"]
