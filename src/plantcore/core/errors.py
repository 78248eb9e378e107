"""Error and warning types raised by plantcore.

Bad input raises the built-in :class:`ValueError` (or :class:`TypeError`) with a message that
names the matrix or file field, what was expected and what was received.  The classes here
cover the other two cases: a numerical computation that broke down, and a result that was
delivered but may have lost accuracy.
"""

from __future__ import annotations

__all__ = ["NumericalBreakdown", "AccuracyWarning", "ModelFileError"]


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
