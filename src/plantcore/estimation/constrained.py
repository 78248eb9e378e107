"""Observability-constrained Jacobians: the smallest corrections that keep the expected
unobservable directions unobservable.

See :func:`constrain_observability` for the method and its references.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.errors import AccuracyWarning
from plantcore.core.rank import any_fragile, decide_rank, resolve_tolerance
from plantcore.estimation.validation import _finite, _numeric, _validate_sequences

__all__ = ["ConstrainedJacobians", "constrain_observability"]


@dataclass(frozen=True)
class ConstrainedJacobians:
    """Jacobians minimally corrected to keep the expected directions unobservable.

    Attributes
    ----------
    transition_jacobians : (K, n, n) ndarray
        ``F'_k`` with ``F'_k N_k = N_{k+1}``.
    measurement_jacobians : (K, p, n) ndarray
        ``H'_k`` with ``H'_k N_k = 0``.
    transition_corrections : (K,) ndarray
        ``||F'_k - F_k||_F / ||F_k||_F`` (the absolute size when ``F_k = 0``).
    measurement_corrections : (K,) ndarray
        ``||H'_k - H_k||_F / ||H_k||_F`` (``0`` when ``H_k = 0``, which needs no correction).
    nullspaces : (K + 1, n, d) ndarray
        The directions used, ``N_0 .. N_K`` (``N_K`` repeats ``N_{K-1}`` when only ``K``
        were given; see ``last_transition_constrained``).
    last_transition_constrained : bool
        False when the nullspace was given for ``K`` steps only: then ``F_{K-1}`` (which does
        not enter the observability matrix over the horizon) is returned unchanged.
    constraint_residual : float
        Largest ``||F'_k N_k - N_{k+1}||_F / ||N_{k+1}||_F`` and ``||H'_k N_k||_F / (||H_k||_F
        ||N_k||_F)`` over the steps: the accuracy of the corrected Jacobians.
    decisions : tuple of RankDecision
        The decision that the nullspace columns are independent, at the worst step.
    fragile : bool
        True when that decision lies within a factor 100 of the tolerance.
    """

    transition_jacobians: np.ndarray = field(repr=False)
    measurement_jacobians: np.ndarray = field(repr=False)
    transition_corrections: np.ndarray
    measurement_corrections: np.ndarray
    nullspaces: np.ndarray = field(repr=False)
    last_transition_constrained: bool
    constraint_residual: float
    decisions: tuple = field(repr=False)
    fragile: bool


def _relative_change(delta: np.ndarray, original: np.ndarray) -> float:
    nd = float(np.linalg.norm(delta))
    no = float(np.linalg.norm(original))
    if nd == 0.0:
        return 0.0
    return nd / no if no > 0 else nd


def constrain_observability(transition_jacobians, measurement_jacobians, nullspace, *,
                            tol=None) -> ConstrainedJacobians:
    """Correct Jacobians minimally so that the given directions stay unobservable.

    Parameters
    ----------
    transition_jacobians : (K, n, n) array_like
        ``F_k`` as the estimator computed them.
    measurement_jacobians : (K, p, n) array_like
        ``H_k`` as the estimator computed them.
    nullspace : (n, d), (K, n, d) or (K + 1, n, d) array_like
        ``N_k``: columns spanning the directions the real system cannot see, constant, or
        evaluated where the estimator linearized the measurement at step ``k`` (``K + 1``
        entries constrain every transition; with ``K`` entries the last transition, which
        maps to a step beyond the horizon, is returned unchanged).
    tol : float, optional
        Relative tolerance for deciding that the columns of each ``N_k`` are independent
        (default as :func:`plantcore.core.rank.resolve_tolerance`).

    Returns
    -------
    ConstrainedJacobians

    Raises
    ------
    ValueError
        Shapes that do not fit; a nullspace with dependent columns at some step.

    Notes
    -----
    The observability-constrained extended Kalman filter of Huang, Mourikis and
    Roumeliotis [1]_ requires, for every step, ``F'_k N_k = N_{k+1}`` and ``H'_k N_k = 0``,
    so that ``H'_k F'_{k-1} ... F'_0 N_0 = H'_k N_k = 0``: the linearized model keeps every
    expected direction unobservable, as the nonlinear system does.  Among all matrices that
    satisfy the constraint the closest one in the Frobenius norm is chosen.  Derivation:
    write ``F' = F - Delta``; the constraint is ``Delta N_k = F N_k - N_{k+1} =: E``.  The
    rows of ``Delta`` are independent, and each row ``delta^T`` solves the underdetermined
    system ``N_k^T delta = e`` (``e^T`` the same row of ``E``) with least norm, whose
    solution is ``delta = N_k (N_k^T N_k)^{-1} e`` (Penrose [2]_).  Stacking the rows,

    .. math::

        F'_k = F_k - (F_k N_k - N_{k+1}) N_k^{+}, \\qquad
        H'_k = H_k - H_k N_k N_k^{+},

    the second being the same with ``E = H_k N_k``; ``N_k^+ = (N_k^T N_k)^{-1} N_k^T``
    needs independent columns.  ``N_k^+`` is applied through a Householder QR of ``N_k``
    (``N_k^+ = R^{-1} Q^T``), not by forming ``N_k^T N_k``.  ``H'_k`` is ``H_k`` restricted
    to the orthogonal complement of ``N_k``.  When the estimator's Jacobian at a point
    already annihilates the directions there (an exact measurement Jacobian evaluated at the
    same point as ``N_k``) the measurement correction is at round-off level, and the
    transition corrections carry the whole fix; their size is that of the estimate
    corrections between steps relative to the state's extent.

    References
    ----------
    .. [1] G. P. Huang, A. I. Mourikis and S. I. Roumeliotis, "Observability-based rules for
       designing consistent EKF SLAM estimators", International Journal of Robotics Research
       29(5), 502-528, 2010.  doi:10.1177/0278364909353640
    .. [2] R. Penrose, "A generalized inverse for matrices", Mathematical Proceedings of the
       Cambridge Philosophical Society 51(3), 406-413, 1955.

    Examples
    --------
    >>> import numpy as np
    >>> F = np.repeat(np.eye(2)[None], 4, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.01]]]), 4, axis=0)
    >>> fixed = constrain_observability(F, H, [[1.0], [1.0]])
    >>> np.allclose(fixed.measurement_jacobians @ np.ones(2), 0.0)
    True
    >>> bool(fixed.measurement_corrections.max() < 0.01)
    True
    """
    F, H, K, n, p = _validate_sequences(transition_jacobians, measurement_jacobians)
    N = _numeric(nullspace, "nullspace")
    if N.ndim == 1:
        N = N.reshape(-1, 1)
    if N.ndim == 2:
        if N.shape[0] != n:
            raise ValueError(f"nullspace must have shape (n, d) with n = {n}, got {N.shape}.")
        N = np.repeat(N[None], K + 1, axis=0)
        last_constrained = True
    elif N.ndim == 3:
        if N.shape[1] != n:
            raise ValueError(f"nullspace must have shape (K, n, d) or (K + 1, n, d) with n = {n}, "
                             f"got {N.shape}.")
        if N.shape[0] == K + 1:
            last_constrained = True
        elif N.shape[0] == K:
            N = np.concatenate([N, N[-1:]], axis=0)
            last_constrained = False
        else:
            raise ValueError(f"nullspace has {N.shape[0]} steps; give K = {K} or K + 1 = {K + 1} "
                             "bases (one per step, evaluated where the estimator linearized).")
    else:
        raise ValueError(f"nullspace must be (n, d), (K, n, d) or (K + 1, n, d), got shape "
                         f"{N.shape}.")
    _finite(N, "nullspace")
    d = N.shape[2]
    if d > n:
        raise ValueError(f"nullspace has {d} columns but there are only {n} states.")
    tol_rel = resolve_tolerance(tol, n)

    F_new = F.copy()
    H_new = H.copy()
    f_corr = np.zeros(K)
    h_corr = np.zeros(K)
    worst = None
    residual = 0.0
    if d == 0:
        worst = decide_rank(np.zeros(0), 0.0, tol_rel, "nullspace columns independent")
    factors = []
    for k in range(K + 1 if d else 0):
        Q, Rn = np.linalg.qr(N[k])
        s = np.linalg.svd(Rn, compute_uv=False)     # the singular values of N[k]
        dec = decide_rank(s, float(s[0]), tol_rel, f"nullspace columns independent (step {k})")
        if dec.rank < d:
            raise ValueError(f"nullspace at step {k} has linearly dependent columns (numerical "
                             f"rank {dec.rank} of {d}); give one independent column per "
                             "direction.")
        if worst is None or dec.margin < worst.margin:
            worst = dec
        factors.append((Q, Rn))
    for k in range(K if d else 0):
        Q, Rn = factors[k]
        Nk, Nn = N[k], N[k + 1]
        if k < K - 1 or last_constrained:
            E = F[k] @ Nk - Nn
            delta = np.linalg.solve(Rn.T, E.T).T @ Q.T      # E R^{-1} Q^T = E N^+
            F_new[k] = F[k] - delta
            f_corr[k] = _relative_change(delta, F[k])
            nn = float(np.linalg.norm(Nn))
            residual = max(residual, float(np.linalg.norm(F_new[k] @ Nk - Nn)) / nn)
        HQ = H[k] @ Q
        delta_h = HQ @ Q.T
        H_new[k] = H[k] - delta_h
        h_corr[k] = _relative_change(delta_h, H[k])
        hn = float(np.linalg.norm(H[k])) * float(np.linalg.norm(Nk))
        if hn > 0:
            residual = max(residual, float(np.linalg.norm(H_new[k] @ Nk)) / hn)
    if residual > 1e-8:
        warnings.warn(f"observability-constrained Jacobians satisfy their constraints only to "
                      f"{residual:.1e} relative; the nullspace bases are badly conditioned.",
                      AccuracyWarning, stacklevel=2)
    decisions = (worst,) if worst is not None else ()
    return ConstrainedJacobians(
        transition_jacobians=F_new, measurement_jacobians=H_new, transition_corrections=f_corr,
        measurement_corrections=h_corr, nullspaces=N, last_transition_constrained=last_constrained,
        constraint_residual=residual, decisions=decisions, fragile=any_fragile(decisions))
