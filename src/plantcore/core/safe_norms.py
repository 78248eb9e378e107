"""Frobenius norms that neither overflow nor underflow, for any finite entries.

``numpy.linalg.norm(X)`` (the Frobenius norm) sums the squares of the entries, which
overflows to ``inf`` once an entry exceeds about 1.3e154 and loses every digit of entries
below about 1.5e-154.  Models in extreme units reach both.  :func:`frobenius` first divides by
the largest magnitude (a power of two, so the division is exact) when the entries are outside
a safe band, which is the usual remedy (the scaled sum of squares of LAPACK ``dnrm2`` and
``dlassq``: C. L. Lawson, R. J. Hanson, D. R. Kincaid and F. T. Krogh, "Basic linear algebra
subprograms for Fortran usage", ACM TOMS 5(3), 1979).  Inside the band it is
``numpy.linalg.norm`` itself, with no extra pass.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["frobenius", "frobenius_of_columns", "frobenius_of_rows"]

#: Entries whose magnitudes lie in [_SMALL, _LARGE] have squares (and sums of up to 2^40 of
#: them) that neither overflow nor underflow to subnormals.
_LARGE = 2.0 ** 450
_SMALL = 2.0 ** -450


def _peak(X: np.ndarray) -> float:
    return float(np.max(np.abs(X))) if X.size else 0.0


def frobenius(X) -> float:
    """The Frobenius norm of ``X`` (any shape), without overflow or underflow.

    >>> frobenius(np.array([[3e300, 4e300]]))
    5e+300
    >>> frobenius(np.array([3.0, 4.0]) * 2.0 ** -1000) == 5.0 * 2.0 ** -1000
    True
    >>> frobenius(np.zeros((0, 3)))
    0.0
    """
    X = np.asarray(X)
    if X.size == 0:
        return 0.0
    peak = _peak(X)
    if peak == 0.0 or not math.isfinite(peak):
        return peak
    if _SMALL <= peak <= _LARGE:
        return float(np.linalg.norm(X))
    power = 2.0 ** math.frexp(peak)[1]
    return float(np.linalg.norm(X / power)) * power


def _along(X, axis: int) -> np.ndarray:
    X = np.asarray(X)
    if X.size == 0:
        return np.zeros(X.shape[1 - axis] if X.ndim == 2 else 0)
    peak = _peak(X)
    if peak == 0.0 or _SMALL <= peak <= _LARGE or not math.isfinite(peak):
        return np.linalg.norm(X, axis=axis)
    power = 2.0 ** math.frexp(peak)[1]
    return np.linalg.norm(X / power, axis=axis) * power


def frobenius_of_columns(X) -> np.ndarray:
    """The 2-norm of each column of a matrix, without overflow or underflow."""
    return _along(X, 0)


def frobenius_of_rows(X) -> np.ndarray:
    """The 2-norm of each row of a matrix, without overflow or underflow."""
    return _along(X, 1)
