"""The controllability and observability Gramians of a stable model, with their factors.

Continuous time: ``A P + P A^T + B B^T = 0`` and ``A^T Q + Q A + C^T C = 0``; discrete time:
``A P A^T - P + B B^T = 0`` and ``A^T Q A - Q + C^T C = 0``.  The Cholesky factor is
computed first, directly from the Schur form by Hammarling's method (see
:mod:`plantcore.reduction.gramians`), and the Gramian is its product, so the Gramian is
symmetric positive semi-definite by construction.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import as_model
from plantcore.reduction.gramians import _cholesky_factor, _fmt
from plantcore.structure.kalman import _prepare
from plantcore.structure.modes import _stability, _stability_data
from plantcore.structure.pbh_measures import threads_by_size

__all__ = ["Gramian", "controllability_gramian", "observability_gramian"]


@dataclass(frozen=True)
class Gramian:
    """One Gramian of a stable model.

    Attributes
    ----------
    kind : str
        ``"controllability"`` or ``"observability"``.
    matrix : (n, n) ndarray
        The Gramian, symmetric positive semi-definite; ``matrix = factor.T @ factor``.
    cholesky_factor : (n, n) ndarray
        Upper triangular ``R`` with non-negative diagonal and ``matrix = R^T R``.
    discrete : bool
        True for the discrete-time Lyapunov equation.
    residual : float
        The measured relative residual of the Lyapunov equation: the Frobenius norm of its
        left-hand side at ``matrix``, divided by the size of its terms
        (``2 ||A|| ||X|| + ||M M^T||`` continuous, ``(||A||^2 + 1) ||X|| + ||M M^T||``
        discrete, ``M`` = ``B`` or ``C^T``); a small multiple of ``eps`` when the
        equation is well conditioned.
    """

    kind: str
    matrix: np.ndarray = field(repr=False)
    cholesky_factor: np.ndarray = field(repr=False)
    discrete: bool
    residual: float


@threads_by_size()
def controllability_gramian(model) -> Gramian:
    """The controllability Gramian ``P`` and its Cholesky factor.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        A strictly stable model: every eigenvalue with ``Re λ < -δ`` (continuous) or
        ``|λ| < 1 - δ`` (discrete), ``δ`` the boundary tolerance of the mode table
        (:mod:`plantcore.structure.modes`).

    Returns
    -------
    Gramian
        ``P = ∫_0^∞ e^{At} B B^T e^{A^T t} dt`` (continuous) or ``Σ_k A^k B B^T (A^T)^k``
        (discrete), in the model's own coordinates.

    Raises
    ------
    ValueError
        When some eigenvalue is not strictly stable; the message names every such eigenvalue.
        (The integral can converge when those modes are uncontrollable, but the Lyapunov
        equation then has no unique solution: take the Gramian of the minimal realization,
        or of the stable part.)

    Notes
    -----
    Hammarling's method on the complex Schur form gives the factor without forming ``P``
    (S. J. Hammarling, "Numerical solution of the stable, non-negative definite Lyapunov
    equation", IMA Journal of Numerical Analysis 2(3), 303-323, 1982), so small eigenvalues
    of ``P`` keep their relative accuracy in the factor; ``P`` itself is ``R^T R``.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.array([[-1.0, 2.0], [0.0, -3.0]]); B = np.array([[1.0], [1.0]])
    >>> P = pc.controllability_gramian((A, B, np.eye(2))).matrix
    >>> bool(np.allclose(A @ P + P @ A.T + B @ B.T, 0.0, atol=1e-14))
    True
    """
    return _gramian(model, "controllability")


@threads_by_size()
def observability_gramian(model) -> Gramian:
    """The observability Gramian ``Q`` and its Cholesky factor.

    The dual of :func:`controllability_gramian`: ``Q`` is the controllability Gramian of
    ``(A^T, C^T)``; same conditions, same error for a model that is not strictly stable.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.array([[0.5, 1.0], [0.0, -0.2]]); C = np.array([[1.0, 0.0]])
    >>> g = pc.observability_gramian(pc.StateSpaceModel(A, np.ones((2, 1)), C, dt=0.1))
    >>> bool(np.allclose(A.T @ g.matrix @ A - g.matrix + C.T @ C, 0.0, atol=1e-14))
    True
    """
    return _gramian(model, "observability")


def _gramian(model, kind: str) -> Gramian:
    model = as_model(model)
    _require_strictly_stable(model)
    discrete = model.is_discrete
    if kind == "controllability":
        A, M = model.A, model.B
    else:
        A, M = model.A.T, model.C.T
    R = _cholesky_factor(A, M, discrete)
    X = R.T @ R
    X = 0.5 * (X + X.T)
    return Gramian(kind, X, R, discrete, _residual(A, M, X, discrete))


def _require_strictly_stable(model) -> None:
    if model.n == 0:
        return
    delta, values = _stability_data(_prepare(model, None))
    bad = [lam for lam in values if not _stability(complex(lam), delta, model.is_discrete)[0]]
    if bad:
        where = "|λ| < 1" if model.is_discrete else "Re λ < 0"
        listed = ", ".join(_fmt(lam) for lam in bad)
        raise ValueError(
            f"the Gramians exist only for a strictly stable model ({where} for every "
            f"eigenvalue), but A has {len(bad)} eigenvalue(s) that are not: {listed}. "
            "Take the Gramian of the minimal realization when these modes are hidden, or use "
            "hankel_singular_values or balanced_truncation, which split off the unstable part.")


def _residual(A, M, X, discrete: bool) -> float:
    MM = M @ M.T
    if discrete:
        L = A @ X @ A.T - X + MM
        size = (float(np.linalg.norm(A)) ** 2 + 1.0) * float(np.linalg.norm(X))
    else:
        L = A @ X + X @ A.T + MM
        size = 2.0 * float(np.linalg.norm(A)) * float(np.linalg.norm(X))
    size += float(np.linalg.norm(MM))
    return float(np.linalg.norm(L)) / size if size > 0 else 0.0
