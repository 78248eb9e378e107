"""The staircase reduction engine: blocked (level-3) steps with a careful fallback.

Internal module.  :func:`reduce_staircase` computes the same controllability staircase as
the careful step-by-step algorithm (QR with column pivoting of each subdiagonal block, an
SVD of its small triangular factor to decide the rank, Householder reflectors applied to
the rest; Van Dooren 1981, Varga 1981), but does the *generic* steps -- those where the
block keeps full column rank -- the way LAPACK reduces a matrix to Hessenberg form:

* A step whose previous block had ``w`` columns is a band-Hessenberg step of bandwidth
  ``w``.  Several such steps are gathered into a panel; within the panel only the block
  being compressed is brought up to date (from the left with the panel's reflectors in
  compact WY form, from the right through ``Y = A V T``), and the rest of the matrix is
  updated once per panel with matrix-matrix products.  This is the blocked Hessenberg
  reduction of Quintana-Orti and van de Geijn (2006), generalised from bandwidth 1 to
  bandwidth ``w``; the compact WY representation is that of Schreiber and Van Loan (1989).
* For a single column (``w == 1``) the remaining steps *are* a Hessenberg reduction, done
  by LAPACK ``dgehrd``; the subdiagonal entries are then exactly the 1 x 1 singular values
  the careful algorithm would see, and the first one below the tolerance ends the
  controllable part.  With a single input the whole staircase, first step included, is the
  Hessenberg reduction of the bordered matrix ``[[0, 0], [b, A]]``.
* Every step's rank is still decided from singular values: the block's triangular factor
  (unpivoted QR; its singular values are those of the block) is decomposed by the SVD and
  passed to :func:`plantcore.core.rank.decide_rank`.  The first step found rank deficient is
  discarded from the panel and redone by the careful algorithm, which moves the dropped
  part into rows that are then set exactly to zero; blocked steps resume afterwards with
  the new, smaller width.

The orthogonal factor ``U`` is never accumulated during the reduction.  The reflectors are
kept (compact WY blocks and LAPACK-style reflector columns) and ``U`` or ``U @ X`` is
formed on request by backward accumulation, which skips the identity part as LAPACK
``dorgqr`` does; callers that need only some columns of ``U`` never form the rest.

References
----------
.. [1] P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
   IEEE Trans. Automatic Control 26(1), 111-129, 1981.
.. [2] A. Varga, "Numerically stable algorithm for standard controllability form
   determination", Electronics Letters 17(2), 74-75, 1981.
.. [3] R. Schreiber and C. Van Loan, "A storage-efficient WY representation for products
   of Householder transformations", SIAM J. Sci. Stat. Comput. 10(1), 53-57, 1989.
.. [4] G. Quintana-Orti and R. van de Geijn, "Improving the performance of reduction to
   Hessenberg form", ACM Trans. Math. Software 32(2), 180-194, 2006.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import blas, lapack

from plantcore.core.rank import RankDecision, decide_rank

__all__ = ["StaircaseReduction", "reduce_staircase", "careful_staircase"]

#: Target number of columns per panel of blocked steps (a multiple of the step width is
#: used).  Larger panels mean fewer passes over the trailing matrix but more work inside
#: the panel; 64-128 is the usual range for LAPACK's own blocked reductions.
PANEL_COLUMNS = 96

_dgemm = blas.dgemm


def _lwork(*dims) -> int:
    return max(1, 64 * max(dims + (1,)))


# ----------------------------------------------------------------------------------------
# Recorded transformations.  U = G_1 G_2 ... G_L, each G acting on coordinates k:n.
# ----------------------------------------------------------------------------------------

@dataclass
class _Householder:
    """``G = H_1 ... H_kk @ diag(Ur, I)`` on coordinates ``k:``, reflectors as from geqrf."""

    k: int
    refl: np.ndarray          # (n - k, kk), Fortran order; strictly lower part holds v
    tau: np.ndarray           # (kk,)
    Ur: np.ndarray | None     # (kk, kk) rotation applied after the reflectors, or None


@dataclass
class _CompactWY:
    """``G = I - V T V^T`` on coordinates ``k:`` (Schreiber and Van Loan 1989)."""

    k: int
    V: np.ndarray             # (n - k, nb)
    T: np.ndarray             # (nb, nb) upper triangular


def _chunks(start, stop, n):
    """Column ranges of at most ``max(128, n // 8)`` columns covering ``start:stop``.

    Updates of a large block are done a slice of columns at a time so that the temporary
    product never exceeds an eighth of an ``n x n`` array.
    """
    size = max(128, n // 8)
    for c in range(start, stop, size):
        yield slice(c, min(c + size, stop))


def _apply_left(g, X, cols, *, transpose=False):
    """``X[g.k:, cols] <- G X[g.k:, cols]`` (or ``G^T X[g.k:, cols]``), in place on X."""
    k = g.k
    n = X.shape[0]
    if isinstance(g, _CompactWY):
        if cols.stop <= cols.start:
            return
        # One product on whole columns (in place by dgemm when X is Fortran-ordered, as
        # every caller's is), V padded with k zero rows: the wasted k rows cost less than a
        # temporary product and a subtraction.
        Tg = g.T.T if transpose else g.T
        W = np.asfortranarray(Tg @ (g.V.T @ X[k:, cols]))
        Vp = np.zeros((n, g.V.shape[1]), order="F")
        Vp[k:, :] = g.V
        _subtract_product(X, (slice(None), cols), Vp, W)
        return
    kk = g.tau.shape[0]
    if kk == 0:
        return
    for cs in _chunks(cols.start, cols.stop, n):
        sub = np.asfortranarray(X[k:, cs])
        if g.Ur is not None and not transpose:
            sub[:kk, :] = g.Ur @ sub[:kk, :]
        out, _, info = lapack.dormqr("L", "T" if transpose else "N", g.refl, g.tau, sub,
                                     _lwork(*sub.shape), overwrite_c=1)[:3]
        if info != 0:  # pragma: no cover - LAPACK argument error
            raise RuntimeError(f"ormqr failed with info={info}")
        if g.Ur is not None and transpose:
            out[:kk, :] = g.Ur.T @ out[:kk, :]
        X[k:, cs] = out


@dataclass
class StaircaseReduction:
    """The result of :func:`reduce_staircase` (internal).

    ``A``, ``B``, ``C`` are the transformed arrays ``U.T @ A @ U``, ``U.T @ B``, ``C @ U``
    with the structural zeros exact; ``U`` itself is available through :meth:`form_U` and
    :meth:`apply_U` from the recorded reflectors.
    """

    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    blocks: list
    decisions: list
    transforms: list = field(repr=False)

    @property
    def n(self) -> int:
        return self.A.shape[0]

    @property
    def rank(self) -> int:
        return int(sum(self.blocks))

    def apply_U(self, X, *, overwrite=False):
        """``U @ X`` for an ``(n, q)`` array (a new Fortran-ordered array, or ``X`` itself
        updated in place when ``overwrite`` and it is a Fortran-ordered float array)."""
        if not (overwrite and isinstance(X, np.ndarray) and X.dtype == float
                and X.flags.f_contiguous and X.flags.writeable):
            X = np.array(X, dtype=float, order="F")
        cols = slice(0, X.shape[1])
        for g in reversed(self.transforms):
            _apply_left(g, X, cols)
        return X

    def apply_Ut(self, X):
        """``U.T @ X`` for an ``(n, q)`` array (a new Fortran-ordered array)."""
        X = np.array(X, dtype=float, order="F")
        cols = slice(0, X.shape[1])
        for g in self.transforms:
            _apply_left(g, X, cols, transpose=True)
        return X

    def form_U(self, ncols=None, *, first=True):
        """The first (or last) ``ncols`` columns of ``U``.

        Backward accumulation starting from columns of the identity: a transformation on
        coordinates ``k:`` only meets columns that are no longer unit vectors, as in LAPACK
        ``dorgqr``.
        """
        n = self.n
        q = n if ncols is None else int(ncols)
        if (q == n and first and len(self.transforms) == 1
                and isinstance(self.transforms[0], _Householder)
                and self.transforms[0].k == 0 and self.transforms[0].Ur is None
                and self.transforms[0].refl.shape == (n, n)):
            # one full set of reflectors (a single input): U is LAPACK orgqr of them
            g = self.transforms[0]
            Qk, _, info = lapack.dorgqr(g.refl, g.tau, lwork=_lwork(n))
            if info != 0:  # pragma: no cover
                raise RuntimeError(f"orgqr failed with info={info}")
            return Qk
        if not first:
            E = np.zeros((n, q), order="F")
            E[n - q:, :] = np.eye(q)
            return self.apply_U(E)
        X = np.zeros((n, q), order="F")
        X[np.arange(q), np.arange(q)] = 1.0
        identity_block = True  # X[k:, k:q] still the identity for the next transform?
        for g in reversed(self.transforms):
            k = g.k
            if k >= q:
                # rows k: of the first q columns are zero and stay zero
                continue
            if identity_block and isinstance(g, _Householder) and g.Ur is None \
                    and g.tau.shape[0] > 0 and q == n:
                # first transformation met on the identity: generate it directly
                m_rows = n - k
                a = np.zeros((m_rows, m_rows), order="F")
                a[:, :g.refl.shape[1]] = g.refl
                Qk, _, info = lapack.dorgqr(a, g.tau, lwork=_lwork(m_rows), overwrite_a=1)
                if info != 0:  # pragma: no cover
                    raise RuntimeError(f"orgqr failed with info={info}")
                X[k:, k:] = Qk
            else:
                _apply_left(g, X, slice(k, q))
            identity_block = False
        return X


# ----------------------------------------------------------------------------------------
# The careful step (reference algorithm, one block at a time).
# ----------------------------------------------------------------------------------------

def _ormqr_into(X, index, side, trans, refl, tau):
    """``X[index] <- op(H) X[index]`` (or ``X[index] op(H)``) with LAPACK ``ormqr``.

    In place when the block is Fortran-contiguous (whole columns of a Fortran array), which
    saves two copies of it; otherwise through a copy.
    """
    sub = X[index]
    if sub.size == 0:
        return
    contiguous = sub.flags.f_contiguous and sub.dtype == float
    out, _, info = lapack.dormqr(side, trans, refl, tau, sub, _lwork(*sub.shape),
                                 overwrite_c=1 if contiguous else 0)[:3]
    if info != 0:  # pragma: no cover - LAPACK argument error
        raise RuntimeError(f"ormqr failed with info={info}")
    if not (contiguous and np.shares_memory(out, sub)):
        X[index] = out

def _careful_step(A, B, C, k, prev, *, scale, tol, label, step, transforms, keep_top=True):
    """One step of the careful algorithm; returns the decision (or None: nothing to do).

    QR with column pivoting (``geqp3``) of the block below the current position, SVD of the
    triangular factor, rank decided from the singular values; reflectors applied with
    ``ormqr`` to rows and columns ``k:``, the SVD rotation to the first rows, and what is
    dropped set exactly to zero.  With ``keep_top=False`` the rows above ``k`` of ``A`` are
    left as they are (no later step reads them).
    """
    X = B[k:, :] if prev is None else A[k:, prev[0]:prev[1]]
    rows, cols = X.shape
    if cols == 0:
        return None
    qr, jpvt, tau, _, info = lapack.dgeqp3(np.asfortranarray(X))
    if info != 0:  # pragma: no cover - LAPACK argument error
        raise RuntimeError(f"geqp3 failed with info={info}")
    kk = min(rows, cols)
    if kk:
        R = np.triu(qr[:kk, :])
        Ur, s, _ = np.linalg.svd(R, full_matrices=False)
    else:
        Ur, s = np.zeros((0, 0)), np.zeros(0)
    d = decide_rank(s, scale, tol, f"{label} step {step}")
    r = d.rank
    if kk:
        refl = np.asfortranarray(qr[:, :kk])
        tau = tau[:kk]
        c0 = 0 if prev is None else prev[0]
        # rows k: of A (columns c0: -- the others are zero there) and of B  <- H^T (.)
        _ormqr_into(A, (slice(k, None), slice(c0, None)), "L", "T", refl, tau)
        _ormqr_into(B, (slice(k, None), slice(None)), "L", "T", refl, tau)
        # columns k: of A and C  <- (.) H
        r0 = 0 if keep_top else k
        _ormqr_into(A, (slice(r0, None), slice(k, None)), "R", "N", refl, tau)
        if C.shape[0]:
            _ormqr_into(C, (slice(None), slice(k, None)), "R", "N", refl, tau)
        # then the small rotation Ur on the first kk rows/columns of the trailing part
        sl = slice(k, k + kk)
        A[sl, c0:] = Ur.T @ A[sl, c0:]
        B[sl, :] = Ur.T @ B[sl, :]
        A[r0:, sl] = A[r0:, sl] @ Ur
        if C.shape[0]:
            C[:, sl] = C[:, sl] @ Ur
        transforms.append(_Householder(k, refl, tau, Ur))
    if prev is None:
        B[k + r:, :] = 0.0
    else:
        A[k + r:, prev[0]:prev[1]] = 0.0
    return d


# ----------------------------------------------------------------------------------------
# Blocked steps.
# ----------------------------------------------------------------------------------------

def _subtract_product(X, index, L, R):
    """``X[index] -= L @ R``, in place by BLAS ``dgemm`` when the block is Fortran-contiguous
    (whole columns of a Fortran array), which saves the temporary product and a pass over
    the block; otherwise through numpy."""
    sub = X[index]
    if sub.size == 0:
        return
    if sub.flags.f_contiguous and sub.dtype == float and L.dtype == float and R.dtype == float:
        out = _dgemm(-1.0, L, R, 1.0, sub, overwrite_c=1)
        if np.shares_memory(out, sub):
            return
        X[index] = out  # pragma: no cover - overwrite not honoured by the wrapper
        return
    sub -= L @ R  # a view: X updated in place


def _larft(V, tau):
    """Upper triangular ``T`` with ``H_1 ... H_w = I - V T V^T`` (LAPACK ``larft``)."""
    w = tau.shape[0]
    G = V.T @ V
    T = np.zeros((w, w))
    for i in range(w):
        T[i, i] = tau[i]
        if i:
            T[:i, i] = -tau[i] * (T[:i, :i] @ G[:i, i])
    return T


def _blocked_steps(A, C, k, w, *, scale, tol, label, step, transforms, decisions, blocks,
                   max_steps=None, keep_top=True):
    """Band-Hessenberg steps of width ``w`` from position ``k`` while blocks have full rank.

    The state on entry: rows ``k:`` of ``A`` are zero in columns ``< k - w``, and the block
    ``A[k:, k-w:k]`` is the next one to compress.  Returns ``(k, step, done)``: the position
    and step number of the first step not done here (it must be done by the careful
    algorithm), and whether the reduction reached the end.
    """
    n = A.shape[0]
    nb_steps = max(1, PANEL_COLUMNS // w)
    upper = np.triu(np.ones((w, w)))
    strict_lower = 1.0 - upper
    eye_w = np.eye(w)
    while True:
        k0 = k
        if n - k0 < w:
            return k, step, n - k0 == 0
        rows = n - k0
        S = min(nb_steps, (n - k0) // w)
        if max_steps is not None:
            S = min(S, max_steps)
            if S <= 0:
                return k, step, False
        V = np.zeros((rows, S * w), order="F")
        T = np.zeros((S * w, S * w), order="F")
        AV = np.zeros((rows, S * w), order="F")
        Y = np.zeros((rows, S * w), order="F")
        done = 0
        for s in range(S):
            ks = k0 + s * w
            cs = ks - w
            j = s * w
            X = np.array(A[k0:, cs:ks], order="F")
            if j:
                X -= Y[:, :j] @ V[cs - k0:ks - k0, :j].T
                X -= V[:, :j] @ (T[:j, :j].T @ (V[:, :j].T @ X))
            qr, tau, _, info = lapack.dgeqrf(X[j:, :], lwork=_lwork(w))
            if info != 0:  # pragma: no cover
                raise RuntimeError(f"geqrf failed with info={info}")
            R = qr[:w, :] * upper
            sv, info = lapack.dgesvd(R, compute_uv=0)[1::2]
            if info != 0:  # pragma: no cover - no convergence of a w x w SVD
                sv = np.linalg.svd(R, compute_uv=False)
            d = decide_rank(sv, scale, tol, f"{label} step {step}")
            if d.rank < w:
                break
            decisions.append(d)
            blocks.append(w)
            step += 1
            A[k0:ks, cs:ks] = X[:j, :]
            A[ks:ks + w, cs:ks] = R
            A[ks + w:, cs:ks] = 0.0
            Vs = qr  # (a fresh array from geqrf) -> unit lower trapezoidal reflectors
            Vs[:w, :] *= strict_lower
            Vs[:w, :] += eye_w
            V[j:, j:j + w] = Vs
            Ts = _larft(Vs, tau)
            if j:
                T[:j, j:j + w] = -(T[:j, :j] @ (V[j:, :j].T @ Vs)) @ Ts
            T[j:j + w, j:j + w] = Ts
            # A V for the new reflectors, from columns ks: (still as at the panel start)
            # (computed as (Vs^T A^T)^T: with the thin factor first, BLAS streams the big
            # operand instead of packing it, about twice as fast for a few columns)
            AV[:, j:j + w] = (Vs.T @ A[k0:, ks:].T).T
            Y[:, j:j + w] = AV[:, :j + w] @ T[:j + w, j:j + w]
            done = s + 1
        if done == 0:
            return k, step, False
        nbk = done * w
        if nbk < S * w:
            V, T, Y = V[:, :nbk], np.array(T[:nbk, :nbk]), Y[:, :nbk]
        del AV
        kS = k0 + nbk
        # The update of the rest of the matrix, once per panel:
        # * rows above the panel (right update only): A[:k0, c] -= Y_top V_c^T, with
        #   Y_top = A[:k0, k0:] V T (from the values at the panel start);
        # * rows k0: of the trailing columns (right, then left update), merged into one
        #   product:  A[k0:, c] -= Y V_c^T + V W  with  W = T^T (V^T A[k0:, c] - (V^T Y) V_c^T)
        #   (V^T A[k0:, c] read from the values at the panel start).
        # For the trailing columns both are one in-place BLAS product on whole (contiguous)
        # columns:  A[:, c] -= [[Y_top, 0], [Y, V]] @ [V_c^T; W].  When the rows above the
        # panel are not wanted (``keep_top=False``) only rows k0: are updated.
        tc = kS - w
        top = keep_top and k0 > 0
        if top:
            Ytop = (A[:k0, k0:] @ V) @ T
            # the panel's own columns: only their rows above the panel change
            if tc > k0:
                A[:k0, k0:tc] -= Ytop @ V[:tc - k0, :].T
            L = np.zeros((n, 2 * nbk), order="F")
            L[:k0, :nbk] = Ytop
            L[k0:, :nbk] = Y
            L[k0:, nbk:] = V
            del Ytop
        else:
            L = np.asfortranarray(np.hstack([Y, V]))
        VtY = V.T @ Y
        for cs in _chunks(tc, n, n):
            Vt_rows = V[cs.start - k0:cs.stop - k0, :]
            W = T.T @ (V.T @ A[k0:, cs] - VtY @ Vt_rows.T)
            Rm = np.asfortranarray(np.vstack([Vt_rows.T, W]))
            if top:
                _subtract_product(A, (slice(None), cs), L, Rm)
            else:
                _subtract_product(A, (slice(k0, None), cs), L, Rm)
        del W, Y, L, Rm, Vt_rows
        if C.shape[0]:
            Cs = C[:, k0:]
            Cs -= ((Cs @ V) @ T) @ V.T  # a view: C updated in place
        transforms.append(_CompactWY(k0, V, T))
        k = kS
        if done < S:
            return k, step, k == n
        if max_steps is not None:
            max_steps -= done
        if k == n:
            return k, step, True


def _hessenberg_steps(A, C, k, *, scale, tol, label, step, transforms, decisions, blocks):
    """Single-column steps from position ``k`` by LAPACK ``dgehrd`` (Hessenberg reduction).

    The state on entry: rows ``k:`` are zero in columns ``< k - 1``; column ``k - 1`` (rows
    ``k:``) is the next to compress.  The whole trailing matrix is reduced; each subdiagonal
    entry is the 1 x 1 block the careful algorithm would compress, so the decisions are read
    off in order and the first entry at or below the tolerance ends the reduction (it is set
    to zero; the later reflectors only act inside the uncontrollable block).
    Returns ``(k, step, decided_zero)``.
    """
    n = A.shape[0]
    lo = k - 1
    if n - k <= 0:
        return k, step, False
    lw = lapack.dgehrd_lwork(n, lo=lo, hi=n - 1)
    lwork = int(lw[0]) if lw[1] == 0 else _lwork(n)
    if not A.flags.f_contiguous:  # pragma: no cover - callers pass Fortran arrays
        raise ValueError("internal: A must be Fortran ordered")
    ht, tau, info = lapack.dgehrd(A, lo=lo, hi=n - 1, lwork=lwork, overwrite_a=1)
    if info != 0:  # pragma: no cover
        raise RuntimeError(f"gehrd failed with info={info}")
    if not np.shares_memory(ht, A):  # pragma: no cover - overwrite not honoured
        A[...] = ht
    nref = n - k  # reflectors for columns lo .. n-2, stored below the subdiagonal
    block = A[k:, lo:lo + nref]
    refl = np.array(block, order="F")
    for c in range(nref):  # keep the strictly lower part in refl, zero it in A
        refl[:c + 1, c] = 0.0
        block[c + 1:, c] = 0.0
    tau_k = np.array(tau[lo:lo + nref])
    if C.shape[0]:
        C[:, k:] = lapack.dormqr("R", "N", refl, tau_k, np.asfortranarray(C[:, k:]),
                                 _lwork(n))[0]
    transforms.append(_Householder(k, refl, tau_k, None))
    # The decisions, one per subdiagonal entry, as decide_rank makes them for one value.
    h = np.abs(np.diagonal(A, offset=-1)[lo:lo + nref])
    rel = h / scale if scale > 0 else np.zeros_like(h)
    tol = float(tol)
    below = np.flatnonzero(~(rel > tol))
    last = int(below[0]) if below.size else nref
    for c in range(last):
        decisions.append(RankDecision(f"{label} step {step}", 1, 1, float(rel[c]), 0.0, tol))
        step += 1
    blocks.extend([1] * last)
    k += last
    zero = last < nref
    if zero:
        decisions.append(RankDecision(f"{label} step {step}", 0, 1, math.inf, float(rel[last]),
                                      tol))
        step += 1
        A[lo + last + 1, lo + last] = 0.0
    return k, step, zero


# ----------------------------------------------------------------------------------------
# Drivers.
# ----------------------------------------------------------------------------------------

def reduce_staircase(A, B, C, *, scale, tol, label, blocked=True,
                     overwrite_a=False, need_A=True) -> StaircaseReduction:
    """Controllability staircase of ``(A, B)``, carrying ``C`` along (see module notes).

    ``A`` (n, n), ``B`` (n, m), ``C`` (p, n) are copied (``A`` is used in place when
    ``overwrite_a`` and it is a Fortran-ordered float array).  ``B`` is used for the rank
    decisions.  With ``blocked=False`` every step is the careful one (the reference).

    ``need_A=False`` is for callers that want only the decisions and ``U`` (the reflectors):
    rows of ``A`` above the current step's position, which no later step reads, are then not
    updated, so the returned ``A`` must not be used.  The decisions and ``U`` are the same
    either way, to rounding.
    """
    n, m = B.shape
    if blocked and m == 1 and n > 0:
        return _single_input(A, B, C, scale=scale, tol=tol, label=label)
    if not (overwrite_a and isinstance(A, np.ndarray) and A.dtype == float
            and A.flags.f_contiguous and A.flags.writeable):
        A = np.array(A, dtype=float, order="F")
    B = np.array(B, dtype=float, order="F")
    C = np.array(C, dtype=float, order="F")
    transforms: list = []
    blocks: list = []
    decisions: list = []
    k = 0
    prev = None
    step = 1
    while k < n:
        if blocked and prev is not None:
            w = prev[1] - prev[0]
            if w == 1:
                k, step, zero = _hessenberg_steps(
                    A, C, k, scale=scale, tol=tol, label=label, step=step,
                    transforms=transforms, decisions=decisions, blocks=blocks)
                break
            k, step, finished = _blocked_steps(
                A, C, k, w, scale=scale, tol=tol, label=label, step=step,
                transforms=transforms, decisions=decisions, blocks=blocks, keep_top=need_A)
            if finished or k >= n:
                break
            prev = (k - w, k)
        d = _careful_step(A, B, C, k, prev, scale=scale, tol=tol, label=label, step=step,
                          transforms=transforms, keep_top=need_A)
        if d is None:
            break
        decisions.append(d)
        step += 1
        r = d.rank
        if r == 0:
            break
        blocks.append(r)
        prev = (k, k + r)
        k += r
    return StaircaseReduction(A, B, C, blocks, decisions, transforms)


def _single_input(A, B, C, *, scale, tol, label) -> StaircaseReduction:
    """One input: the staircase is the Hessenberg reduction of ``[[0, 0], [b, A]]``.

    The first reflector maps ``b`` to a multiple of ``e1`` (the careful algorithm's first
    step, whose 1 x 1 singular value is ``||b||``), the next ones reduce ``A``; all act on
    the last ``n`` coordinates only, so one ``dgehrd`` call on the bordered matrix gives the
    whole staircase and its reflectors give ``U`` directly.
    """
    n = A.shape[0]
    p = C.shape[0]
    M = np.empty((n + 1, n + 1), order="F")
    M[0, :] = 0.0
    M[1:, 0] = B[:, 0]
    M[1:, 1:] = A
    Caug = np.zeros((p, n + 1), order="F")
    Caug[:, 1:] = C
    transforms: list = []
    blocks: list = []
    decisions: list = []
    _hessenberg_steps(M, Caug, 1, scale=scale, tol=tol, label=label, step=1,
                      transforms=transforms, decisions=decisions, blocks=blocks)
    transforms = [dataclasses.replace(g, k=g.k - 1) for g in transforms]
    return StaircaseReduction(M[1:, 1:], np.array(M[1:, 0:1], order="F"), Caug[:, 1:],
                              blocks, decisions, transforms)


def careful_staircase(A, B, C, *, scale, tol, label) -> StaircaseReduction:
    """The reference: every step by the careful algorithm (QR with pivoting + SVD)."""
    return reduce_staircase(A, B, C, scale=scale, tol=tol, label=label, blocked=False)
