"""How well the equilibration's state scaling is determined by the model itself.

The equilibration (:func:`plantcore.core.equilibration.equilibrate`) balances the system
matrix ``M = [[A, B], [C, 0]]`` by a diagonal similarity of powers of two.  Balancing
minimizes (approximately) ``||D^-1 M D||_F`` over diagonal ``D``; in the logarithms
``x = log d`` the objective ``sum_ij |M_ij|^2 exp(2 (x_j - x_i))`` is convex, and its
Hessian at the balanced point is ``4`` times the Laplacian of the graph whose edge
``{i, j}`` carries the weight ``|M_ij|^2 + |M_ji|^2`` (relative to ``||M||_F^2``).

Its second smallest eigenvalue, the algebraic connectivity of that weighted graph
(M. Fiedler, "Algebraic connectivity of graphs", Czechoslovak Mathematical Journal 23(2),
298-305, 1973), says how sharply the balanced scaling is determined:

* when it is large, every group of states is tied to the rest by couplings of a
  substantial part of the model's norm in both directions; the balanced form is then
  (nearly) the same whatever scaling the states came in, so a model given with its states
  rescaled by any powers of two is decided in (nearly) the same coordinates as the
  unscaled one;
* when it is tiny, some group of states is joined to the rest only by weak couplings.  A
  nearly reducible system matrix (a Kalman form with exact zeros is one: couplings run
  from a part into another and not back) ends so after balancing, because the balancing
  shrinks the one-way couplings until its stopping rule halts it; it can shift that group
  by almost any factor at almost no change of the norm, so where it stops is decided by
  the iteration rather than by the model, and a real coupling may end at the size of
  rounding.

:func:`plantcore.structure.reconcile.confirm_window` uses this to decide whether the
equilibrated coordinates may confirm a value that the staircase dropped inside the
tolerance window.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg

from plantcore.core.equilibration import io_scaled
from plantcore.core.safe_norms import frobenius

__all__ = ["balancing_connectivity"]


def balancing_connectivity(A, B, C) -> float:
    """The algebraic connectivity of the balanced system matrix's weight graph.

    Parameters
    ----------
    A : (n, n) array_like
        The equilibrated state matrix.
    B : (n, m) array_like
    C : (p, n) array_like
        The equilibrated input and output matrices (any input and output units: each
        column of ``B`` and row of ``C`` is brought to the size of ``A`` by a power of
        two first, as the equilibration does).

    Returns
    -------
    float
        The second smallest eigenvalue of the Laplacian of the graph on the ``n`` states
        and ``max(m, p)`` input/output coordinates (input ``j`` and output ``j`` share one,
        as in the equilibration's embedding) with edge weights
        ``(|M_ij|^2 + |M_ji|^2) / ||M||_F^2``; at most ``2``.  ``inf`` for fewer than two
        coordinates (nothing can be shifted).

    Notes
    -----
    For a subset ``S`` of the coordinates, shifting the scaling of ``S`` by ``exp(t)``
    changes ``||M||_F^2`` (relatively) by about ``2 t^2`` times the weight crossing between
    ``S`` and the rest; the algebraic connectivity is at most about that crossing weight
    times ``N / (|S| (N - |S|))`` (Fiedler 1973), so a small value exhibits a group of
    coordinates that the balancing does not pin down.  The eigenvalue is computed by a
    dense symmetric eigensolver (LAPACK ``?syevr``), ``O(N^3)`` for ``N = n + max(m, p)``;
    values below about ``N eps`` are rounding (the smallest eigenvalue, zero, is computed
    to that accuracy).
    """
    A = np.asarray(A, dtype=float)
    n = A.shape[0]
    m, p = np.shape(B)[1], np.shape(C)[0]
    k = max(m, p)
    N = n + k
    if N < 2:
        return np.inf
    norm_A = float(frobenius(A))
    B_n, C_n = io_scaled(B, C, norm_A if norm_A > 0 else 1.0)
    M = np.zeros((N, N))
    M[:n, :n] = A
    M[:n, n:n + m] = B_n
    M[n:n + p, :n] = C_n
    total = float(frobenius(M))
    if total == 0.0:
        return 0.0
    M /= total
    W = M * M
    np.fill_diagonal(W, 0.0)
    W += W.T
    L = -W
    L[np.diag_indices(N)] = W.sum(axis=1)
    return float(scipy.linalg.eigh(L, eigvals_only=True, subset_by_index=[1, 1])[0])
