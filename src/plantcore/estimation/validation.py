"""Shared checks and small factorizations of the estimator audit tools.

Jacobian sequences, bases and scalings are validated once here, at the entry points of
:mod:`~plantcore.estimation.audit`, :mod:`~plantcore.estimation.constrained` and
:mod:`~plantcore.estimation.jacobian_files`, with messages that name the argument and the
expected shape.
"""

from __future__ import annotations

import math

import numpy as np

from plantcore.core.rank import decide_rank


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
