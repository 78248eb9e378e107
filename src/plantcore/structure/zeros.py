"""Transmission (invariant) zeros of a state-space model from its system pencil.

The zeros are the values ``λ`` at which the system pencil

.. math::

    S(\\lambda) = \\begin{bmatrix} A - \\lambda I & B \\\\ C & D \\end{bmatrix}

loses rank below its normal rank.  The pencil is reduced with orthogonal transformations
to a regular pencil that has the finite zeros as its generalized eigenvalues (A. Emami-Naeini
and P. Van Dooren, "Computation of zeros of linear multivariable systems", Automatica
18(4), 415-430, 1982), and the ranks found on the way give the normal rank of the transfer
matrix and the number of zeros at infinity.  The same pencil serves continuous time
(``λ = s``) and discrete time (``λ = z``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.equilibration import equilibrate
from plantcore.core.model import as_model
from plantcore.core.rank import RankDecision, any_fragile, decide_rank, resolve_tolerance
from plantcore.core.safe_norms import frobenius, frobenius_of_columns, frobenius_of_rows
from plantcore.structure.minimal import minimal_realization
from plantcore.structure.pbh_measures import threads_by_size

__all__ = ["TransmissionZeros", "transmission_zeros"]


@dataclass(frozen=True)
class TransmissionZeros:
    """The zeros of a model, with the rank decisions that found them.

    Attributes
    ----------
    finite_zeros : (k,) complex ndarray
        The finite zeros with multiplicity, sorted by real part, then imaginary part
        (conjugate pairs are exact conjugates).  ``s`` values in continuous time, ``z``
        values in discrete time.
    infinite_zero_count : int
        The number of zeros at infinity, each counted with its order (a strictly proper
        single-input single-output model of relative degree ``r`` has ``r``).
    normal_rank : int
        The normal rank of the transfer matrix (its rank at almost every ``s`` or ``z``).
    realization : str
        ``"minimal"`` when the zeros are those of the model's minimal realization (the
        transmission zeros), ``"as_given"`` when they are the invariant zeros of the
        realization itself (decoupling zeros included).
    decisions : tuple of RankDecision
        Every rank decision, with its margin: those of the minimal realization (when it
        was taken), then the compressions of the reduction, labelled ``"zeros: ..."``.
    """

    finite_zeros: np.ndarray = field(repr=True)
    infinite_zero_count: int
    normal_rank: int
    realization: str
    decisions: tuple = field(default=(), repr=False)

    @property
    def fragile(self) -> bool:
        """True when some rank decision lies near its tolerance (see ``RankDecision``)."""
        return any_fragile(self.decisions)


@threads_by_size()
def transmission_zeros(model, *, tol=None, realization="minimal") -> TransmissionZeros:
    """The finite zeros, the number of zeros at infinity and the normal rank of a model.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Any number of inputs and outputs (not necessarily square), continuous or discrete.
    tol : float, optional
        Relative rank tolerance; default ``5e-11`` (see :mod:`plantcore.core.rank`), applied
        to singular values divided by the size of the system matrix
        ``max(||A||_F, ||B||_F, ||C||_F, ||D||_F)`` after the power-of-two state scaling of
        :mod:`plantcore.core.equilibration` (which leaves the zeros unchanged).
    realization : {"minimal", "as_given"}
        ``"minimal"`` (default): the zeros of the minimal realization, that is the
        transmission zeros of the transfer matrix.  ``"as_given"``: the invariant zeros of
        the realization itself, which also holds the decoupling zeros (an uncontrollable or
        unobservable mode can be one).

    Returns
    -------
    TransmissionZeros

    Notes
    -----
    Reduction (Emami-Naeini and Van Dooren 1982, section 3).  An orthogonal row compression
    of ``D`` splits the output rows into ``σ`` rows with full-rank ``D`` part and ``τ``
    rows ``[C̃, 0]``.  When ``C̃`` has rank ``ρ > 0``, an orthogonal change of state
    coordinates ``x = V [z1; z2]`` makes ``C̃ V = [0, C12]`` with ``C12`` (``ρ x ρ``)
    invertible after a row compression.  ``C̃ x = 0`` forces ``z2 = 0``, so the columns
    of ``z2`` leave the pencil together with these rows, and the rows of ``A - λI`` that
    belonged to ``z2`` lose their ``λ``: they become outputs.  The new model is
    ``(A11, B1, [A21; Ĉ1], [B2; D̂])`` with ``n - ρ`` states, and has the same finite
    zeros.  This repeats until ``D`` has full row rank; the same reduction of the dual
    model then makes ``D`` square and invertible, of the size ``r`` of the normal rank.
    A last orthogonal compression of the columns of ``[C, D]`` turns the square pencil
    into ``[[A_z - λ E_z, *], [0, X]]`` with ``X`` invertible, and the finite zeros are
    the generalized eigenvalues of ``(A_z, E_z)`` (QZ algorithm).

    The rank ``σ_k`` of the ``D`` part at step ``k`` of the first reduction is the rank
    gained by the ``k``-th block Toeplitz matrix of Markov parameters, that is the number
    of zeros at infinity of order at most ``k``; so there are ``r - σ_k`` of order more
    than ``k``, and the number of zeros at infinity is ``Σ_k (r - σ_k)``.

    Every rank is decided from singular values and recorded with its margin; near-rank
    deficient ``D`` or ``C̃`` blocks make the answer fragile, and a zero that depends on
    such a decision can move far (zeros are as ill-conditioned as the pencil near them).

    Each step transforms the whole remaining model, ``O(n^3)``, and a chain that loses one
    state per step needs ``n`` steps: ``O(n^4)`` at worst.

    References
    ----------
    .. [1] A. Emami-Naeini and P. Van Dooren, "Computation of zeros of linear multivariable
       systems", Automatica 18(4), 415-430, 1982.
    .. [2] C. B. Moler and G. W. Stewart, "An algorithm for generalized matrix eigenvalue
       problems", SIAM J. Numer. Anal. 10(2), 241-256, 1973.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> model = pc.from_transfer_function([1.0, 3.0], [1.0, 6.0, 11.0, 6.0])  # (s+3)/((s+1)(s+2)(s+3))
    >>> pc.transmission_zeros(model, realization="as_given").finite_zeros.real.round(12)
    array([-3.])
    >>> pc.transmission_zeros(model).finite_zeros.size   # the minimal realization cancels it
    0
    """
    if realization not in _REALIZATIONS:
        raise ValueError(f"realization must be one of {sorted(_REALIZATIONS)}, got {realization!r}.")
    model = as_model(model)
    decisions: list[RankDecision] = []
    if realization == "minimal":
        # (a removed unstable mode is not warned about to plantcore's own callers)
        minimal = minimal_realization(model, tol)
        decisions.extend(minimal.decisions)
        model = minimal.model
    tol = resolve_tolerance(tol, model.n)
    eq = equilibrate(model.A, model.B, model.C)
    A, B, C = eq.apply(model.A, model.B, model.C)
    A, B, C, D, time_scale = _exactly_rescaled(A, B, C, np.array(model.D, dtype=float))
    scale = max(float(frobenius(X)) for X in (A, B, C, D)) if A.size or D.size else 0.0

    A, B, C, D, ranks = _reduce(A, B, C, D, scale, tol, "zeros: ", decisions)
    At, Bt, Ct, Dt, _ = _reduce(A.T, C.T, B.T, D.T, scale, tol, "zeros, dual: ", decisions)
    A, B, C, D = At.T, Ct.T, Bt.T, Dt.T
    rank = D.shape[0]
    infinite = sum(rank - sigma for sigma in ranks)
    return TransmissionZeros(_finite_zeros(A, B, C, D) / time_scale, int(infinite), int(rank),
                             realization, tuple(decisions))


def _exactly_rescaled(A, B, C, D):
    """A model with the same zeros up to one factor, with A of unit size and B, C like A.

    ``[alpha A - mu I, alpha B; C, D]`` has the rank of ``[A - lambda I, B; C, D]`` at
    ``mu = alpha lambda`` (scale the first block row), so the zeros of
    ``(alpha A, alpha B, C, D)`` are ``alpha`` times the zeros of the model; scaling the
    inputs (columns of B and D) and outputs (rows of C and D) leaves the zeros as they are.
    With powers of two every entry is scaled exactly.  Rank decisions are relative to the
    largest block, so an A of 1e300 beside B and C of 1, or a B of 2^100 beside a C of
    2^-100 (a scalar change of state units), is decided on a model whose blocks have the
    same size.  Where the scaled D would overflow, or a nonzero D would underflow to zero,
    only the time scaling of a large A is kept.  Returns the scaled matrices and ``alpha``:
    the zeros of the given model are those found divided by ``alpha``.
    """
    norm_A = frobenius(A)
    if not A.size or norm_A == 0.0:
        return A, B, C, D, 1.0
    alpha = 2.0 ** -math.frexp(norm_A)[1]
    A1, B1 = A * alpha, B * alpha
    size = frobenius(A1)
    g_in = np.array([2.0 ** round(math.log2(size / v)) if v > 0 else 1.0
                     for v in frobenius_of_columns(B1)]) if B1.size else np.ones(B.shape[1])
    g_out = np.array([2.0 ** round(math.log2(size / v)) if v > 0 else 1.0
                      for v in frobenius_of_rows(C)]) if C.size else np.ones(C.shape[0])
    with np.errstate(over="ignore", under="ignore"):
        D2 = g_out[:, None] * D * g_in[None, :]
    if np.all(np.isfinite(D2)) and np.array_equal(D2 != 0, D != 0):
        return A1, B1 * g_in[None, :], g_out[:, None] * C, D2, alpha
    if norm_A > 1.0:
        return A1, B1, C, D, alpha
    return A, B, C, D, 1.0


_REALIZATIONS = {"minimal", "as_given"}


def _reduce(A, B, C, D, scale, tol, label, decisions):
    """Reduce ``(A, B, C, D)`` until ``D`` has full row rank, keeping the finite zeros.

    Returns the reduced matrices and the rank ``σ_k`` of the ``D`` part at each step
    (the last one is the final number of rows).
    """
    ranks = []
    step = 0
    while True:
        step += 1
        p, m = D.shape
        n = A.shape[0]
        U, s_d, _ = np.linalg.svd(D, full_matrices=True) if D.size else (np.eye(p), np.zeros(0), None)
        dec = decide_rank(s_d, scale, tol, f"{label}rank of the feedthrough part, step {step}")
        if p and m:
            decisions.append(dec)
        sigma = dec.rank
        ranks.append(sigma)
        UtC = U.T @ C
        UtD = U.T @ D
        C_hat, D_hat = UtC[:sigma], UtD[:sigma]
        C_rest = UtC[sigma:]
        if p - sigma == 0:
            return A, B, C_hat, D_hat, ranks
        if n == 0:
            ranks[-1] = sigma
            return A, B, C_hat, D_hat, ranks
        _, s_c, Vt = np.linalg.svd(C_rest, full_matrices=True)
        dec_c = decide_rank(s_c, scale, tol, f"{label}rank of the state rows without feedthrough, step {step}")
        decisions.append(dec_c)
        rho = dec_c.rank
        if rho == 0:
            # the rows C_rest are zero: they lower the normal rank and are dropped
            return A, B, C_hat, D_hat, ranks
        # x = V z with z = [z1; z2]: z2 = the row space of C_rest (rho states), z1 its kernel
        V = np.hstack([Vt[rho:].T, Vt[:rho].T])
        k = n - rho
        Av = V.T @ A @ V
        Bv = V.T @ B
        Cv = C_hat @ V
        A, B = Av[:k, :k], Bv[:k]
        C = np.vstack([Av[k:, :k], Cv[:, :k]])
        D = np.vstack([Bv[k:], D_hat])


def _finite_zeros(A, B, C, D) -> np.ndarray:
    """Generalized eigenvalues of the regular pencil left by the reductions (D square, invertible)."""
    n, r = A.shape[0], D.shape[0]
    if n == 0:
        return np.zeros(0, dtype=complex)
    if r == 0:
        values = scipy.linalg.eigvals(A)
    else:
        # [C, D] W = [0, X]: the first n columns of W span the kernel of [C, D]
        Q, _ = scipy.linalg.qr(np.hstack([C, D]).T)
        N = Q[:, r:]
        A_z = np.hstack([A, B]) @ N
        E_z = N[:n, :]
        alpha, beta = scipy.linalg.eigvals(A_z, E_z, homogeneous_eigvals=True)
        finite = np.abs(beta) > 0.0
        values = alpha[finite] / beta[finite]
    return _sorted_conjugate_pairs(values)


def _sorted_conjugate_pairs(values) -> np.ndarray:
    """Values sorted by real then imaginary part, real ones made exactly real and each
    complex one paired with the exact conjugate of its partner."""
    values = np.asarray(values, dtype=complex)
    scale = max(1.0, float(np.max(np.abs(values)))) if values.size else 1.0
    tiny = 1e2 * np.finfo(float).eps * scale
    real = np.abs(values.imag) <= tiny
    out = list(values[real].real.astype(complex))
    upper = values[~real & (values.imag > 0)]
    lower = list(values[~real & (values.imag < 0)])
    for v in upper:
        if lower:
            j = int(np.argmin([abs(w - np.conj(v)) for w in lower]))
            w = lower.pop(j)
            v = 0.5 * (v + np.conj(w))
        out.extend([v, np.conj(v)])
    out.extend(lower)
    out = np.array(out, dtype=complex)
    return out[np.lexsort((out.imag, out.real))] if out.size else out
