"""Cholesky factors of the controllability and observability Gramians of a stable model.

The factors are computed directly, without forming the Gramians, by Hammarling's method on
the real Schur form (S. J. Hammarling, "Numerical solution of the stable, non-negative
definite Lyapunov equation", IMA Journal of Numerical Analysis 2(3), 303-323, 1982), in
continuous and discrete time.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.errors import NumericalBreakdown
from plantcore.core.model import as_model
from plantcore.structure.kalman import _prepare
from plantcore.structure.modes import _stability, _stability_data

__all__ = ["GramianFactors", "gramian_factors"]


def _hammarling_triangular(S: np.ndarray, B: np.ndarray, discrete: bool) -> np.ndarray:
    """Upper-triangular ``U`` with ``X = U U^H`` solving the Lyapunov equation for triangular ``S``.

    Continuous: ``S X + X S^H + B B^H = 0``; discrete: ``S X S^H - X + B B^H = 0``;
    ``S`` complex upper triangular and stable.  Column ``k`` of ``U`` (from the last) comes
    from the partition ``S = [[S1, s], [0, λ]]``, ``U = [[U1, u], [0, ν]]``,
    ``B = [[B1], [b^H]]`` (Hammarling 1982, section 5 and 6), written with the unit vector
    ``e = b / ||b||`` so that no division by a small ``ν`` occurs:

    * continuous: ``γ = sqrt(-2 Re λ)``, ``ν = ||b|| / γ``,
      ``(S1 + conj(λ) I) u = -(γ B1 e + ν s)``, next ``B1 <- B1 - γ u e^H``;
    * discrete: ``γ = sqrt(1 - |λ|^2)``, ``ν = ||b|| / γ``,
      ``(conj(λ) S1 - I) u = -(γ B1 e + conj(λ) ν s)``, ``w = S1 u + ν s``,
      next ``B1 <- B1 + (γ w - (1 + λ) B1 e) e^H``.

    The updated ``B1`` satisfies the reduced equation for ``U1`` exactly (the identity is
    checked by expanding ``U U^H`` blockwise).
    """
    n = S.shape[0]
    U = np.zeros((n, n), dtype=complex)
    W = np.array(B, dtype=complex)
    for k in range(n - 1, -1, -1):
        lam = S[k, k]
        b = W[k, :].conj()
        beta = float(np.linalg.norm(b))
        gamma2 = (1.0 - abs(lam) ** 2) if discrete else -2.0 * lam.real
        if not gamma2 > 0.0:
            raise NumericalBreakdown(
                f"the Lyapunov equation has no solution: the eigenvalue {lam:.6g} is not "
                "strictly stable.", {"eigenvalue": lam})
        gamma = math.sqrt(gamma2)
        nu = beta / gamma
        U[k, k] = nu
        if k == 0:
            break
        S1 = S[:k, :k]
        s = S[:k, k]
        B1 = W[:k, :]
        if beta == 0.0:
            W = B1            # u = 0 and B1 is unchanged
            continue
        e = b / beta
        g = B1 @ e
        if discrete:
            M = np.conj(lam) * S1 - np.eye(k)
            u = -scipy.linalg.solve_triangular(M, gamma * g + np.conj(lam) * nu * s)
            w = S1 @ u + nu * s
            W = B1 + np.outer(gamma * w - (1.0 + lam) * g, e.conj())
        else:
            M = S1 + np.conj(lam) * np.eye(k)
            u = -scipy.linalg.solve_triangular(M, gamma * g + nu * s)
            W = B1 - gamma * np.outer(u, e.conj())
        U[:k, k] = u
    return U


def _cholesky_factor(A: np.ndarray, B: np.ndarray, discrete: bool) -> np.ndarray:
    """Real upper-triangular ``R`` with ``R^T R = P``, ``P`` the Gramian of ``(A, B)``.

    Complex Schur form ``A = Z S Z^H``; Hammarling's recursion on ``(S, Z^H B)`` gives
    ``P = F F^H`` with ``F = Z U``.  Because ``P`` is real, ``P = [Re F, Im F][Re F, Im F]^T``
    up to rounding, and a QR factorization of ``[Re F, Im F]^T`` gives the real triangular
    factor.
    """
    n = A.shape[0]
    if n == 0:
        return np.zeros((0, 0))
    S, Z = scipy.linalg.schur(A, output="complex")
    Bt = Z.conj().T @ B
    if Bt.shape[1] > n:       # only B B^H matters: compress to n columns first
        r = scipy.linalg.qr(Bt.conj().T, mode="r")[0][:n, :]
        Bt = r.conj().T
    U = _hammarling_triangular(S, Bt, discrete)
    F = Z @ U
    G = np.hstack([F.real, F.imag])
    R = scipy.linalg.qr(G.T, mode="r")[0][:n, :]
    signs = np.where(np.diag(R) < 0, -1.0, 1.0)
    return signs[:, None] * R


@dataclass(frozen=True)
class GramianFactors:
    """Cholesky factors of the two Gramians of a stable model.

    Attributes
    ----------
    controllability : (n, n) ndarray
        Upper triangular ``R_c`` with ``P = R_c^T R_c``.
    observability : (n, n) ndarray
        Upper triangular ``R_o`` with ``Q = R_o^T R_o``.
    """

    controllability: np.ndarray = field(repr=False)
    observability: np.ndarray = field(repr=False)


def gramian_factors(model) -> GramianFactors:
    """Cholesky factors of the controllability and observability Gramians.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        A strictly stable model (continuous: every ``Re λ < 0``; discrete: ``|λ| < 1``,
        with the boundary tolerance of :mod:`plantcore.structure.modes`).

    Returns
    -------
    GramianFactors
        Factors in the model's own coordinates: ``A P + P A^T + B B^T = 0`` with
        ``P = R_c^T R_c`` (continuous), ``A P A^T - P + B B^T = 0`` (discrete), and the dual
        equations for ``Q = R_o^T R_o``.

    Raises
    ------
    ValueError
        When the model has a mode that is not strictly stable.

    Notes
    -----
    Hammarling's method, in its complex Schur form variant: the factor is computed column by
    column from the triangular Schur form without ever forming ``P`` (so that ``P`` is
    positive semi-definite by construction and its small eigenvalues keep their relative
    accuracy).  Hammarling works with the real Schur form and 2 x 2 blocks; this
    implementation uses the complex Schur form and converts the complex factor ``F``
    (``P = F F^H``) to a real triangular one by a QR factorization of ``[Re F, Im F]^T``.
    Cost ``O(n^3 + n^2 m)``.

    References
    ----------
    .. [1] S. J. Hammarling, "Numerical solution of the stable, non-negative definite
       Lyapunov equation", IMA Journal of Numerical Analysis 2(3), 303-323, 1982.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.array([[-1.0, 2.0], [0.0, -3.0]]); B = np.array([[1.0], [1.0]])
    >>> f = pc.reduction.gramian_factors((A, B, np.eye(2)))
    >>> P = f.controllability.T @ f.controllability
    >>> bool(np.allclose(A @ P + P @ A.T + B @ B.T, 0.0))
    True
    """
    model = as_model(model)
    p = _prepare(model, None)
    delta, values = _stability_data(p)
    discrete = model.is_discrete
    for lam in values:
        stable, _ = _stability(complex(lam), delta, discrete)
        if not stable:
            raise ValueError(
                f"the Gramians exist only for a stable model, but A has the eigenvalue "
                f"{_fmt(lam)}; use hankel_singular_values or balanced_truncation, which split "
                "off the unstable part.")
    A, B, C = model.A, model.B, model.C
    return GramianFactors(_cholesky_factor(A, B, discrete), _cholesky_factor(A.T, C.T, discrete))


def _fmt(lam) -> str:
    lam = complex(lam)
    if lam.imag == 0:
        return f"{lam.real:.6g}"
    return f"{lam.real:.6g} {'+' if lam.imag > 0 else '-'} {abs(lam.imag):.6g}j"
