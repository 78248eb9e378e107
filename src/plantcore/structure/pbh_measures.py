r"""Smallest singular values of the PBH matrices, one point at a time, on one Schur form.

For a point ``lambda`` of the complex plane,

.. math::

    \sigma_{\min}([A - \lambda I,\; B]) \quad\text{and}\quad
    \sigma_{\min}([A - \lambda I;\; C])

are needed at every eigenvalue by the mode table (:mod:`plantcore.structure.modes`) and at
the starting points of the distance searches (:mod:`plantcore.structure.distance`), and
``sigma_min(A - mu I)`` at boundary points by the test that moves rounding-perturbed
boundary eigenvalues onto the boundary.  A dense SVD per point costs ``O(n^3)`` and a batch
of them ``O(n^2)`` memory per point; here each point costs ``O(n^2 m)`` time and ``O(n^2)``
memory after one Schur form ``A = Q T Q^H`` shared by all points:

1. ``[T - lambda I, Q^H B]`` has the singular values of ``[A - lambda I, B]`` (``Q`` is
   unitary), and one triangular-pentagonal QR (LAPACK ``?tpqrt``) turns it into an
   ``n x n`` upper triangle ``R`` with the same singular values, in ``O(n^2 m)``.  The
   Schur form, its lazily computed complex form and the arrangement of the triangle are
   those of the modal certificate (:class:`plantcore.structure.certificate._Schur`).
2. ``1 / sigma_min(R)`` is the largest singular value of ``R^{-1}``, found by Golub-Kahan
   (Lanczos) bidiagonalization of ``R^{-1}`` with full reorthogonalization, two triangular
   solves per step (G. H. Golub and W. Kahan, "Calculating the singular values and
   pseudo-inverse of a matrix", J. SIAM Numer. Anal. Ser. B 2(2), 205-224, 1965; the
   restart-free form with full reorthogonalization as in G. H. Golub and C. F. Van Loan,
   *Matrix Computations*, 4th ed., 2013, chapter 10).  Lanczos converges to the extreme
   singular values much faster than plain inverse iteration when the smallest singular
   values of ``R`` are close, as they are in lightly damped structural models.  The
   iteration stops when the residual of the top Ritz triplet, ``beta_k |u_k|``, is below
   ``1e-8`` of the Ritz value, or after :data:`MAX_STEPS` steps.
3. The value returned is ``||R z||`` for the unit Ritz vector ``z``, evaluated with the
   true triangle: it is attained, so it is an **upper bound** on ``sigma_min``
   (Courant-Fischer), and tight at convergence.

Exactly singular triangles (an exact integrator at ``lambda = 0``) have zero pivots; those
are replaced by ``1e-3 eps ||R||`` for the solves only, as in the modal certificate, and the
value is still measured on the true triangle.

The Lanczos steps are many BLAS-2 calls on one triangle: BLAS threads are limited to one
around the loop over points (threadpoolctl), which is faster than two threads on the
memory-bound triangular solves and leaves the other core to the caller.
"""

from __future__ import annotations

import contextlib
import math

import numpy as np
import scipy.linalg
from scipy.linalg import blas, lapack
from threadpoolctl import ThreadpoolController

from plantcore.structure.certificate import _Schur

__all__ = ["MAX_STEPS", "ONE_THREAD_SIZE", "PBHMeasures", "one_blas_thread", "schur_from_form",
           "threads_for_size"]

_EPS = np.finfo(float).eps

MAX_STEPS = 80

"""Most Lanczos steps per point (each step: two triangular solves, ``O(n^2)``)."""

_RESIDUAL = 1e-8    # stop when beta_k |u_k| <= _RESIDUAL * theta
_SEED = 20240917      # fixed start vectors: the same answer on every run


_CONTROLLER: list = []


def one_blas_thread():
    """A context that runs BLAS and LAPACK on one thread, around loops of small (level-2)
    operations, which more threads only slow down.  One threadpoolctl controller is made on
    first use and kept: entering its limit costs microseconds, where a fresh
    ``threadpool_limits`` inspects every loaded library (milliseconds) each time."""
    if not _CONTROLLER:
        _CONTROLLER.append(ThreadpoolController())
    return _CONTROLLER[0].limit(limits=1)


ONE_THREAD_SIZE = 200

"""Up to this many states a whole mode table or analysis runs on one BLAS thread: its
factorizations are too small for a second thread to pay for its start, and the loops of
small operations around them only slow down with it (issue 17, item 6)."""


def threads_for_size(n: int):
    """:func:`one_blas_thread` for a model of at most :data:`ONE_THREAD_SIZE` states, else
    a context that changes nothing (the large factorizations use every BLAS thread)."""
    return one_blas_thread() if n <= ONE_THREAD_SIZE else contextlib.nullcontext()


class _GivenSchur(_Schur):
    """A :class:`plantcore.structure.certificate._Schur` around a form already computed."""

    def __init__(self, T, Q):
        self.T, self.Q = T, Q
        self._complex = None
        self._pairs = {}


def schur_from_form(T, Q) -> _Schur:
    """The Schur-form object of the measures for ``A = Q T Q^T`` already computed (``T``
    real quasi-triangular, ``Q`` orthogonal), so that one factorization is shared by the
    mode table, the boundary test, the distance starts and the Gramians."""
    return _GivenSchur(T, Q)


class PBHMeasures:
    """``sigma_min`` of ``[A - lambda I, X]`` (side ``"c"``) or ``[A - lambda I; X]``
    (side ``"o"``) at any ``lambda``, from one Schur form of ``A`` computed on first use.

    Parameters
    ----------
    A : (n, n) ndarray
        Real state matrix (not modified).
    schur : _Schur, optional
        A real Schur form of ``A`` already computed (see :func:`schur_from_form`); the
        measures then cost no further ``O(n^3)`` work beyond its complex form when needed.
    """

    def __init__(self, A, schur=None):
        self._A = A
        self._schur = schur
        # The Schur form caches its arrangement of X by id(X): every X handed in is kept
        # alive here, so that no later array can take over its id while the cache lives.
        self._held: list = []

    @property
    def schur(self) -> _Schur:
        if self._schur is None:
            self._schur = _Schur(self._A)
        return self._schur

    def smallest(self, X, lams, side: str) -> np.ndarray:
        """``sigma_min`` at each of ``lams`` (an upper bound, tight at convergence; see the
        module notes).  ``X`` is ``B`` (n x m) for side ``"c"`` and ``C`` (p x n) for side
        ``"o"``; an ``(n, 0)`` array gives ``sigma_min(A - lambda I)``."""
        lams = [complex(lam) for lam in lams]
        out = np.empty(len(lams))
        if not lams:
            return out
        if not any(X is held for held in self._held):
            self._held.append(X)
        with one_blas_thread():
            for i, lam in enumerate(lams):
                out[i] = self._one(X, lam, side)
        return out

    def smallest_with_vector(self, X, lam: complex, side: str, *, start=None,
                             rtol: float = _RESIDUAL):
        """``(sigma, vector, state)`` at one point: ``sigma`` as :meth:`smallest` (attained,
        so an upper bound on ``sigma_min`` at any ``rtol``), ``vector`` the unit vector
        attaining it in the model's coordinates (side ``"c"``: ``u`` with
        ``||u^H [A - lambda I, X]|| = sigma``; side ``"o"``: ``v`` with
        ``||[A - lambda I; X] v|| = sigma``), and ``state``, to be handed back as ``start``
        at a nearby point (the iteration then starts from the previous vector)."""
        if not any(X is held for held in self._held):
            self._held.append(X)
        lam = complex(lam)
        with one_blas_thread():
            value, z, real = self._one(X, lam, side, start=start, rtol=rtol, vector=True)
        schur = self.schur
        Q = schur.Q if real else schur.complex[1]
        vector = Q @ z[::-1] if side == "c" else Q @ np.conj(z)
        return value, vector, (real, z)

    def _one(self, X, lam: complex, side: str, *, start=None, rtol: float = _RESIDUAL,
             vector: bool = False):
        schur = self.schur
        real = lam.imag == 0.0 and not np.any(np.diag(schur.T, -1))
        if start is not None and start[0] != real:
            start = None
        T, bottom = schur.pair(X, side, real)
        n = T.shape[0]
        shift = lam.real if real else np.conj(lam)
        if bottom.shape[0] == 0:
            # sigma_min(A - lam I) alone: the shift is written into the cached triangle's
            # diagonal in place and the saved diagonal put back, so no n x n copy is made
            index = np.diag_indices(n)
            saved = T[index].copy()
            try:
                T[index] = saved - shift
                value, z = _triangle_smallest(T, None if start is None else start[1], rtol)
            finally:
                T[index] = saved
            return (value, z, real) if vector else value
        top = np.array(T, order="F")
        top[np.diag_indices(n)] -= shift
        cplx = np.iscomplexobj(top)
        tpqrt = lapack.ztpqrt if cplx else lapack.dtpqrt
        R, _, _, info = tpqrt(0, max(1, min(32, n)), top, np.array(bottom, order="F"),
                              overwrite_a=1, overwrite_b=1)
        if info != 0:   # pragma: no cover - LAPACK argument error
            raise np.linalg.LinAlgError(f"?tpqrt failed (info={info})")
        value, z = _triangle_smallest(R, None if start is None else start[1], rtol)
        return (value, z, real) if vector else value


def _top_left_singular(d, e):
    """Largest singular value and left singular vector of the upper bidiagonal matrix with
    diagonal ``d`` and superdiagonal ``e``: the top eigenpair of the tridiagonal ``B B^T``
    (LAPACK ``stebz`` and ``stein`` through scipy, or numpy's dense symmetric solver for
    the first steps, whose call overhead is smaller), instead of a dense SVD per Lanczos
    step.  Squaring costs nothing in accuracy at the top of the spectrum."""
    k = d.size
    if k == 1:
        return float(abs(d[0])), np.ones(1)
    diag = d * d
    diag[:-1] += e * e
    if k <= _DENSE_TOP:
        w, v = np.linalg.eigh(np.diag(diag) + np.diag(d[1:] * e, 1) + np.diag(d[1:] * e, -1))
        return math.sqrt(max(float(w[-1]), 0.0)), v[:, -1]
    w, v = scipy.linalg.eigh_tridiagonal(diag, d[1:] * e, select="i",
                                         select_range=(k - 1, k - 1))
    return math.sqrt(max(float(w[0]), 0.0)), v[:, 0]


_DENSE_TOP = 24     # up to this many steps a dense symmetric eigensolver has less overhead


def _triangle_smallest(R, start=None, rtol: float = _RESIDUAL):
    """Smallest singular value of the upper triangle ``R`` (overwritten on zero pivots), by
    Golub-Kahan bidiagonalization of ``R^{-1}`` (module notes, steps 2 and 3), and the unit
    vector ``z`` attaining it (``||R z||``).  ``start``: the first Lanczos vector (a
    previous ``z``: the right singular vector of ``R^{-H}``'s top triplet is then close)."""
    n = R.shape[0]
    top_entry = float(np.abs(R).max()) if R.size else 0.0
    if math.isfinite(top_entry) and top_entry > 0 and not 2.0**-400 < top_entry < 2.0**400:
        # far from 1 in size, the norms below would overflow or underflow: an exact
        # power-of-two scaling scales the singular values by the same power
        shift = math.frexp(top_entry)[1]
        scaled = (np.ldexp(R.real, -shift) + 1j * np.ldexp(R.imag, -shift)
                  if np.iscomplexobj(R) else np.ldexp(R, -shift))
        value, z = _triangle_smallest(np.asfortranarray(scaled), start, rtol)
        return math.ldexp(value, shift), z
    cplx = np.iscomplexobj(R)
    trsv = blas.ztrsv if cplx else blas.dtrsv
    trmv = blas.ztrmv if cplx else blas.dtrmv
    conj_trans = 2 if cplx else 1
    d = R.diagonal().copy()
    big = float(np.abs(R[0, :]).max() + np.abs(d).max()) + 1e-300
    floor = 1e-3 * _EPS * big              # keeps an exactly singular triangle solvable
    idx = np.nonzero(np.abs(d) < floor)[0]
    R[idx, idx] = floor
    steps = min(n, MAX_STEPS)
    dtype = R.dtype
    P = np.empty((n, steps + 1), dtype=dtype)
    Qk = np.empty((n, steps), dtype=dtype)
    alpha = np.zeros(steps)
    beta = np.zeros(steps)
    if start is not None and np.linalg.norm(start) > 0:
        # R^{-1} p_0 = q_0 ~ z when p_0 ~ R z / ||R z||
        p = trmv(R, np.asarray(start, dtype=dtype))
    else:
        rng = np.random.default_rng(_SEED)
        p = rng.standard_normal(n)
        if cplx:
            p = p + 1j * rng.standard_normal(n)
    P[:, 0] = p / np.linalg.norm(p)
    u_top = np.ones(1)
    used = 0
    with np.errstate(over="ignore", invalid="ignore"):
        for j in range(steps):
            q = trsv(R, P[:, j])                            # R^{-1} p_j
            if j:
                q -= beta[j - 1] * Qk[:, j - 1]
                for _ in range(2):                          # full reorthogonalization
                    q -= Qk[:, :j] @ (Qk[:, :j].T @ q.conj()).conj()
            alpha[j] = np.linalg.norm(q)
            if not np.isfinite(alpha[j]) or alpha[j] == 0.0:
                break
            Qk[:, j] = q / alpha[j]
            p = trsv(R, Qk[:, j], trans=conj_trans)         # R^{-H} q_j
            p -= alpha[j] * P[:, j]
            for _ in range(2):
                p -= P[:, :j + 1] @ (P[:, :j + 1].T @ p.conj()).conj()
            beta[j] = np.linalg.norm(p)
            used = j + 1
            top, u_top = _top_left_singular(alpha[:used], beta[:used - 1])
            if not np.isfinite(beta[j]) or beta[j] * abs(u_top[-1]) <= rtol * top:
                break
            P[:, j + 1] = p / beta[j]
    if used == 0:
        # R^{-1} overflows: singular to working precision
        return float(floor), P[:, 0]
    z = Qk[:, :used] @ u_top
    z /= np.linalg.norm(z)
    Rz = trmv(R, z)
    if idx.size:                            # back to the true triangle for the value
        Rz[idx] -= (floor - d[idx]) * z[idx]
    return float(np.linalg.norm(Rz)), z
