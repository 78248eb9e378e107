r"""Triangular solves with one triangle and many diagonal shifts, by blocked substitution.

For an upper triangle ``T`` (n x n), shifts ``mu_1, ..., mu_s`` and right-hand sides
``b_1, ..., b_s``,

.. math::

    (T - \mu_j I)\, x_j = b_j \qquad\text{or}\qquad (T - \mu_j I)^H\, x_j = b_j,
    \qquad j = 1, \dots, s,

are solved together.  The shifted triangles differ only on the diagonal, so the
off-diagonal part of each substitution step is the same matrix for every shift.  Blocked
back substitution (row blocks from the bottom; common practice, the scheme of the level-3
BLAS triangular solve ``?trsm`` for one triangle and many right-hand sides) then updates the
right-hand sides of all shifts with one matrix product ``T[:i0, I] @ X[I, :]`` per block of
rows ``I`` (a level-3 GEMM over all shifts, in place of ``s`` memory-bound level-2 solves,
each of which reads the whole triangle), and solves the small diagonal block for all shifts
at once, row by row, each row a short vectorized product.  Every entry of a solution is
still the substitution formula of its own shifted triangle with the inner sums split in
blocks, so the backward error analysis of substitution (N. J. Higham, *Accuracy and
Stability of Numerical Algorithms*, 2nd ed., SIAM, 2002, chapter 8, "Triangular Systems")
applies with the same kind of constant.  The adjoint systems run forward substitution on ``T^T`` with the
conjugated right-hand sides (``conj((T - mu I)^H x) = (T^T - mu I) conj(x)``), so no
conjugated copy of the triangle is made.

Each solution is the plain substitution result of its own shifted triangle, in a different
order of the same sums: it agrees with a one-shift triangular solve to rounding level, and
like it, it overflows to ``inf`` or ``nan`` without a warning on a (numerically) singular
shifted triangle: the caller tests the result for finiteness, as after a BLAS solve.
"""

from __future__ import annotations

import numpy as np

__all__ = ["BLOCK", "solve_shifted"]

BLOCK = 128

"""Rows per diagonal block: the GEMM updates have inner dimension ``BLOCK`` (efficient from
about 64), and the vectorized row loop inside a block costs the same at any block size."""


def solve_shifted(T, shifts, B, *, adjoint: bool = False, block: int = BLOCK) -> np.ndarray:
    """Solve ``(T - shifts[j] I) x_j = B[:, j]`` (``adjoint``: ``(T - shifts[j] I)^H x_j =
    B[:, j]``) for every ``j`` by blocked substitution (module notes).

    Parameters
    ----------
    T : (n, n) ndarray
        Upper triangle; the part below the diagonal is not read.  Fortran order makes the
        block products read contiguous columns.
    shifts : (s,) array_like
        The shifts ``mu_j``.
    B : (n, s) array_like
        Right-hand sides, one column per shift.
    adjoint : bool
        Solve with the conjugate transposes of the shifted triangles.
    block : int
        Rows per diagonal block (default :data:`BLOCK`).

    Returns
    -------
    X : (n, s) ndarray
        The solutions, one column per shift (row-major: the row loop reads rows).
    """
    shifts = np.asarray(shifts)
    n = T.shape[0]
    dtype = np.result_type(T, shifts, B)
    pivots = T.diagonal()[:, None] - shifts[None, :]
    with np.errstate(all="ignore"):     # an overflowing solve gives inf, as a BLAS solve
        if not adjoint:
            return _backward(T, pivots, np.array(B, dtype=dtype, order="C"), n, block)
        W = np.array(np.conj(B), dtype=dtype, order="C")
        return np.conj(_forward_transposed(T, pivots, W, n, block))


def _backward(T, pivots, X, n: int, block: int) -> np.ndarray:
    """Back substitution with the upper triangles ``T - mu_j I``, in place on ``X``."""
    for i1 in range(n, 0, -block):
        i0 = max(0, i1 - block)
        D = np.ascontiguousarray(T[i0:i1, i0:i1])     # the diagonal block, rows contiguous
        for r in range(i1 - i0 - 1, -1, -1):
            if r + 1 < i1 - i0:
                X[i0 + r] -= D[r, r + 1:] @ X[i0 + r + 1:i1]
            X[i0 + r] /= pivots[i0 + r]
        if i0:
            X[:i0] -= T[:i0, i0:i1] @ X[i0:i1]         # all shifts at once (GEMM)
    return X


def _forward_transposed(T, pivots, W, n: int, block: int) -> np.ndarray:
    """Forward substitution with the lower triangles ``T^T - mu_j I``, in place on ``W``."""
    for i0 in range(0, n, block):
        i1 = min(n, i0 + block)
        D = np.ascontiguousarray(T[i0:i1, i0:i1].T)   # rows of the block of T^T
        for r in range(i1 - i0):
            if r:
                W[i0 + r] -= D[r, :r] @ W[i0:i0 + r]
            W[i0 + r] /= pivots[i0 + r]
        if i1 < n:
            W[i1:] -= T[i0:i1, i1:].T @ W[i0:i1]       # all shifts at once (GEMM)
    return W
