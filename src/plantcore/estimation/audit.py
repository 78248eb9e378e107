r"""Observability audit of linearized (extended Kalman) estimators.

An extended Kalman filter linearizes its model at the current estimate at every step.
Because the linearization points move with the estimate, the time-varying linear model the
filter actually uses can gain observable directions that the real nonlinear system does not
have; the filter then collects information that does not exist, its covariance shrinks in
directions it knows nothing about, and its errors leave its own confidence bounds.  This
module offers three tools:

* :func:`audit_linearized_observability` (and :func:`audit_from_file`): the observability of
  the Jacobian sequences an estimator used, measured against a basis of the directions the
  real system cannot see, with ranks, magnitudes (leakage, implied standard deviation) and
  their growth over the horizon.
* :func:`nonlinear_observability`: the observability rank of a symbolic nonlinear model from
  stacked Lie derivatives (continuous time) or compositions (discrete time), and its
  unobservable directions at a point, to find the expected basis instead of guessing it.
* :func:`constrain_observability`: the smallest corrections of the Jacobians that keep the
  expected unobservable directions unobservable (the observability-constrained filter).

Conventions
-----------
The linearized time-varying model over a horizon of ``K`` steps is

.. math::

    x_{k+1} = F_k x_k, \qquad y_k = H_k x_k, \qquad k = 0, \dots, K-1,

so the observability matrix stacks ``H_k F_{k-1} ... F_0`` (``H_0`` first); the last
transition ``F_{K-1}`` does not enter it.  In an extended Kalman filter ``H_k`` is the
measurement Jacobian of the update at step ``k`` and ``F_k`` the transition Jacobian of the
prediction that follows it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.names import list_problem
from plantcore.core.rank import any_fragile, decide_rank, resolve_tolerance
from plantcore.core.rendering import render
from plantcore.estimation.validation import (
    _orthonormal_basis,
    _padded_singular_values,
    _qr_r,
    _validate_basis,
    _validate_scale,
    _validate_sequences,
    _whitening,
)

__all__ = ["ObservabilityAudit", "audit_linearized_observability"]


@dataclass(frozen=True)
class ObservabilityAudit:
    """Observability of the linearized model an estimator used, against the expected one.

    All quantities refer to the *working coordinates*: the user's state coordinates, or the
    scaled coordinates ``x / state_scale`` when a ``state_scale`` was given.

    Attributes
    ----------
    horizon : int
        Number of steps ``K``.
    n : int
        Number of states.
    n_measurements : int
        Measurements per step ``p``.
    rank : int
        Numerical rank of the observability matrix over the horizon.
    expected_rank : int
        ``n - d``: the rank the real system allows, ``d`` expected unobservable directions.
    spurious_dimension : int
        How many of the expected unobservable directions the linearized model claims to see:
        the numerical rank of ``O @ V`` with ``V`` the orthonormal expected basis (``0`` for
        an estimator consistent with the real system).  Always ``>= 0``; ``rank`` can be
        below ``expected_rank`` when the horizon is short, independently of this.
    singular_values : (n,) ndarray
        Singular values of the observability matrix, descending, zero-padded when it has
        fewer rows than states.
    leakage : (d,) ndarray
        ``||O v_i|| / sigma_max(O)`` for each orthonormal expected direction ``v_i``: how much
        of it the linearized model claims to see, relative to its best-seen direction.
        Round-off level (about ``1e-15``) for a consistent estimator.
    implied_std : (d,) ndarray
        ``(v_i^T I v_i)^{-1/2}`` with ``I = sum_k (H_k Phi_k)^T R_k^{-1} (H_k Phi_k)`` the
        information about the initial state that the linearized model claims (``Phi_k =
        F_{k-1} ... F_0``): the smallest standard deviation along ``v_i`` that a filter on
        this model could report from the measurements alone (the Cramér-Rao bound along
        ``v_i`` with the other directions known; the marginal standard deviation is at least
        this).  In the units of the coordinate along the unit vector ``v_i``; in units of the
        measurement noise standard deviation when no noise was given.  Infinite when the
        direction's leakage lies at or below the tolerance (no information beyond round-off).
    principal_angles : (m,) ndarray
        Principal angles in radians, ascending, between the numerical null space (dimension
        ``n - rank``) and the expected span, ``m = min(d, n - rank)``.  Zero angles are
        shared directions.
    expected_basis : (n, d) ndarray
        The orthonormalized expected basis ``V`` the magnitudes refer to (Householder QR,
        column order kept: ``v_1`` is the first column normalized, ``v_2`` the part of the
        second orthogonal to the first, and so on).
    nullspace : (n, n - rank) ndarray
        Orthonormal basis of the numerical null space of the observability matrix.
    singular_value_growth : (K, n) ndarray
        Row ``k``: the singular values of the observability matrix of steps ``0..k``.
    leakage_growth : (K, d) ndarray
        Row ``k``: the leakage over steps ``0..k``.
    implied_std_growth : (K, d) ndarray
        Row ``k``: the implied standard deviation from steps ``0..k``.
    tolerance : float
        Relative rank tolerance used (relative to ``sigma_max(O)``).
    state_scale : (n,) ndarray or None
        Characteristic sizes of the states, when given.
    noise_given : bool
        Whether a measurement noise covariance was given.
    state_names : tuple of str or None
        Names of the states, for reports.
    decisions : tuple of RankDecision
        Every rank decision: the expected basis' columns, the observability matrix, and the
        expected directions it sees.
    fragile : bool
        True when any decision lies within a factor 100 of the tolerance.
    notes : tuple of str
        Plain sentences about what the audit can and cannot show for this input.
    """

    horizon: int
    n: int
    n_measurements: int
    rank: int
    expected_rank: int
    spurious_dimension: int
    singular_values: np.ndarray = field(repr=False)
    leakage: np.ndarray
    implied_std: np.ndarray
    principal_angles: np.ndarray
    expected_basis: np.ndarray = field(repr=False)
    nullspace: np.ndarray = field(repr=False)
    singular_value_growth: np.ndarray = field(repr=False)
    leakage_growth: np.ndarray = field(repr=False)
    implied_std_growth: np.ndarray = field(repr=False)
    tolerance: float
    state_scale: np.ndarray | None = field(repr=False)
    noise_given: bool
    state_names: tuple | None = field(repr=False)
    decisions: tuple = field(repr=False)
    fragile: bool
    notes: tuple = field(repr=False)

    @property
    def consistent(self) -> bool:
        """True when the linearized model sees none of the expected unobservable directions."""
        return self.spurious_dimension == 0

    def to_text(self, *, source=None) -> str:
        """Plain-text summary (rendered by :func:`plantcore.reports.audit.audit_text`)."""
        return render(self, "text", source=source)

    def to_html(self, *, source=None, title=None, fragment: bool = False) -> str:
        """Self-contained HTML report (rendered by :func:`plantcore.reports.audit.audit_html`):
        a complete page, or with ``fragment=True`` one ``<div>`` to embed (no ``<html>`` or
        ``<body>``, its style sheet scoped to the report)."""
        return render(self, "html", source=source, title=title, fragment=fragment)


def audit_linearized_observability(transition_jacobians, measurement_jacobians,
                                   expected_unobservable, *, measurement_noise=None, tol=None,
                                   state_scale=None, state_names=None) -> ObservabilityAudit:
    """Audit the observability of the Jacobian sequences an estimator used.

    Parameters
    ----------
    transition_jacobians : (K, n, n) array_like
        ``F_k``, the transition Jacobians, one per step (``x[k+1] = F[k] x[k]``).
    measurement_jacobians : (K, p, n) array_like
        ``H_k``, the measurement Jacobians, one per step (``y[k] = H[k] x[k]``).  Steps with
        fewer measurements are padded with zero rows.
    expected_unobservable : (n, d) array_like
        Columns spanning the directions the real (nonlinear) system cannot see, evaluated at
        the linearization point of step 0 (for state-dependent directions).  A 1-D array is
        one direction.  ``d = 0`` is allowed.  Orthonormalized internally (see Notes).
    measurement_noise : float, (p,), (p, p) or (K, p, p) array_like, optional
        Measurement noise: one variance for all, variances per measurement, one covariance
        for all steps, or a covariance per step.  Only ``implied_std`` uses it; without it
        unit noise is assumed.
    tol : float, optional
        Relative rank tolerance in (0, 1), relative to the largest singular value of the
        observability matrix.  Default: :func:`plantcore.rank.resolve_tolerance` (``5e-11``
        for models below several thousand states; see Notes).
    state_scale : (n,) array_like, optional
        A characteristic size for each state (for example 10 m for positions, 0.1 rad for
        angles).  The audit then works in the scaled coordinates ``x / state_scale``.
    state_names : sequence of str, optional
        State names, used by reports only.

    Returns
    -------
    ObservabilityAudit

    Raises
    ------
    ValueError
        Shapes that do not fit together, non-finite entries, a dependent expected basis,
        a noise covariance that is not positive definite.

    Notes
    -----
    **Algorithm.**  The observability matrix ``O`` stacks the blocks ``H_k Phi_k`` with
    ``Phi_0 = I`` and ``Phi_{k+1} = F_k Phi_k``.  Its triangular factor is updated one block
    at a time by Householder QR, ``R_k = qr([R_{k-1}; H_k Phi_k])``, so the singular values
    and the leakage ``||O_k v|| = ||R_k v||`` after every step come from orthogonal
    transformations only; the rank is decided from the singular values of the final factor
    (which equal those of ``O``) with :func:`plantcore.rank.decide_rank`.  This is the
    observability test of the linear time-varying model (the local weak observability
    of Hermann and Krener [1]_ for the linearization), applied as in the consistency
    analysis of extended Kalman filters for localization and mapping by Huang, Mourikis and
    Roumeliotis [2]_: along a consistent trajectory ``F_k N(x_k) = N(x_{k+1})`` and
    ``H_k N(x_k) = 0``, so ``O N(x_0) = 0``; when the linearization points jump at every
    update this chain breaks and ``O`` sees part of ``N``.

    **Default tolerance.**  The entries of ``O`` come from Jacobians computed in floating
    point and from products of up to ``K`` transitions; for horizons of hundreds of steps
    their rounding stays near ``1e-14`` relative, a factor 100 or more below the default
    ``5e-11``.  Spurious observability caused by moving linearization points is of the size
    of the estimate corrections relative to the state's extent, typically ``1e-6`` to
    ``1e-2``, far above it.  A leakage between the two is reported as fragile.

    **Units and origin.**  Ranks do not depend on units: a change of units is a diagonal
    similarity ``F -> S^{-1} F S``, ``H -> H S``, ``N -> S^{-1} N`` that maps the null space
    onto itself.  Magnitudes do: leakage and implied standard deviations compare entries
    measured in metres with entries in radians.  Scaling every state by a characteristic
    size (``state_scale``) makes them comparable across states and across estimators.  The
    choice of origin matters for state-dependent directions: a rotation about the origin
    moves far-away states more.  Orthonormalizing the expected basis (Householder QR, in the
    given column order) removes from each direction its component along the earlier ones;
    in planar mapping, with the two translations first, the rotation becomes the rotation
    about the centroid of the positions involved, independent of the origin.

    **Weighting of the steps.**  Singular values and leakage are relative to the largest
    singular value of the whole stack, so steps with large blocks weigh most: with unstable
    transitions ``Phi_k`` grows and late steps dominate.  Scale the states
    (``state_scale``) or audit shorter windows when the blocks differ by many orders of
    magnitude.  For a constant pair ``F_k = A``, ``H_k = C`` the stack is the Krylov-type
    matrix ``[C; CA; CA^2; ...]``, which becomes ill-conditioned when the modes of ``A``
    grow at very different rates; the audit is meant for the near-identity transitions of
    navigation and tracking filters, and the observability of a time-invariant model is
    better decided with :func:`plantcore.observability_staircase`, which decides each rank
    step relative to the model's scale.

    **What the audit cannot show.**  A single step holds no transition, so inconsistent
    linearization points cannot show: the measurement Jacobian at a point annihilates the
    unobservable directions at that same point.  Audit two steps or more.

    References
    ----------
    .. [1] R. Hermann and A. J. Krener, "Nonlinear controllability and observability", IEEE
       Transactions on Automatic Control 22(5), 728-740, 1977.  doi:10.1109/TAC.1977.1101601
    .. [2] G. P. Huang, A. I. Mourikis and S. I. Roumeliotis, "Observability-based rules for
       designing consistent EKF SLAM estimators", International Journal of Robotics Research
       29(5), 502-528, 2010.  doi:10.1177/0278364909353640

    Examples
    --------
    A robot on a line measures the distance to a landmark: both positions shifted together
    are unobservable.  Consistent Jacobians keep the shift invisible:

    >>> import numpy as np
    >>> F = np.repeat(np.eye(2)[None], 5, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.0]]]), 5, axis=0)
    >>> audit = audit_linearized_observability(F, H, [[1.0], [1.0]])
    >>> audit.rank, audit.expected_rank, audit.spurious_dimension
    (1, 1, 0)
    >>> bool(audit.leakage[0] < 1e-15)
    True

    A measurement Jacobian that weighs the two positions differently sees the shift:

    >>> H[3] = [[-1.0, 1.001]]
    >>> audit_linearized_observability(F, H, [[1.0], [1.0]]).spurious_dimension
    1
    """
    F, H, K, n, p = _validate_sequences(transition_jacobians, measurement_jacobians)
    N = _validate_basis(expected_unobservable, n, "expected_unobservable")
    d = N.shape[1]
    s = _validate_scale(state_scale, n)
    W = _whitening(measurement_noise, K, p)
    tol = resolve_tolerance(tol, n)
    names = None
    if state_names is not None:
        names = tuple(str(x) for x in state_names)
        if len(names) != n:
            raise ValueError(f"state_names has {len(names)} names but there are {n} states.")
        problem = list_problem(names)
        if problem:
            raise ValueError(f"state_names: {problem}.")
    if s is not None:  # working coordinates x~ = x / s
        F = F * s[None, None, :] / s[None, :, None]
        H = H * s[None, None, :]
        N = N / s[:, None]

    V, basis_decision = _orthonormal_basis(N, tol, "expected_unobservable")

    R = np.zeros((0, n))
    Phi = np.eye(n)
    sv_growth = np.zeros((K, n))
    leak_growth = np.zeros((K, d))
    info_growth = np.zeros((K, d))
    info = np.zeros(d)
    for k in range(K):
        block = H[k] @ Phi
        R = _qr_r(np.vstack([R, block]))
        sv = _padded_singular_values(R, n)
        sv_growth[k] = sv
        if d:
            leak_growth[k] = np.linalg.norm(R @ V, axis=0) / sv[0] if sv.size and sv[0] > 0 else 0.0
            Wk = (W if W is None or W.ndim == 2 else W[k])
            wb = block if Wk is None else Wk @ block
            info = info + np.sum((wb @ V) ** 2, axis=0)
            info_growth[k] = info
        Phi = F[k] @ Phi

    sv = sv_growth[-1]
    sigma_max = float(sv[0]) if n else 0.0
    rank_decision = decide_rank(sv, sigma_max, tol, f"observability matrix over {K} steps")
    r = rank_decision.rank
    if R.shape[0] and n:
        _, _, Vt = np.linalg.svd(R, full_matrices=True)
        nullspace = Vt[r:].T.copy()
    else:
        nullspace = np.eye(n)[:, r:]
    seen_sv = np.linalg.svd(R @ V, compute_uv=False) if (d and R.shape[0]) else np.zeros(0)
    seen_decision = decide_rank(seen_sv, sigma_max, tol, "expected directions the model sees")

    leakage = leak_growth[-1].copy() if d else np.zeros(0)
    with np.errstate(divide="ignore"):
        std_growth = np.where((leak_growth > tol) & (info_growth > 0),
                              1.0 / np.sqrt(np.where(info_growth > 0, info_growth, 1.0)), np.inf)
    implied_std = std_growth[-1].copy() if d else np.zeros(0)

    if nullspace.shape[1] and d:
        angles = np.sort(scipy.linalg.subspace_angles(nullspace, V))
    else:
        angles = np.zeros(0)

    spurious = seen_decision.rank
    notes = []
    if K == 1:
        notes.append("A single step holds no transition Jacobian, so inconsistent linearization "
                     "points cannot show (the measurement Jacobian at a point annihilates the "
                     "unobservable directions there); audit two or more steps.")
    if spurious:
        notes.append(f"The linearized model claims to see {spurious} of the {d} expected "
                     "unobservable direction(s): a filter built on these Jacobians gains "
                     "information that does not exist and becomes overconfident along them.")
    if r < n - d:
        notes.append(f"The observability matrix has rank {r}, below the {n - d} that the "
                     "expected basis allows: this horizon does not yet reveal every observable "
                     "direction (too few steps, measurements or excitation).")
    if d and measurement_noise is None:
        notes.append("No measurement noise given: implied standard deviations assume unit "
                     "measurement noise.")
    decisions = (basis_decision, rank_decision, seen_decision)
    return ObservabilityAudit(
        horizon=K, n=n, n_measurements=p, rank=r, expected_rank=n - d,
        spurious_dimension=spurious, singular_values=sv, leakage=leakage,
        implied_std=implied_std, principal_angles=angles, expected_basis=V,
        nullspace=nullspace, singular_value_growth=sv_growth, leakage_growth=leak_growth,
        implied_std_growth=std_growth, tolerance=tol, state_scale=s,
        noise_given=measurement_noise is not None, state_names=names,
        decisions=decisions, fragile=any_fragile(decisions), notes=tuple(notes))
