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

``sigma_min(A - mu I)`` alone (an empty ``X``, the boundary test) at many points of a large
model runs the points in lock step: every triangle is the one cached triangle with a shifted
diagonal, so each half step of all the runs together is one blocked multi-shift solve
(:mod:`plantcore.structure.multi_shift`, level-3 products over all points in place of one
level-2 solve per point, each reading the whole triangle), and each run keeps its own
recurrence, start vector and stopping rule and leaves when that rule holds: the values agree
with the one-point iteration to rounding level.  Points whose triangle needs the pivot floor
or the power-of-two scaling, small models and few points take the one-point path.

The Lanczos steps are many BLAS-2 calls on one triangle: BLAS threads are limited to one
around the loop over points (threadpoolctl), which is faster than two threads on the
memory-bound triangular solves and leaves the other core to the caller; the lock step's
products too are faster on one thread than on two on the shared machine (n = 1,412, 706
points: 4.3 s against 5.9-6.8 s).

Cost of one margin (issue 17).  With a non-empty ``X`` each point costs one copy of the
triangle, one ``?tpqrt`` and a few Lanczos steps; at n = 1,000 (random stable model, three
inputs and outputs, one thread) about 8 ms for ``?tpqrt``, 1.5 ms for the copy and 5 ms
for the 7 steps' solves.  Kept: the points of one call share one work triangle, of which
only the upper trapezoid of each slab of columns is copied; the scaling test uses bounds on
``||R||_F`` instead of a pass over the array; the start vector is drawn once; the block of
``?tpqrt`` is :data:`TPQRT_BLOCK`; the mode table stops at :data:`MARGIN_RESIDUAL`.
Evaluated and not kept:

* *Start vectors from the eigenvectors* (the null vector of the shifted triangle, one
  solve): 8.30 against 8.44 steps per margin (100 points, n = 1,000): the minimizing
  vector of a well controllable mode is not near its eigenvector; and on a nearly normal
  model a start orthogonal to the minimizing vector could let the iteration stop at the
  second singular value.
* *Only the part of the triangle at the eigenvalue's Schur position.*  Split at that
  position, ``R`` is block upper triangular, so ``sigma_min(R)`` is at most that of either
  diagonal block, but not equal to it: on a random model (n = 200, three outputs) the
  leading block's value was 1.4 to 35 times the whole one.
* *Real arithmetic for real eigenvalues of a form with complex pairs* (a rotation pass per
  point to remove the 2 x 2 blocks, then ``dtpqrt``, about a third of ``ztpqrt``): a random
  model has about ``sqrt(2 n / pi)`` real eigenvalues, some 2.5 % of the margins at
  n = 1,000, and the rotation pass costs about as much as the copy.
* *Several points at once* (a multi-shift ``?tpqrt``): every point's ``R`` differs
  everywhere and must be written, so only the copy would be shared; two Python threads
  over points were no faster than one on the shared two-core machine.
"""

from __future__ import annotations

import contextlib
import functools
import math

import numpy as np
import scipy.linalg
from scipy.linalg import blas, lapack
from threadpoolctl import ThreadpoolController

from plantcore.structure.certificate import _Schur
from plantcore.structure.multi_shift import solve_shifted

__all__ = ["MARGIN_RESIDUAL", "MAX_STEPS", "MULTI_SHIFT_POINTS", "MULTI_SHIFT_SIZE", "ONE_THREAD_SIZE",
           "PBHMeasures", "one_blas_thread", "schur_from_form", "state_count", "threads_by_size",
           "threads_for_size"]

_EPS = np.finfo(float).eps

MAX_STEPS = 80

"""Most Lanczos steps per point (each step: two triangular solves, ``O(n^2)``)."""

_RESIDUAL = 1e-8    # stop when beta_k |u_k| <= _RESIDUAL * theta

MARGIN_RESIDUAL = 1e-6

"""Relative Ritz residual at which the mode table's margins stop (issue 17).

At a relative residual ``rho`` of the top Ritz triplet of ``R^{-1}`` (``theta``, ``z``),
``R^{-1}`` has a singular value within ``rho theta`` of ``theta``, and the attained value
``||R z||`` stays an upper bound on ``sigma_min(R)``.  Its excess over ``sigma_min`` is of
order ``rho^2 / g`` for a relative gap ``g`` to the next singular value of ``R`` and at
most about ``g`` itself (a near tie: either value is then as good), so at most about
``rho`` in all: stopping at ``1e-6`` instead of ``1e-8`` changes a margin by at most about
``1e-6`` relative.  Measured against ``1e-8`` on 100 eigenvalues of a random stable model
and of the damped beam (n = 1,000, three inputs and outputs or two): at most ``5e-13``
relative, 7.2 instead of 8.4 steps per margin on the random model (1e-5: 6.6 steps and
5e-11; 1e-4: 5.8 steps and 5e-9; 1e-3: 5.1 steps and 1e-3 on the beam, too coarse)."""
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


ONE_THREAD_SIZE = 800

"""Up to this many states a whole call (mode table, analysis, norms, Gramians, Hankel
singular values, certificate, report) runs on one BLAS thread: its factorizations are too
small for a second thread to pay for its start, and the loops of small operations around
them only slow down with it (issue 17, item 6).  Measured on the 2-core machine, quiet,
2026-12-05 (``python benchmarks/bench_real.py --sizes 400 700 --beams 700 --ports 3
--no-unstable --repeats 1 --threads 1 2``, and ``--sizes 1000`` with the 348-state beam):
with two threads every call *and* every reference routine was slower at n = 348-700 (``peak_gain`` on the 700-state beam 1.28 s on
one thread, 9.43 s on two; ``ab13dd`` 4.03 s and 12.4 s; ``eig`` 0.21 s and 0.74 s), while at
n = 1,000 ``peak_gain`` (3.55 s, 2.59 s) and ``eig`` (0.64 s, 0.49 s) gained from the second
thread.  Was 200."""


def threads_for_size(n: int):
    """:func:`one_blas_thread` for a model of at most :data:`ONE_THREAD_SIZE` states, else
    a context that changes nothing (the large factorizations use every BLAS thread)."""
    return one_blas_thread() if n <= ONE_THREAD_SIZE else contextlib.nullcontext()


def state_count(model) -> int:
    """The number of states of a model argument as the public calls accept it (a model
    object with ``A``, or a tuple ``(A, B, C[, D])``), read without converting it; 0 when it
    cannot be read (the call itself then reports the problem)."""
    A = getattr(model, "A", None)
    if A is None and isinstance(model, (tuple, list)) and model:
        A = model[0]
    try:
        shape = np.shape(A)
    except Exception:                      # an object numpy cannot read: the call says why
        return 0
    return int(shape[0]) if len(shape) == 2 else 0


def threads_by_size(models: int = 1):
    """Decorator for a public call whose first ``models`` positional arguments are models:
    the call runs under :func:`threads_for_size` of the largest of their state counts, so
    no call is slower with the default BLAS thread count than with one thread on models up
    to :data:`ONE_THREAD_SIZE` states (issue 17, item 6)."""
    def decorate(function):
        @functools.wraps(function)
        def call(*args, **kwargs):
            n = max((state_count(m) for m in args[:models]), default=0)
            with threads_for_size(n):
                return function(*args, **kwargs)
        return call
    return decorate


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
        self._norms: dict = {}      # id of a pair triangle -> (triangle, Frobenius norm)

    @property
    def schur(self) -> _Schur:
        if self._schur is None:
            self._schur = _Schur(self._A)
        return self._schur

    def smallest(self, X, lams, side: str, *, rtol: float = _RESIDUAL) -> np.ndarray:
        """``sigma_min`` at each of ``lams`` (an upper bound, tight at convergence; see the
        module notes).  ``X`` is ``B`` (n x m) for side ``"c"`` and ``C`` (p x n) for side
        ``"o"``; an ``(n, 0)`` array gives ``sigma_min(A - lambda I)``.  ``rtol``: the
        relative Ritz residual at which an iteration stops with a non-empty ``X`` (default
        ``1e-8``; the value stays attained, an upper bound, at any ``rtol``; see
        :data:`MARGIN_RESIDUAL`); the lock step of an empty ``X`` keeps the default."""
        lams = [complex(lam) for lam in lams]
        out = np.empty(len(lams))
        if not lams:
            return out
        if not any(X is held for held in self._held):
            self._held.append(X)
        with one_blas_thread():
            todo = range(len(lams))
            if (side == "c" and X.shape[1] == 0) or (side == "o" and X.shape[0] == 0):
                todo = self._lock_step(X, lams, side, out)
            work: dict = {}       # one n x n work triangle per arithmetic for all the points
            for i in todo:
                out[i] = self._one(X, lams[i], side, rtol=rtol, work=work)
        return out

    def _lock_step(self, X, lams, side: str, out) -> list:
        """``sigma_min(A - lambda I)`` (an empty ``X``) at the plain points of ``lams``, in
        lock step on one triangle per arithmetic (:func:`_shifted_smallest`), into ``out``;
        the points left to the one-shift path are returned."""
        schur = self.schur
        quasi = bool(np.any(np.diag(schur.T, -1)))
        if schur.T.shape[0] < MULTI_SHIFT_SIZE or len(lams) < MULTI_SHIFT_POINTS:
            return list(range(len(lams)))
        rest = []
        for real in (True, False):
            group = [i for i, lam in enumerate(lams) if (lam.imag == 0.0 and not quasi) == real]
            if len(group) < MULTI_SHIFT_POINTS:
                rest += group
                continue
            T, _ = schur.pair(X, side, real)
            shifts = np.array([lams[i].real if real else np.conj(lams[i]) for i in group])
            plain, floors = _plain_shifts(T, shifts)
            rest += [i for i, ok in zip(group, plain) if not ok]
            out[[i for i, ok in zip(group, plain) if ok]] = _shifted_smallest(
                T, shifts[plain], floors[plain])
        return sorted(rest)

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
             vector: bool = False, work: dict | None = None):
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
        top = _work_triangle(T, work)
        diagonal = T.diagonal()
        top[np.diag_indices(n)] = diagonal - shift
        cplx = np.iscomplexobj(top)
        tpqrt = lapack.ztpqrt if cplx else lapack.dtpqrt
        R, _, _, info = tpqrt(0, max(1, min(TPQRT_BLOCK, n)), top, np.array(bottom, order="F"),
                              overwrite_a=1, overwrite_b=1)
        if info != 0:   # pragma: no cover - LAPACK argument error
            raise np.linalg.LinAlgError(f"?tpqrt failed (info={info})")
        # ||R||_F = ||[T - shift I; bottom]||_F (R is the triangle of an orthogonal
        # factorization) lies between these two, from the pair's cached norm and O(n)
        # terms: the scaling test of _triangle_smallest without a pass over the n x n array
        # (a bound that overflows is infinite, one that underflows zero: then the pass is made)
        with np.errstate(all="ignore"):
            own = _squared(diagonal - shift) + _squared(bottom)
            whole = self._pair_norm(T)
            bounds = (math.sqrt(own), math.sqrt(whole * whole + own))
        value, z = _triangle_smallest(R, None if start is None else start[1], rtol,
                                      frobenius=bounds)
        return (value, z, real) if vector else value

    def _pair_norm(self, T) -> float:
        """``||T||_F`` of a cached pair triangle, computed once (kept by ``id`` with ``T``,
        which the Schur form keeps alive)."""
        entry = self._norms.get(id(T))
        if entry is None or entry[0] is not T:
            with np.errstate(all="ignore"):
                entry = self._norms[id(T)] = (T, float(np.linalg.norm(T)))
        return entry[1]


TPQRT_BLOCK = 16

"""Block size of the triangular-pentagonal QR (LAPACK ``?tpqrt``) of the margins.

Measured in the mode table's loop (one BLAS thread, milliseconds per margin, busy machine):
random stable n = 500: 8 4.3, 16 4.4, 32 4.8, 64 5.5; n = 1,000: 16 15.5, 32 17.5;
n = 2,000: 16 104, 32 115; damped beam n = 1,412: 8 32, 16 26, 32 30, 64 37.  Larger
blocks spend more on the block reflector's triangular factor (about ``nb^2 / 2`` per
column against ``2 m`` for the few extra rows), smaller ones more on calls."""

_COPY_BLOCK = 256   # columns per slab of the upper-triangle copy


def _work_triangle(T, work: dict | None) -> np.ndarray:
    """A Fortran-ordered copy of the upper triangle of ``T`` (below the diagonal: zeros or
    whatever earlier copies of other upper triangles left there, which ``?tpqrt`` and the
    triangular BLAS never read) in the work array ``work`` holds for ``T``'s shape and
    type, made on first use: one allocation for all the points of a call instead of one
    ``n x n`` array per point, and only the upper trapezoid of each slab of columns
    copied (about half of the array)."""
    if work is None:
        return np.array(T, order="F")
    key = (T.shape, T.dtype)
    top = work.get(key)
    if top is None:
        top = work[key] = np.zeros(T.shape, dtype=T.dtype, order="F")
    n = T.shape[0]
    for j0 in range(0, n, _COPY_BLOCK):
        j1 = min(n, j0 + _COPY_BLOCK)
        top[:j1, j0:j1] = T[:j1, j0:j1]
    return top


def _squared(M) -> float:
    """Sum of the squared moduli of the entries of ``M``."""
    v = np.asarray(M).ravel()
    return float(np.vdot(v, v).real)


def _top_left_singular(d, e):
    """Largest singular value and left singular vector of the upper bidiagonal matrix with
    diagonal ``d`` and superdiagonal ``e``: the top eigenpair of the tridiagonal ``B B^T``
    (LAPACK ``stebz`` and ``stein`` through scipy, or LAPACK's ``dstev`` for the first
    steps, whose call overhead is smaller: a few microseconds against tens for a dense
    symmetric solver), instead of a dense SVD per Lanczos step.  Squaring costs nothing in
    accuracy at the top of the spectrum."""
    k = d.size
    if k == 1:
        return float(abs(d[0])), np.ones(1)
    diag = d * d
    diag[:-1] += e * e
    if k <= _DENSE_TOP:
        w, v, info = lapack.dstev(diag, d[1:] * e, compute_v=1)
        if info == 0:
            return math.sqrt(max(float(w[-1]), 0.0)), v[:, -1]
    w, v = scipy.linalg.eigh_tridiagonal(diag, d[1:] * e, select="i",
                                         select_range=(k - 1, k - 1))
    return math.sqrt(max(float(w[0]), 0.0)), v[:, 0]


_DENSE_TOP = 24     # up to this many steps dstev (all eigenpairs) has less overhead


def _triangle_smallest(R, start=None, rtol: float = _RESIDUAL, *, frobenius=None):
    """Smallest singular value of the upper triangle ``R`` (overwritten on zero pivots), by
    Golub-Kahan bidiagonalization of ``R^{-1}`` (module notes, steps 2 and 3), and the unit
    vector ``z`` attaining it (``||R z||``).  ``start``: the first Lanczos vector (a
    previous ``z``: the right singular vector of ``R^{-H}``'s top triplet is then close).
    ``frobenius``: a lower and an upper bound on ``||R||_F`` when known; the largest entry
    lies between ``||R||_F / n`` and ``||R||_F``, so when both bounds are safely inside the
    range where no scaling is needed (a margin of ``2^10`` for the rounding of the bounds),
    the ``O(n^2)`` pass for the largest entry is skipped: the decision is the same."""
    n = R.shape[0]
    if frobenius is not None and 2.0**-390 * max(n, 1) < frobenius[0] \
            and frobenius[1] < 2.0**390:           # (false for a nan or an infinite bound)
        top_entry = 1.0
    else:
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
    dtype = R.dtype
    if start is not None and np.linalg.norm(start) > 0:
        # R^{-1} p_0 = q_0 ~ z when p_0 ~ R z / ||R z||
        p = trmv(R, np.asarray(start, dtype=dtype))
    else:
        p = _random_start(n, cplx)
    run = _Bidiagonalization(p, dtype, min(n, MAX_STEPS), rtol)
    with np.errstate(over="ignore", invalid="ignore"):
        while not run.done:
            run.forward(trsv(R, run.forward_vector()))                      # R^{-1} p_j
            if not run.done:
                run.adjoint(trsv(R, run.adjoint_vector(), trans=conj_trans))  # R^{-H} q_j
    z = run.ritz_vector()
    if z is None:
        # R^{-1} overflows: singular to working precision
        return float(floor), run.P[:, 0]
    Rz = trmv(R, z)
    if idx.size:                            # back to the true triangle for the value
        Rz[idx] -= (floor - d[idx]) * z[idx]
    return float(np.linalg.norm(Rz)), z


@functools.lru_cache(maxsize=8)
def _random_start(n: int, cplx: bool) -> np.ndarray:
    """The fixed first Lanczos vector (unnormalized, read-only): the same answer on every
    run, drawn once per size and arithmetic (a fresh generator per point cost about a
    sixtieth of a margin at n = 1,000)."""
    rng = np.random.default_rng(_SEED)
    p = rng.standard_normal(n)
    p = p + 1j * rng.standard_normal(n) if cplx else p
    p.flags.writeable = False
    return p


class _Bidiagonalization:
    """Golub-Kahan bidiagonalization of ``R^{-1}`` with full reorthogonalization (module
    notes, step 2) for one triangle ``R``, advanced half a step at a time with solves done by
    the caller: :meth:`forward` takes ``R^{-1} p_j`` for ``p_j =`` :meth:`forward_vector`,
    :meth:`adjoint` takes ``R^{-H} q_j`` for ``q_j =`` :meth:`adjoint_vector`, until
    ``done``.  One recurrence and one stopping rule, whether the solves are one-shift BLAS
    solves (:func:`_triangle_smallest`) or blocked multi-shift ones in lock step
    (:func:`_shifted_smallest`).

    ``capacity``: Lanczos vectors stored at first (growing by as many again, up to ``steps``),
    so that many runs at once hold only the vectors they use.  The vectors are stored as
    contiguous columns (Fortran order): each step reads and writes whole columns."""

    def __init__(self, p, dtype, steps: int, rtol: float, capacity: int | None = None):
        n = p.shape[0]
        self.steps, self.rtol = steps, rtol
        room = steps if capacity is None else min(steps, max(1, capacity))
        self._extra = room
        self.P = np.empty((n, room + 1), dtype=dtype, order="F")
        self.Qk = np.empty((n, room), dtype=dtype, order="F")
        self.alpha = np.zeros(steps)
        self.beta = np.zeros(steps)
        self.P[:, 0] = p / np.linalg.norm(p)
        self.u_top = np.ones(1)
        self.j = 0
        self.used = 0
        self.done = steps == 0

    def forward_vector(self) -> np.ndarray:
        return self.P[:, self.j]

    def adjoint_vector(self) -> np.ndarray:
        return self.Qk[:, self.j]

    def growth(self) -> int:
        """Columns the next :meth:`forward` adds to the storage (0 while there is room)."""
        room = self.Qk.shape[1]
        return 0 if self.j < room else 2 * (min(self.steps, room + self._extra) - room)

    def forward(self, q) -> None:
        j, Qk = self.j, self.Qk
        if j:
            q -= self.beta[j - 1] * Qk[:, j - 1]
            for _ in range(2):                          # full reorthogonalization
                q -= Qk[:, :j] @ (Qk[:, :j].T @ q.conj()).conj()
        self.alpha[j] = np.linalg.norm(q)
        if not np.isfinite(self.alpha[j]) or self.alpha[j] == 0.0:
            self.done = True
            return
        if self.growth():
            room = min(self.steps, Qk.shape[1] + self._extra)
            self.Qk = np.empty((Qk.shape[0], room), dtype=Qk.dtype, order="F")
            self.Qk[:, :j] = Qk[:, :j]
            P = self.P
            self.P = np.empty((P.shape[0], room + 1), dtype=P.dtype, order="F")
            self.P[:, :j + 1] = P[:, :j + 1]
        self.Qk[:, j] = q / self.alpha[j]

    def adjoint(self, p) -> None:
        j, P = self.j, self.P
        p -= self.alpha[j] * P[:, j]
        for _ in range(2):
            p -= P[:, :j + 1] @ (P[:, :j + 1].T @ p.conj()).conj()
        self.beta[j] = np.linalg.norm(p)
        self.used = j + 1
        top, self.u_top = _top_left_singular(self.alpha[:self.used], self.beta[:self.used - 1])
        if not np.isfinite(self.beta[j]) or self.beta[j] * abs(self.u_top[-1]) <= self.rtol * top:
            self.done = True
            return
        P[:, j + 1] = p / self.beta[j]
        self.j = j + 1
        self.done = self.j == self.steps

    def ritz_vector(self):
        """The unit vector ``z`` of the top Ritz triplet (``None`` before any step)."""
        if self.used == 0:
            return None
        z = self.Qk[:, :self.used] @ self.u_top
        return z / np.linalg.norm(z)


MULTI_SHIFT_SIZE = 700

"""From this many states ``sigma_min(A - mu I)`` at :data:`MULTI_SHIFT_POINTS` or more points
(the boundary test) runs the points in lock step on blocked multi-shift solves
(:func:`_shifted_smallest`).  Below it the one-shift BLAS solves are faster: the triangle
stays in cache, and the blocked solve's row loop costs Python steps per row.  Measured on a
damped beam, one BLAS thread (32 MB last-level cache): n = 600, 300 points: one-shift 0.55 s,
lock step 0.67-0.70 s; n = 800: 1.25 s against 0.98-1.00 s."""

MULTI_SHIFT_POINTS = 32

"""Fewest points for the lock step: each blocked solve has ``n`` row steps whatever the number
of points, which a few one-shift solves undercut."""

_LOCK_STEP = 128    # most runs in lock step (columns of each multi-shift solve)
_FIRST_ROOM = 4     # Lanczos vectors stored per run at first (most runs converge in fewer)


def _plain_shifts(R0, shifts):
    """Which of ``shifts`` leave ``R0 - mu I`` needing neither the power-of-two scaling nor
    the pivot floor of :func:`_triangle_smallest` (checked in ``O(n)`` per shift, as there),
    and the floor of each: the others take the one-shift path unchanged."""
    d0 = R0.diagonal()
    off = np.abs(R0)
    off[np.diag_indices_from(off)] = 0.0
    off_top = float(off.max()) if off.size else 0.0
    first_row = float(off[0].max()) if off.size else 0.0
    plain = np.zeros(len(shifts), dtype=bool)
    floors = np.zeros(len(shifts))
    for k, mu in enumerate(shifts):
        pivots = np.abs(d0 - mu)
        top_entry = max(off_top, float(pivots.max()))
        if not 2.0**-400 < top_entry < 2.0**400:
            continue
        floors[k] = 1e-3 * _EPS * (max(first_row, float(pivots[0])) + float(pivots.max())
                                   + 1e-300)
        plain[k] = not np.any(pivots < floors[k])
    return plain, floors


def _shifted_smallest(R0, shifts, floors, rtol: float = _RESIDUAL, *,
                      lock_step: int = _LOCK_STEP, budget: int | None = None) -> np.ndarray:
    """``sigma_min(R0 - mu I)`` for each of ``shifts`` (all plain, see
    :func:`_plain_shifts`; ``floors`` their pivot floors), with the same recurrence, start
    vector, stopping rule and attained value ``||R z||`` as :func:`_triangle_smallest` at each
    shift, but with the runs of up to ``lock_step`` shifts advanced together: each half step
    is one blocked multi-shift solve (:func:`plantcore.structure.multi_shift.solve_shifted`)
    for all of them, and each run leaves when its own stopping rule holds.

    Memory: the runs' Lanczos vectors are kept within ``budget`` columns of length ``n``
    (default ``2 n``, i.e. ``4 n^2`` doubles complex): a new run starts only within it, and a
    run whose storage would grow beyond it waits a round (the oldest run never waits)."""
    n = R0.shape[0]
    shifts = np.asarray(shifts)
    dtype = np.result_type(R0, shifts)
    steps = min(n, MAX_STEPS)
    budget = 2 * n if budget is None else budget
    p = _random_start(n, np.iscomplexobj(np.empty(0, dtype=dtype)))
    out = np.empty(shifts.size)
    queue = list(range(shifts.size))
    queue.reverse()
    active: list = []                     # (index, run), oldest first
    held = 0                              # columns stored by the active runs
    with np.errstate(over="ignore", invalid="ignore"):
        while queue or active:
            while queue and len(active) < lock_step and (
                    not active or held + 2 * _FIRST_ROOM + 1 <= budget):
                k = queue.pop()
                run = _Bidiagonalization(p, dtype, steps, rtol, capacity=_FIRST_ROOM)
                active.append((k, run))
                held += run.P.shape[1] + run.Qk.shape[1]
            going = []
            for position, (k, run) in enumerate(active):
                grow = run.growth()
                if grow and position and held + grow > budget:
                    continue                 # waits until older runs free their storage
                held += grow
                going.append((k, run))
            X = solve_shifted(R0, shifts[[k for k, _ in going]],
                              np.column_stack([run.forward_vector() for _, run in going]))
            for c, (_, run) in enumerate(going):
                run.forward(X[:, c].copy())
            going = [(k, run) for k, run in going if not run.done]
            if going:
                Y = solve_shifted(R0, shifts[[k for k, _ in going]],
                                  np.column_stack([run.adjoint_vector() for _, run in going]),
                                  adjoint=True)
                for c, (_, run) in enumerate(going):
                    run.adjoint(Y[:, c].copy())
            finished = [(k, run) for k, run in active if run.done]
            active = [(k, run) for k, run in active if not run.done]
            held -= sum(run.P.shape[1] + run.Qk.shape[1] for _, run in finished)
            _attained(R0, shifts, floors, finished, out)
    return out


def _attained(R0, shifts, floors, finished, out) -> None:
    """``out[k] = ||(R0 - mu_k I) z_k||`` for the finished runs (one triangular product for
    all of them: the strictly upper part through a unit-diagonal ``?trmm``, the shifted
    diagonal added), or the floor where the run made no step (``R^{-1}`` overflows)."""
    done = []
    for k, run in finished:
        z = run.ritz_vector()
        if z is None:
            out[k] = floors[k]
        else:
            done.append((k, z))
    if not done:
        return
    index = [k for k, _ in done]
    Z = np.asfortranarray(np.column_stack([z for _, z in done]))
    trmm = blas.get_blas_funcs("trmm", (R0, Z))
    W = trmm(1.0, R0, Z, diag=1)                  # (strictly upper part + I) Z
    W += (R0.diagonal()[:, None] - shifts[index][None, :] - 1.0) * Z
    out[index] = np.linalg.norm(W, axis=0)
