"""Error and warning types raised by plantcore.

Bad input raises the built-in :class:`ValueError` (or :class:`TypeError`) with a message that
names the matrix or file field, what was expected and what was received.  The classes here
cover the other cases: a numerical computation that broke down, a result that was
delivered but may have lost accuracy, and a reduction that removed a mode which is not
stable.
"""

from __future__ import annotations

__all__ = ["NumericalBreakdown", "AccuracyWarning", "HiddenModeWarning", "ModelFileError",
           "SamplingWarning"]


class NumericalBreakdown(ArithmeticError):
    """A numerical method could not deliver a trustworthy result.

    Parameters
    ----------
    message : str
        What failed, in one sentence.
    context : dict, optional
        Quantities that help diagnose the failure (sizes, residuals, condition numbers).
    """

    def __init__(self, message: str, context: dict | None = None):
        super().__init__(message)
        self.context = dict(context or {})


class AccuracyWarning(UserWarning):
    """A result was delivered, but a check of its accuracy found a large residual."""


class HiddenModeWarning(UserWarning):
    """A reduction removed a mode that is unstable or on the stability boundary.

    The reduced model has the same transfer function (or, after a truncation, stays within
    its error bound), but the removed mode is still in the plant: the inputs cannot move it
    or the outputs cannot see it, so no controller designed on the reduced model can
    stabilize the plant through an unstable removed mode, or regulate it through one on the
    boundary.  The message names the eigenvalues and the part each was in; the result
    carries them in its ``removed_unstable_modes`` field
    (:class:`plantcore.structure.removed_modes.RemovedMode`).
    """


class SamplingWarning(UserWarning):
    """Sampling at this period may lose controllability or observability.

    Two eigenvalues of the continuous model with equal real parts and imaginary parts
    that differ by a nonzero multiple of ``2 pi / T`` map to the same eigenvalue of the
    sampled model (R. E. Kalman, Y. C. Ho and K. S. Narendra, "Controllability of linear
    dynamical systems", Contributions to Differential Equations 1, 1963); the message names
    the pairs, and :func:`plantcore.reduction.discretization.compare_sampling` says what
    was lost.
    """


class ModelFileError(ValueError):
    """A model file could not be read or written.

    The message always has the form ``"<file>: <field>: <problem>"`` so that the command
    line can print it as a single line.
    """

    def __init__(self, path, field: str | None, problem: str):
        self.path = str(path)
        self.field = field
        self.problem = problem
        where = f"{self.path}: {field}: " if field else f"{self.path}: "
        super().__init__(where + problem)
