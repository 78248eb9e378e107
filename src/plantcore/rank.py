"""Rank decisions, their margins, the default tolerance, and equilibration.

Every numerical rank that plantcore decides is decided from singular values (of a small
block produced by orthogonal transformations, never of a Krylov matrix) and recorded as a
:class:`RankDecision`.  A decision is *fragile* when a kept or dropped singular value lies
within a factor :data:`FRAGILITY_FACTOR` of the tolerance, which means that a modestly
different tolerance would change the answer.

Default tolerance
-----------------
Ranks are decided on the equilibrated model (see :func:`equilibrate`), with singular values
measured **relative to the model's scale** ``max(||A||_F, ||B||_F, ||C||_F)`` (after input and
output columns/rows have been scaled to that size, see :func:`io_scaled`).  The default
relative tolerance is :data:`DEFAULT_RELATIVE_TOLERANCE` ``= 3e-11``, chosen as follows:

* A model that went through a similarity transformation of condition number up to about
  ``1e3`` carries rounding noise near ``1e3 * eps ~ 2e-13`` relative.  Such noise must be
  dropped, and not fragile: ``2e-13 <= tol / 100`` requires ``tol >= 2e-11``.
* Couplings of ``1e-8`` relative and above are real and must be kept, and not fragile:
  ``1e-8 >= 100 * tol`` requires ``tol <= 1e-10``.

``3e-11`` lies between the two limits, a little closer to the noise side.  For large models
the tolerance grows as ``max(3e-11, 20 * n * eps)`` so that the rounding of the
decomposition itself (``O(n eps)`` by the standard backward-error analysis of Householder
transformations; Higham, *Accuracy and Stability of Numerical Algorithms*, 2002, ch. 19)
stays below it; up to n = 6800 the first term rules.  A user tolerance ``tol`` is also
relative to the model's scale.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import lapack

__all__ = [
    "RankDecision",
    "DEFAULT_RELATIVE_TOLERANCE",
    "FRAGILITY_FACTOR",
    "resolve_tolerance",
    "decide_rank",
    "any_fragile",
    "Equilibration",
    "equilibrate",
]

DEFAULT_RELATIVE_TOLERANCE = 5e-11
FRAGILITY_FACTOR = 100.0
_EPS = np.finfo(float).eps


@dataclass(frozen=True)
class RankDecision:
    """One numerical rank decision.

    Attributes
    ----------
    label : str
        What was decided, e.g. ``"controllability step 2"``.
    rank : int
        The rank decided (number of singular values kept).
    size : int
        How many singular values were examined.
    smallest_kept : float
        Smallest singular value kept, relative to the model's scale; ``inf`` when none kept.
    largest_dropped : float
        Largest singular value dropped, relative to the model's scale; ``0.0`` when none.
    tolerance : float
        The relative tolerance used.
    conflict : bool
        True when this decision is a cross-check that contradicts another decision (see
        :mod:`plantcore._crosscheck`); the answer then depends on the method and is fragile.
    check_only : bool
        True for a one-sided cross-check: it decides nothing itself, so only a
        ``conflict`` (not its margins) makes it fragile.
    """

    label: str
    rank: int
    size: int
    smallest_kept: float
    largest_dropped: float
    tolerance: float
    conflict: bool = False
    check_only: bool = False

    @property
    def margin(self) -> float:
        """How far the decision is from the tolerance, as a factor (>= 1; large is safe).

        The smaller of ``smallest_kept / tolerance`` and ``tolerance / largest_dropped``.
        """
        up = self.smallest_kept / self.tolerance if self.tolerance > 0 else math.inf
        down = self.tolerance / self.largest_dropped if self.largest_dropped > 0 else math.inf
        return min(up, down)

    @property
    def fragile(self) -> bool:
        """True when a kept or dropped value lies within a factor 100 of the tolerance, or
        when this cross-check contradicts the decision it checks."""
        if self.check_only:
            return self.conflict
        return self.conflict or self.margin < FRAGILITY_FACTOR

    def to_dict(self) -> dict:
        """JSON-safe dictionary (``inf`` becomes ``None``)."""
        def safe(x):
            return None if not math.isfinite(x) else float(x)

        return {
            "label": self.label,
            "rank": self.rank,
            "size": self.size,
            "smallest_kept": safe(self.smallest_kept),
            "largest_dropped": float(self.largest_dropped),
            "tolerance": float(self.tolerance),
            "margin": safe(self.margin),
            "fragile": self.fragile,
            "conflict": self.conflict,
        }

    def describe(self) -> str:
        """One line for reports."""
        kept = "none" if not math.isfinite(self.smallest_kept) else f"{self.smallest_kept:.3g}"
        flag = "  CONFLICT" if self.conflict else ("  FRAGILE" if self.fragile else "")
        return (f"{self.label}: rank {self.rank} of {self.size}; smallest kept {kept}, "
                f"largest dropped {self.largest_dropped:.3g}, tolerance {self.tolerance:.3g}{flag}")


def resolve_tolerance(tol, n: int) -> float:
    """The relative tolerance to use: ``tol`` if given, else the documented default."""
    if tol is None:
        return max(DEFAULT_RELATIVE_TOLERANCE, 20.0 * n * _EPS)
    if isinstance(tol, bool):
        raise ValueError(f"tol must be a positive number, got {tol!r}.")
    try:
        tol = float(tol)
    except (TypeError, ValueError):
        raise ValueError(f"tol must be a positive number, got {tol!r}.") from None
    if not math.isfinite(tol) or tol <= 0.0 or tol >= 1.0:
        raise ValueError(f"tol is relative to the model's scale and must lie in (0, 1), got {tol!r}.")
    return tol


def decide_rank(singular_values, scale: float, tol: float, label: str) -> RankDecision:
    """Decide a rank from singular values (descending) and record the decision.

    Values are divided by ``scale`` and compared with the relative tolerance ``tol``:
    a value is kept when it exceeds ``tol``.
    """
    s = np.asarray(singular_values, dtype=float)
    rel = s / scale if scale > 0 else np.zeros_like(s)
    r = int(np.count_nonzero(rel > tol))
    kept = float(rel[r - 1]) if r > 0 else math.inf
    dropped = float(rel[r]) if r < rel.size else 0.0
    return RankDecision(label, r, int(rel.size), kept, dropped, float(tol))


def any_fragile(decisions) -> bool:
    """True when any decision in the list is fragile."""
    return any(d.fragile for d in decisions)


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
    norm_M = math.sqrt(np.linalg.norm(A) ** 2 + np.linalg.norm(B) ** 2 + np.linalg.norm(C) ** 2)
    if norm_M == 0.0:
        return Equilibration(np.ones(n))
    M = np.zeros((n + k, n + k), order="F")
    # Inputs and outputs first brought to the size of A by powers of two (their units do
    # not matter for ranks), so that an input in large units cannot dominate the balance.
    norm_A = float(np.linalg.norm(A))
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
    sq = np.linalg.norm(B / s[:, None]) ** 2 + np.linalg.norm(C * s[None, :]) ** 2
    step = max(1, (1 << 20) // max(n, 1))
    for i in range(0, n, step):
        rows = A[i:i + step, :] / s[i:i + step, None]
        rows *= s[None, :]
        sq += np.linalg.norm(rows) ** 2
    if math.sqrt(sq) * threshold < norm_M:
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
        for j in range(B.shape[1]):
            nb = np.linalg.norm(B[:, j])
            if nb > 0:
                B[:, j] *= _pow2(scale / nb)
        for i in range(C.shape[0]):
            nc = np.linalg.norm(C[i, :])
            if nc > 0:
                C[i, :] *= _pow2(scale / nc)
    return B, C
