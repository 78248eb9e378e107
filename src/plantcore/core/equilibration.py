"""Exact power-of-two scalings applied before rank decisions.

:func:`equilibrate` chooses a diagonal state scaling of powers of two that balances the
system matrix (so it changes no digit of the data, only the weights the rank decisions see),
and :func:`io_scaled` brings inputs and outputs to the size of ``A`` in the same way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import lapack

from plantcore.core.safe_norms import frobenius

__all__ = ["Equilibration", "equilibrate", "io_scaled"]


@dataclass(frozen=True)
class Equilibration:
    """A diagonal similarity of powers of two applied before deciding ranks.

    The equilibrated model is ``A_e = S^{-1} A S``, ``B_e = S^{-1} B``, ``C_e = C S`` with
    ``S = diag(state_scaling)``: exact in floating point, so it changes no digit of the
    data, only the weights that rank decisions see.
    """

    state_scaling: np.ndarray = field(repr=False)

    @property
    def is_identity(self) -> bool:
        return bool(np.all(self.state_scaling == 1.0))

    def apply(self, A, B, C):
        s = self.state_scaling
        A_e = A / s[:, None]
        A_e *= s[None, :]
        return A_e, B / s[:, None], C * s[None, :]


def _pow2(x):
    """Nearest power of two, with the exponent kept inside the double range."""
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        e = np.clip(np.round(np.log2(x)), -1000.0, 1000.0)
    return np.exp2(e)


def equilibrate(A, B, C, *, threshold: float = 8.0) -> Equilibration:
    """Choose a state scaling of powers of two that balances ``[[A, B], [C, 0]]``.

    The system matrix is embedded in a square matrix (inputs and outputs share padding
    coordinates) and balanced with the Parlett-Reinsch iteration (B. N. Parlett and
    C. Reinsch, "Balancing a matrix for calculation of eigenvalues and eigenvectors",
    Numerische Mathematik 13, 1969), as implemented in LAPACK ``gebal`` without
    permutations.  The state part of the scaling is used.  To keep well-scaled models in
    orthogonal coordinates, the scaling is applied only when it reduces the Frobenius norm
    of the system matrix by more than ``threshold``; otherwise the identity is returned.
    Since only the *ratios* of the scaling matter, a model whose states were rescaled by any
    factors is brought back to (nearly) the same balanced form.
    """
    n = A.shape[0]
    if n == 0:
        return Equilibration(np.ones(0))
    m, p = B.shape[1], C.shape[0]
    k = max(m, p)
    norm_M = frobenius(np.array([frobenius(A), frobenius(B), frobenius(C)]))
    if norm_M == 0.0:
        return Equilibration(np.ones(n))
    M = np.zeros((n + k, n + k), order="F")
    # Inputs and outputs first brought to the size of A by powers of two (their units do
    # not matter for ranks), so that an input in large units cannot dominate the balance.
    norm_A = frobenius(A)
    B_n, C_n = io_scaled(B, C, norm_A if norm_A > 0 else 1.0)
    M[:n, :n] = A
    M[:n, n:n + m] = B_n
    M[n:n + p, :n] = C_n
    # LAPACK gebal, scaling only, on our own copy (what scipy.linalg.matrix_balance calls).
    _, _, _, scale, info = lapack.dgebal(M, scale=1, permute=0, overwrite_a=1)
    del M
    if info != 0:  # pragma: no cover - LAPACK argument error
        raise RuntimeError(f"gebal failed with info={info}")
    s = np.asarray(scale[:n], dtype=float)
    # Normalise so that the io coordinate scaling is one (only ratios matter), as powers of 2.
    if k:
        s = s / np.exp2(np.round(np.log2(np.median(scale[n:]))))
    s = _pow2(s)
    # Frobenius norm of the scaled system matrix, a block of rows at a time.
    pieces = [frobenius(B / s[:, None]), frobenius(C * s[None, :])]
    step = max(1, (1 << 20) // max(n, 1))
    for i in range(0, n, step):
        rows = A[i:i + step, :] / s[i:i + step, None]
        rows *= s[None, :]
        pieces.append(frobenius(rows))
    if frobenius(np.array(pieces)) * threshold < norm_M:
        return Equilibration(s)
    return Equilibration(np.ones(n))


def io_scaled(B, C, scale: float):
    """Scale the columns of ``B`` and rows of ``C`` by powers of two to size ``scale``.

    Rescaling inputs and outputs does not change the controllable or unobservable subspace,
    so rank decisions may use these scaled copies; the returned models keep the user's
    input and output units.
    """
    B = np.array(B, dtype=float)
    C = np.array(C, dtype=float)
    if scale > 0:
        # each column's (row's) norm on its own, as frobenius computes it; the powers of two
        # for all of them in one vectorized call (the same elementwise values)
        B *= _gains(scale, [frobenius(B[:, j]) for j in range(B.shape[1])])[None, :]
        C *= _gains(scale, [frobenius(C[i, :]) for i in range(C.shape[0])])[:, None]
    return B, C


def _gains(scale: float, norms) -> np.ndarray:
    """``_pow2(scale / norm)`` for each positive norm, 1 where a norm is zero."""
    norms = np.asarray(norms, dtype=float)
    out = np.ones(norms.size)
    positive = norms > 0
    if np.any(positive):
        out[positive] = _pow2(scale / norms[positive])
    return out
