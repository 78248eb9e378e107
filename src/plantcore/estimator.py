"""Observability audit of linearized (extended Kalman) estimators.

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

    x_{k+1} = F_k x_k, \\qquad y_k = H_k x_k, \\qquad k = 0, \\dots, K-1,

so the observability matrix stacks ``H_k F_{k-1} ... F_0`` (``H_0`` first); the last
transition ``F_{K-1}`` does not enter it.  In an extended Kalman filter ``H_k`` is the
measurement Jacobian of the update at step ``k`` and ``F_k`` the transition Jacobian of the
prediction that follows it.
"""

from __future__ import annotations

import math
import os
import warnings
import zipfile
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from .errors import AccuracyWarning, ModelFileError
from .rank import any_fragile, decide_rank, resolve_tolerance

__all__ = [
    "ObservabilityAudit",
    "audit_linearized_observability",
    "audit_from_file",
    "AUDIT_FILE_KEYS",
    "NonlinearObservability",
    "nonlinear_observability",
    "ConstrainedJacobians",
    "constrain_observability",
]

#: Keys an audit ``.npz`` file may hold (the first two are required).
AUDIT_FILE_KEYS = (
    "transition_jacobians",
    "measurement_jacobians",
    "expected_unobservable",
    "measurement_noise",
    "state_scale",
    "state_names",
)

_MAX_AUDIT_FILE_BYTES = 256 * 1024 * 1024


# =============================================================================================
# Validation helpers (entry points validate once; the internals trust their input)
# =============================================================================================

def _numeric(value, name: str) -> np.ndarray:
    if isinstance(value, (str, bytes)):
        raise ValueError(f"{name} must be a numeric array, got text {value!r}.")
    try:
        with np.errstate(all="ignore"):
            arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a numeric array of real numbers; could not convert "
                         f"{type(value).__name__} to floats.") from None
    if np.iscomplexobj(np.asarray(value)):
        raise ValueError(f"{name} holds complex numbers; give real Jacobians.")
    return arr


def _finite(arr: np.ndarray, name: str) -> None:
    if np.isfinite(arr).all():
        return
    bad = np.argwhere(~np.isfinite(arr))
    if bad.size:
        where = ", ".join(str(int(i)) for i in bad[0])
        raise ValueError(f"{name} has a non-finite entry {arr[tuple(bad[0])]!r} at index "
                         f"[{where}]; every entry must be a finite real number.")


def _validate_sequences(transition_jacobians, measurement_jacobians):
    """Return ``(F, H, K, n, p)`` as float arrays after checking shapes and values."""
    F = _numeric(transition_jacobians, "transition_jacobians")
    H = _numeric(measurement_jacobians, "measurement_jacobians")
    if F.ndim != 3:
        raise ValueError(f"transition_jacobians must be a 3-D array of shape (K, n, n), one n x n "
                         f"Jacobian per step, got shape {F.shape}; wrap a single Jacobian as "
                         "F[np.newaxis].")
    if F.shape[1] != F.shape[2]:
        raise ValueError(f"transition_jacobians must hold square n x n Jacobians, got shape "
                         f"{F.shape}.")
    K, n = F.shape[0], F.shape[1]
    if K == 0:
        raise ValueError("transition_jacobians has no steps; the audit needs at least one step.")
    if H.ndim != 3:
        raise ValueError(f"measurement_jacobians must be a 3-D array of shape (K, p, n), one "
                         f"p x n Jacobian per step, got shape {H.shape}; wrap a single Jacobian "
                         "as H[np.newaxis].")
    if H.shape[0] != K:
        raise ValueError(f"measurement_jacobians has {H.shape[0]} steps but transition_jacobians "
                         f"has {K}; give one measurement Jacobian per step.")
    if H.shape[2] != n:
        raise ValueError(f"measurement_jacobians has {H.shape[2]} columns but the transition "
                         f"Jacobians are {n} x {n}; it needs one column per state.")
    _finite(F, "transition_jacobians")
    _finite(H, "measurement_jacobians")
    return F, H, K, n, H.shape[1]


def _validate_basis(basis, n: int, name: str) -> np.ndarray:
    N = _numeric(basis, name)
    if N.ndim == 1:
        N = N.reshape(-1, 1)
    if N.ndim != 2 or N.shape[0] != n:
        raise ValueError(f"{name} must have shape (n, d) = ({n}, d), one row per state and one "
                         f"column per direction, got shape {N.shape}.")
    if N.shape[1] > n:
        raise ValueError(f"{name} has {N.shape[1]} columns but there are only {n} states.")
    _finite(N, name)
    return N


def _validate_scale(state_scale, n: int):
    if state_scale is None:
        return None
    s = _numeric(state_scale, "state_scale").reshape(-1)
    if s.shape != (n,):
        raise ValueError(f"state_scale must hold one characteristic size per state ({n}), got "
                         f"{s.size} values.")
    _finite(s, "state_scale")
    if np.any(s <= 0):
        i = int(np.argmax(s <= 0))
        raise ValueError(f"state_scale must be positive (a characteristic size per state), entry "
                         f"{i} is {s[i]!r}.")
    return s


def _whitening(measurement_noise, K: int, p: int):
    """Return whitening factors ``W`` (shape (p, p) or (K, p, p)) with ``W R W^T = I``.

    ``measurement_noise`` is a variance (scalar), variances per output (p,), a covariance
    (p, p) shared by all steps, or covariances per step (K, p, p).
    """
    if measurement_noise is None:
        return None
    R = _numeric(measurement_noise, "measurement_noise")
    _finite(R, "measurement_noise")
    if R.ndim == 0:
        if R <= 0:
            raise ValueError(f"measurement_noise is a variance and must be positive, got "
                             f"{float(R)!r}.")
        return np.eye(p) / math.sqrt(float(R))
    if R.ndim == 1:
        if R.shape != (p,):
            raise ValueError(f"measurement_noise as a vector holds one variance per measurement "
                             f"({p}), got {R.size}.")
        if np.any(R <= 0):
            raise ValueError("measurement_noise variances must be positive; pad steps with fewer "
                             "measurements with zero Jacobian rows and any positive variance.")
        return np.diag(1.0 / np.sqrt(R))
    if R.ndim == 2:
        if R.shape != (p, p):
            raise ValueError(f"measurement_noise as a matrix must be the ({p}, {p}) covariance of "
                             f"one step's measurements, got shape {R.shape}.")
        return _inverse_cholesky(R, "measurement_noise")
    if R.ndim == 3:
        if R.shape != (K, p, p):
            raise ValueError(f"measurement_noise per step must have shape (K, p, p) = ({K}, {p}, "
                             f"{p}), got {R.shape}.")
        return np.stack([_inverse_cholesky(R[k], f"measurement_noise[{k}]") for k in range(K)])
    raise ValueError(f"measurement_noise must be a scalar, a vector, a matrix or a (K, p, p) "
                     f"stack, got shape {R.shape}.")


def _inverse_cholesky(R: np.ndarray, name: str) -> np.ndarray:
    if R.shape[0] == 0:
        return np.zeros((0, 0))
    if not np.allclose(R, R.T, rtol=1e-10, atol=0.0):
        raise ValueError(f"{name} must be a symmetric covariance matrix.")
    try:
        L = np.linalg.cholesky(0.5 * (R + R.T))
    except np.linalg.LinAlgError:
        raise ValueError(f"{name} must be positive definite (a covariance with positive "
                         "variances); pad missing measurements with zero Jacobian rows and a "
                         "positive variance.") from None
    return np.linalg.inv(L)        # lower triangular; W R W^T = I with W = L^{-1}


def _orthonormal_basis(N: np.ndarray, tol: float, name: str):
    """Orthonormalize the columns of ``N`` keeping their order (Householder QR).

    Returns ``(Q, decision)``.  Column ``i`` of ``Q`` is the part of column ``i`` of ``N``
    orthogonal to the earlier columns, normalized, with the sign of the original.
    """
    n, d = N.shape
    s = np.linalg.svd(N, compute_uv=False) if d else np.zeros(0)
    decision = decide_rank(s, float(s[0]) if s.size else 0.0, tol, f"{name} columns independent")
    if decision.rank < d:
        raise ValueError(f"{name} has linearly dependent columns (numerical rank {decision.rank} "
                         f"of {d} at relative tolerance {tol:.1e}); give one independent column "
                         "per unobservable direction.")
    if d == 0:
        return np.zeros((n, 0)), decision
    Q, R = np.linalg.qr(N)
    signs = np.sign(np.diag(R))
    signs[signs == 0] = 1.0
    return Q * signs[None, :], decision


def _qr_r(M: np.ndarray) -> np.ndarray:
    """Upper-triangular factor of a Householder QR (at most ``ncols`` rows)."""
    if M.shape[0] == 0:
        return np.zeros((0, M.shape[1]))
    return np.linalg.qr(M, mode="r")


def _padded_singular_values(R: np.ndarray, n: int) -> np.ndarray:
    s = np.zeros(n)
    if R.shape[0] and n:
        v = np.linalg.svd(R, compute_uv=False)
        s[:v.size] = v
    return s


# =============================================================================================
# Audit of a linearized time-varying model
# =============================================================================================

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
        """Plain-text summary (see :func:`plantcore.audit_report.audit_text`)."""
        from .audit_report import audit_text

        return audit_text(self, source=source)

    def to_html(self, *, source=None, title=None) -> str:
        """Self-contained HTML report (see :func:`plantcore.audit_report.audit_html`)."""
        from .audit_report import audit_html

        return audit_html(self, source=source, title=title)


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


# ---------------------------------------------------------------------------------------------
# Reading an audit file
# ---------------------------------------------------------------------------------------------

def _load_npy_safely(path, display, key_label):
    if os.path.isfile(path) and zipfile.is_zipfile(path):
        raise ModelFileError(display, key_label, "is an .npz archive; give a single .npy array "
                                                 "saved with numpy.save.")
    try:
        with open(path, "rb") as fp:
            try:
                return np.lib.format.read_array(fp, allow_pickle=False)
            except ValueError as exc:
                raise ModelFileError(display, key_label, "could not be read as a numeric .npy "
                                     f"array ({' '.join(str(exc).split())}).") from None
    except FileNotFoundError:
        raise ModelFileError(display, None, "file not found.") from None
    except IsADirectoryError:
        raise ModelFileError(display, None, "is a folder, not a .npy file.") from None
    except PermissionError:
        raise ModelFileError(display, None, "cannot be read (permission denied).") from None


def _check_member_dtype(array: np.ndarray, display, key: str, *, text: bool = False):
    kind = array.dtype.kind
    if text:
        if array.ndim != 1 or (array.size and kind != "U"):
            raise ModelFileError(display, key, "must be a 1-D array of text (one name per state).")
        return [str(x) for x in array.tolist()]
    if kind not in "iuf":
        what = {"b": "booleans", "c": "complex numbers", "U": "text", "S": "bytes",
                "O": "Python objects", "V": "a structured record", "M": "dates",
                "m": "time spans"}.get(kind, f"dtype {array.dtype}")
        raise ModelFileError(display, key, f"holds {what}; give an array of real numbers.")
    out = np.asarray(array, dtype=float)
    bad = np.argwhere(~np.isfinite(out))
    if bad.size:
        where = ", ".join(str(int(i)) for i in bad[0])
        raise ModelFileError(display, key, f"has the non-finite entry {out[tuple(bad[0])]!r} at "
                                           f"index [{where}]; every entry must be finite.")
    return out


def _check_member_header(zf: zipfile.ZipFile, info: zipfile.ZipInfo, display, key: str) -> None:
    """Read only the .npy header of an archive member and refuse objects and huge shapes.

    This happens before any data is read, so a member that declares an enormous shape (or
    an object dtype, which would need unpickling) never allocates memory or runs code.
    """
    fmt = np.lib.format
    with zf.open(info) as fp:
        try:
            version = fmt.read_magic(fp)
            if version == (1, 0):
                shape, _, dtype = fmt.read_array_header_1_0(fp)
            elif version == (2, 0):
                shape, _, dtype = fmt.read_array_header_2_0(fp)
            else:
                raise ValueError(f"unsupported .npy format version {version}")
        except ValueError as exc:
            raise ModelFileError(display, key, "is not a readable .npy array "
                                               f"({' '.join(str(exc).split())}).") from None
    if dtype.hasobject:
        raise ModelFileError(display, key, "holds Python objects (a pickled object array); "
                                           "plantcore never unpickles, save numeric arrays.")
    if int(np.prod(shape, dtype=object)) * dtype.itemsize > _MAX_AUDIT_FILE_BYTES:
        raise ModelFileError(display, key, f"declares shape {tuple(shape)}, larger than the limit "
                                           f"of {_MAX_AUDIT_FILE_BYTES} bytes.")


def audit_from_file(path, *, expected_unobservable=None, tol=None) -> ObservabilityAudit:
    """Audit Jacobian sequences stored in an ``.npz`` file.

    Parameters
    ----------
    path : str or os.PathLike
        An ``.npz`` archive (``numpy.savez``) with the arrays

        ``transition_jacobians`` (K, n, n), required
        ``measurement_jacobians`` (K, p, n), required
        ``expected_unobservable`` (n, d), required unless given as an argument
        ``measurement_noise`` scalar, (p,), (p, p) or (K, p, p), optional
        ``state_scale`` (n,), optional
        ``state_names`` (n,) text array, optional

        with the meanings of :func:`audit_linearized_observability`.  Other keys are refused.
    expected_unobservable : (n, d) array_like or path to a ``.npy`` file, optional
        The expected unobservable basis; overrides the one stored in the archive.
    tol : float, optional
        Relative rank tolerance (see :func:`audit_linearized_observability`).

    Returns
    -------
    ObservabilityAudit

    Raises
    ------
    plantcore.ModelFileError
        A ``ValueError`` whose one-line message names the file, the key and the problem.

    Notes
    -----
    Arrays are read with ``allow_pickle=False``: nothing in the file is unpickled or run.

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "jacobians.npz")
    >>> F = np.repeat(np.eye(2)[None], 3, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.0]]]), 3, axis=0)
    >>> np.savez(path, transition_jacobians=F, measurement_jacobians=H,
    ...          expected_unobservable=np.ones((2, 1)))
    >>> audit_from_file(path).spurious_dimension
    0
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name, got {type(path).__name__}.")
    display = os.fsdecode(os.fspath(path))
    if not os.path.exists(display):
        raise ModelFileError(display, None, "file not found.")
    if os.path.isdir(display):
        raise ModelFileError(display, None, "is a folder, not an .npz file.")
    if not zipfile.is_zipfile(display):
        raise ModelFileError(display, None, "is not an .npz archive (a zip of .npy arrays); save "
                                            "the Jacobians with numpy.savez.")
    arrays = {}
    try:
        with zipfile.ZipFile(display) as zf:
            total = sum(info.file_size for info in zf.infolist())
            if total > _MAX_AUDIT_FILE_BYTES:
                raise ModelFileError(display, None, f"unpacks to {total} bytes, more than the "
                                                    f"limit of {_MAX_AUDIT_FILE_BYTES} bytes.")
            for info in zf.infolist():
                key = info.filename[:-4] if info.filename.endswith(".npy") else info.filename
                if key not in AUDIT_FILE_KEYS:
                    raise ModelFileError(display, key, "unknown key; an audit file holds "
                                                       f"{', '.join(AUDIT_FILE_KEYS)}.")
                if key in arrays:
                    raise ModelFileError(display, key, "appears twice in the archive.")
                _check_member_header(zf, info, display, key)
                with zf.open(info) as fp:
                    try:
                        arrays[key] = np.lib.format.read_array(fp, allow_pickle=False)
                    except ValueError as exc:
                        raise ModelFileError(display, key, "could not be read as a numeric array "
                                             f"({' '.join(str(exc).split())}).") from None
    except zipfile.BadZipFile as exc:
        raise ModelFileError(display, None, f"is a damaged .npz archive ({exc}).") from None
    for key in ("transition_jacobians", "measurement_jacobians"):
        if key not in arrays:
            raise ModelFileError(display, key, "missing; the file must hold "
                                               "transition_jacobians and measurement_jacobians.")
    values = {key: _check_member_dtype(arr, display, key, text=(key == "state_names"))
              for key, arr in arrays.items()}
    if expected_unobservable is not None:
        if isinstance(expected_unobservable, (str, os.PathLike)):
            basis_display = os.fsdecode(os.fspath(expected_unobservable))
            raw = _load_npy_safely(basis_display, basis_display, "expected basis")
            basis = _check_member_dtype(raw, basis_display, "expected basis")
            basis_where = (basis_display, "expected basis")
        else:
            basis = expected_unobservable
            basis_where = (display, "expected_unobservable")
    elif "expected_unobservable" in values:
        basis = values["expected_unobservable"]
        basis_where = (display, "expected_unobservable")
    else:
        raise ModelFileError(display, "expected_unobservable", "missing; store the expected "
                                                               "unobservable basis in the file "
                                                               "or give it separately.")
    F = values["transition_jacobians"]
    try:
        F, H, K, n, p = _validate_sequences(F, values["measurement_jacobians"])
    except ValueError as exc:
        raise ModelFileError(display, None, str(exc)) from None
    try:
        _validate_basis(basis, n, "expected_unobservable")
    except ValueError as exc:
        raise ModelFileError(basis_where[0], basis_where[1], str(exc)) from None
    try:
        return audit_linearized_observability(
            F, H, basis, measurement_noise=values.get("measurement_noise"), tol=tol,
            state_scale=values.get("state_scale"), state_names=values.get("state_names"))
    except ModelFileError:
        raise
    except ValueError as exc:
        raise ModelFileError(display, None, str(exc)) from None


# =============================================================================================
# Observability-constrained Jacobians
# =============================================================================================

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
        (default as :func:`plantcore.rank.resolve_tolerance`).

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


# =============================================================================================
# Nonlinear observability rank (symbolic)
# =============================================================================================

@dataclass(frozen=True)
class NonlinearObservability:
    """Observability rank of a symbolic nonlinear model at a point.

    Attributes
    ----------
    states : tuple of sympy.Symbol
        The state symbols, in order.
    functions : sympy.Matrix
        The stacked observation functions: ``h``, then ``L_f h, L_f^2 h, ...`` (continuous
        time) or ``h(f(x)), h(f(f(x))), ...`` (discrete time), ``p (order + 1)`` rows.
    jacobian : sympy.Matrix
        Their Jacobian with respect to the states, ``(p (order + 1), n)``, symbolic.
    order : int
        The highest Lie derivative (or number of compositions) used.
    discrete : bool
        Whether ``f`` is a discrete-time map.
    point : dict
        Symbol -> value: where the rank was evaluated (states, inputs and parameters).
    generic_point : bool
        True when no point was given and a pseudo-random one was drawn (seeded).
    exact : bool
        True when the Jacobian at the point is rational and its rank was decided exactly
        (sympy, rational arithmetic); False for the numeric SVD path.
    rank : int
        Rank of the Jacobian at the point.
    n : int
        Number of states.
    unobservable_dimension : int
        ``n - rank``.
    unobservable_directions : (n, n - rank) ndarray
        Orthonormal basis of the null space of the Jacobian at the point: the directions in
        which the stacked observation functions do not change to first order.
    exact_directions : sympy.Matrix or None
        In the exact path, a rational basis of the same null space (``n x (n - rank)``).
    singular_values : (n,) ndarray
        Singular values of the Jacobian at the point (floating point), zero-padded to ``n``;
        informative in the exact path too.
    decisions : tuple of RankDecision
        The numeric rank decision (empty in the exact path, which needs no tolerance).
    fragile : bool
        True when the numeric decision lies within a factor 100 of the tolerance.
    notes : tuple of str
        Plain sentences on how to read the result.
    """

    states: tuple
    functions: object = field(repr=False)
    jacobian: object = field(repr=False)
    order: int
    discrete: bool
    point: dict = field(repr=False)
    generic_point: bool
    exact: bool
    rank: int
    n: int
    unobservable_dimension: int
    unobservable_directions: np.ndarray = field(repr=False)
    exact_directions: object = field(repr=False)
    singular_values: np.ndarray = field(repr=False)
    decisions: tuple = field(repr=False)
    fragile: bool
    notes: tuple = field(repr=False)


def _sympy_column(value, name: str):
    import sympy

    if isinstance(value, sympy.MatrixBase):
        items = list(value)
    elif isinstance(value, (list, tuple)):
        items = []
        for item in value:
            nested = isinstance(item, (sympy.MatrixBase, list, tuple))
            items.extend(list(item) if nested else [item])
    else:
        items = [value]
    out = []
    for i, item in enumerate(items):
        try:
            out.append(sympy.sympify(item, strict=True))
        except (sympy.SympifyError, TypeError, ValueError):
            raise ValueError(f"{name}[{i}] is not a sympy expression (got {item!r}); build the "
                             "model from sympy symbols.") from None
    return sympy.Matrix(len(out), 1, out)


def _symbols(value, name: str):
    import sympy

    if value is None:
        return ()
    if isinstance(value, sympy.Symbol):
        value = [value]
    items = tuple(value)
    for item in items:
        if not isinstance(item, sympy.Symbol):
            raise ValueError(f"{name} must be sympy Symbols, got {item!r} "
                             f"({type(item).__name__}).")
    if len(set(items)) != len(items):
        raise ValueError(f"{name} lists a symbol twice.")
    return items


def _is_exact_number(value) -> bool:
    import fractions

    import sympy

    if isinstance(value, bool):
        return False
    if isinstance(value, (int, fractions.Fraction)):
        return True
    return isinstance(value, sympy.Rational)


def _resolve_point(point, needed, states, inputs, seed=20240917):
    import fractions

    import sympy

    by_name = {str(s): s for s in needed}
    values = {}
    generic = point is None
    if generic:
        rng = np.random.default_rng(seed)
        for s in sorted(needed, key=str):
            values[s] = float(rng.uniform(0.5, 1.5))
        return values, True
    if isinstance(point, dict):
        for key, val in point.items():
            sym = key if isinstance(key, sympy.Symbol) else by_name.get(str(key))
            if sym is None or sym not in needed:
                known = ", ".join(sorted(by_name)) or "none"
                raise ValueError(f"point gives a value for {key!s}, which is not a state, input "
                                 f"or parameter of the model (known: {known}).")
            values[sym] = val
    else:
        seq = list(point)
        order = list(states) + list(inputs)
        if len(seq) not in (len(states), len(order)):
            raise ValueError(f"point as a sequence needs {len(states)} state values (or "
                             f"{len(order)} with the inputs), got {len(seq)}; use a dict to "
                             "give parameters.")
        values = dict(zip(order, seq))
    missing = [str(s) for s in needed if s not in values]
    if missing:
        raise ValueError(f"point has no value for {', '.join(sorted(missing))}; give every state, "
                         "input and parameter that appears in f and h.")
    clean = {}
    for sym, val in values.items():
        if _is_exact_number(val):
            clean[sym] = sympy.Rational(val.numerator, val.denominator) if isinstance(
                val, fractions.Fraction) else sympy.Rational(val)
            continue
        try:
            num = float(val)
        except (TypeError, ValueError):
            raise ValueError(f"point value for {sym} must be a real number, got {val!r}.") from None
        if not math.isfinite(num):
            raise ValueError(f"point value for {sym} is {num!r}; give a finite number.")
        clean[sym] = num
    return clean, False


def nonlinear_observability(f, h, states, *, inputs=None, point=None, order=None,
                            discrete=False, tol=None) -> NonlinearObservability:
    """Observability rank of a nonlinear model from stacked Lie derivatives or compositions.

    Parameters
    ----------
    f : sequence of sympy expressions, length n
        Continuous time: the vector field, ``dx/dt = f(x, u)``.  Discrete time
        (``discrete=True``): the map ``x[k+1] = f(x[k], u)``.
    h : sympy expression or sequence of them, length p
        The measurement ``y = h(x, u)``.
    states : sequence of sympy.Symbol, length n
        The state symbols, in the order of ``f``.
    inputs : sequence of sympy.Symbol, optional
        Input symbols.  Inputs are held constant at their values in ``point`` (see Notes).
        Any other free symbol of ``f`` and ``h`` is a parameter and needs a value in
        ``point``.
    point : dict or sequence, optional
        Where to evaluate the rank: a dict mapping symbols (or their names) to values, or a
        sequence of the state values (followed by the input values).  Integers, fractions and
        sympy rationals keep the evaluation exact when every Jacobian entry becomes rational.
        Default: a generic point drawn from a seeded generator (values in [0.5, 1.5]); the
        rank there equals the generic rank with probability one.
    order : int, optional
        Highest Lie derivative (or number of compositions) to stack, all of them computed.
        Default: stop as soon as the rank at the point stops growing (see Notes), and at
        ``n - 1`` at the latest.
    discrete : bool, optional
        Use compositions ``h(f(x))``, ``h(f(f(x)))``, ... instead of Lie derivatives.
    tol : float, optional
        Relative rank tolerance for the numeric path (default as
        :func:`plantcore.rank.resolve_tolerance`), relative to the largest singular value of
        the Jacobian at the point.

    Returns
    -------
    NonlinearObservability

    Raises
    ------
    ValueError
        Non-sympy input, sizes that do not fit, a point missing values, a Jacobian that is
        not finite at the point.

    Notes
    -----
    Hermann and Krener [1]_ call a system locally weakly observable at ``x0`` when the
    observation space (the span of ``h`` and its repeated Lie derivatives along the
    dynamics) has differentials of rank ``n`` at ``x0`` (the observability rank condition).
    Its null space there is the set of directions in which no stacked observation function
    changes to first order: the locally unobservable directions.  For discrete-time maps the
    compositions ``h``, ``h o f``, ``h o f o f``, ... play the same role.  Lie derivatives are
    ``L_f phi = (d phi / dx) f``, formed symbolically (sympy) without simplification.

    **Order.**  The codistributions ``Omega_k`` spanned by the differentials up to order
    ``k`` grow with ``k``; once ``Omega_{k+1} = Omega_k`` near a point, ``Omega_k`` is
    invariant under the Lie derivative along ``f`` and no higher order adds anything (the
    observability codistribution algorithm; A. Isidori, *Nonlinear Control Systems*, 3rd ed.,
    Springer, 1995, ch. 1, from memory).  At a regular point (where these ranks are locally
    constant, which holds at generic points) equal ranks at the point mean equal
    codistributions, so the default stops there: this also keeps the symbolic expressions,
    which swell quickly with the order, small.  At a singular point give ``order``
    explicitly.  ``n - 1`` is the last order needed by the same argument.

    **Rank at the point.**  When every entry of the Jacobian at the point is rational, its
    rank and null space are computed exactly in rational arithmetic (sympy).  Otherwise the
    Jacobian is evaluated in floating point and the rank is decided from its singular values,
    relative to the largest, with :func:`plantcore.rank.decide_rank`.  Rows are deliberately
    not normalized: a derivative that vanishes symbolically but evaluates to rounding noise
    (terms that cancel) would otherwise count as a direction, and a weak coupling (say
    ``1e-9`` relative) would hide instead of being flagged as fragile.  Derivatives of high
    order carry powers of the inputs and of the state's size; choose units in which states
    and inputs are of order one when they are not.

    **Inputs.**  Inputs are held constant at their values in the point, so the rank is that
    of the observation space generated with that constant input.  A system that needs
    switching inputs to become observable shows a lower rank here than its full observation
    space; evaluate at several input values to explore this.

    References
    ----------
    .. [1] R. Hermann and A. J. Krener, "Nonlinear controllability and observability", IEEE
       Transactions on Automatic Control 22(5), 728-740, 1977.  doi:10.1109/TAC.1977.1101601

    Examples
    --------
    A cart measured by its distance to a wall it does not know the position of: only the
    difference of the two positions is seen.

    >>> import sympy
    >>> p, v, w = sympy.symbols("p v w")
    >>> result = nonlinear_observability([v, 0, 0], [w - p], [p, v, w], point=[1, 2, 5])
    >>> result.exact, result.rank, result.unobservable_dimension
    (True, 2, 1)
    >>> list(result.exact_directions)
    [1, 0, 1]
    """
    import sympy

    x = _symbols(states, "states")
    u = _symbols(inputs, "inputs")
    if set(x) & set(u):
        raise ValueError("a symbol is listed both as a state and as an input.")
    n = len(x)
    fv = _sympy_column(f, "f")
    hv = _sympy_column(h, "h")
    if fv.shape[0] != n:
        raise ValueError(f"f has {fv.shape[0]} entries but there are {n} states; give one entry "
                         "per state.")
    automatic = order is None
    if not automatic and (isinstance(order, bool) or not isinstance(order, (int, np.integer))
                          or order < 0):
        raise ValueError(f"order must be a non-negative integer, got {order!r}.")
    max_order = max(n - 1, 0) if automatic else int(order)

    free = set(fv.free_symbols) | set(hv.free_symbols)
    needed = set(x) | set(u) | free
    values, generic = _resolve_point(point, needed, x, u)
    syms = sorted(needed, key=str)
    numbers = [np.float64(values[s]) for s in syms]   # numpy scalars: 1/0 gives inf, not an error
    tol_rel = resolve_tolerance(tol, n)
    notes = []
    if generic:
        notes.append("No point given: the rank was evaluated at a pseudo-random generic point "
                     "(seeded); it equals the generic rank with probability one.")

    exact = n > 0 and all(isinstance(v, sympy.Rational) for v in values.values())
    X = sympy.Matrix(x)
    blocks, jacobians, exact_blocks, numeric_blocks = [], [], [], []
    decisions = []
    previous_rank = -1
    rank = 0
    block = hv
    k = 0
    while True:
        J = block.jacobian(X) if n else sympy.zeros(block.shape[0], 0)
        blocks.append(block)
        jacobians.append(J)
        if n and J.shape[0]:
            fun = sympy.lambdify(syms, J, modules="numpy", cse=True)
            with np.errstate(all="ignore"):
                try:
                    Jn = np.array(fun(*numbers), dtype=float).reshape(J.shape)
                except (ArithmeticError, ValueError, TypeError):
                    Jn = np.full(J.shape, np.nan)
        else:
            Jn = np.zeros(J.shape)
        numeric_blocks.append(Jn)
        if exact:
            Je = J.xreplace(values)
            if all(entry.is_Rational for entry in Je):
                exact_blocks.append(Je)
            else:
                exact = False
        if not exact and not np.isfinite(Jn).all():
            i, j = np.argwhere(~np.isfinite(Jn))[0]
            raise ValueError(f"the observability Jacobian is not finite (or not real) at the point "
                             f"(order {k}, row {i}, state {x[j]}); choose a point where f and h "
                             "are smooth.")
        if exact:
            rank = int(sympy.Matrix.vstack(*exact_blocks).rank())
        elif n:
            stacked = np.vstack(numeric_blocks)
            sv = np.zeros(n)
            if stacked.shape[0]:
                values_k = np.linalg.svd(stacked, compute_uv=False)
                sv[:values_k.size] = values_k        # zero-padded: n values examined
            decision = decide_rank(sv, float(sv[0]) if sv.size else 0.0, tol_rel,
                                   f"observation space through order {k}")
            decisions.append(decision)
            rank = decision.rank
        if k >= max_order or (automatic and (rank == n or rank == previous_rank)):
            break
        previous_rank = rank
        block = block.xreplace(dict(zip(x, fv))) if discrete else J * fv
        k += 1
    if automatic and k < max(n - 1, 0) and rank < n:
        notes.append(f"Stopped at order {k}: the rank did not grow from order {k - 1}, so the "
                     "observation codistribution has stabilized (valid at a regular point; give "
                     "order= explicitly to go further).")

    functions = sympy.Matrix.vstack(*blocks)
    jacobian = sympy.Matrix.vstack(*jacobians)
    stacked = np.vstack(numeric_blocks) if numeric_blocks else np.zeros((0, n))
    sv = np.zeros(n)
    if stacked.shape[0] and n and np.isfinite(stacked).all():
        _, values_all, Vt = np.linalg.svd(stacked, full_matrices=True)
        sv[:values_all.size] = values_all
    else:
        Vt = np.eye(n)
    if exact:
        basis = sympy.Matrix.vstack(*exact_blocks).nullspace()
        exact_dirs = sympy.Matrix.hstack(*basis) if basis else sympy.zeros(n, 0)
        directions = np.array(exact_dirs.tolist(), dtype=float).reshape(n, n - rank)
        if directions.shape[1]:
            directions = np.linalg.qr(directions)[0]
        decisions = []
    else:
        exact_dirs = None
        directions = Vt[rank:].T.copy() if n else np.zeros((0, 0))
    decisions = tuple(decisions)
    return NonlinearObservability(
        states=x, functions=functions, jacobian=jacobian, order=k, discrete=bool(discrete),
        point=values, generic_point=generic, exact=bool(exact), rank=rank, n=n,
        unobservable_dimension=n - rank, unobservable_directions=directions,
        exact_directions=exact_dirs, singular_values=sv, decisions=decisions,
        fragile=any_fragile(decisions), notes=tuple(notes))
