"""The four-part Kalman decomposition.

The state space splits into four parts, in this order:

1. ``controllable_observable``: a complement of (R ∩ N) in R,
2. ``controllable_unobservable``: R ∩ N,
3. ``uncontrollable_observable``: a complement of R + N,
4. ``uncontrollable_unobservable``: a complement of (R ∩ N) in N,

where R is the controllable subspace and N the unobservable subspace.  In these
coordinates (``x = T z``) the model has the exact zero pattern::

    A = [[A11, 0,   A13, 0  ],      B = [[B1],      C = [C1, 0, C3, 0]
         [A21, A22, A23, A24],           [B2],
         [0,   0,   A33, 0  ],           [0 ],
         [0,   0,   A43, A44]]           [0 ]]
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
import scipy.linalg

from .errors import NumericalBreakdown
from .model import StateSpaceModel, as_model
from .rank import RankDecision, any_fragile, equilibrate, io_scaled, resolve_tolerance
from .staircase import _scale_of, _staircase_core

__all__ = ["PartSizes", "KalmanDecomposition", "kalman_decomposition", "PART_NAMES"]

PART_NAMES = (
    "controllable_observable",
    "controllable_unobservable",
    "uncontrollable_observable",
    "uncontrollable_unobservable",
)


class PartSizes(NamedTuple):
    """Dimensions of the four Kalman parts, in state order."""

    controllable_observable: int
    controllable_unobservable: int
    uncontrollable_observable: int
    uncontrollable_unobservable: int


@dataclass(frozen=True)
class _Prepared:
    """A model with its equilibration and rank-decision scaling (internal)."""

    model: StateSpaceModel
    tol: float
    s: np.ndarray          # state scaling, x = diag(s) x_e
    A: np.ndarray          # equilibrated
    B: np.ndarray          # equilibrated, user input units
    C: np.ndarray          # equilibrated, user output units
    B_dec: np.ndarray      # inputs rescaled for rank decisions
    C_dec: np.ndarray      # outputs rescaled for rank decisions
    scale: float


def _prepare(model, tol) -> _Prepared:
    model = as_model(model)
    tol = resolve_tolerance(tol, model.n)
    eq = equilibrate(model.A, model.B, model.C)
    A, B, C = eq.apply(model.A, model.B, model.C)
    scale = _scale_of(A, B, C)
    B_dec, C_dec = io_scaled(B, C, scale)
    return _Prepared(model, tol, eq.state_scaling, A, B, C, B_dec, C_dec, scale)


@dataclass(frozen=True)
class _ControllableObservable:
    """Orthonormal bases (equilibrated coordinates) from the two nested staircases."""

    V_c: np.ndarray        # n x nc, controllable subspace
    Z: np.ndarray          # nc x nc orthogonal; first n1 columns: observable part of (A11, C1)
    n1: int
    decisions: tuple


def _controllable_then_observable(p: _Prepared) -> _ControllableObservable:
    """Controllability staircase, then the observability staircase of the controllable part."""
    n = p.model.n
    A_t, _, _, U, blocks, dec_c = _staircase_core(
        p.A, p.B_dec, np.zeros((0, n)), scale=p.scale, tol=p.tol, label="controllability")
    nc = int(sum(blocks))
    V_c = U[:, :nc]
    A11 = A_t[:nc, :nc]
    C1 = p.C_dec @ V_c
    _, _, _, Z, blocks_o, dec_o = _staircase_core(
        A11.T, C1.T, np.zeros((0, nc)), scale=p.scale, tol=p.tol,
        label="observability of the controllable part")
    n1 = int(sum(blocks_o))
    return _ControllableObservable(V_c, Z, n1, tuple(dec_c) + tuple(dec_o))


@dataclass(frozen=True)
class KalmanDecomposition:
    """The Kalman decomposition of a model.

    Attributes
    ----------
    model : StateSpaceModel
        The model in the new coordinates ``z`` (``x = T z``), with the zero pattern exact.
    T, T_inv : (n, n) ndarray
        The transformation and its inverse.
    condition : float
        2-norm condition number of ``T``.  The parts are orthonormal within themselves, but
        parts 3 and 4 are not orthogonal to parts 1 and 2 in general; a large condition
        number means the parts are nearly dependent (nearly unobservable or uncontrollable
        directions close to the others).
    sizes : PartSizes
        Dimensions of the four parts.
    decisions : tuple of RankDecision
        Every rank decision, from the three staircases involved.
    fragile : bool
        True when any decision lies within a factor 100 of the tolerance.
    residual : float
        Largest entry that was set to zero to impose the zero pattern, relative to the norm
        of the block it lies in (``A``, ``B`` or ``C``); a measure of the accuracy reached.
    """

    model: StateSpaceModel
    T: np.ndarray = field(repr=False)
    T_inv: np.ndarray = field(repr=False)
    condition: float
    sizes: PartSizes
    decisions: tuple
    fragile: bool
    residual: float

    def _slice(self, name: str) -> slice:
        if name not in PART_NAMES:
            raise ValueError(f"unknown part {name!r}; choose one of {', '.join(PART_NAMES)}.")
        i = PART_NAMES.index(name)
        start = sum(self.sizes[:i])
        return slice(start, start + self.sizes[i])

    def part(self, name: str) -> StateSpaceModel:
        """The diagonal block of one part, with its rows of ``B`` and columns of ``C``.

        The part carries the model's ``D``, so ``part("controllable_observable")`` has the
        transfer function of the whole model.
        """
        sl = self._slice(name)
        m = self.model
        return StateSpaceModel(m.A[sl, sl], m.B[sl, :], m.C[:, sl], m.D, m.dt,
                               inputs=m.inputs, outputs=m.outputs,
                               name=f"{m.name or 'model'}: {name.replace('_', ' ')}")

    def basis(self, name: str) -> np.ndarray:
        """The columns of ``T`` spanning one part, in the original state coordinates."""
        return self.T[:, self._slice(name)].copy()


def _complement(M: np.ndarray, n: int) -> np.ndarray:
    """Orthonormal basis of the orthogonal complement of the columns of ``M``."""
    k = M.shape[1]
    if k == 0:
        return np.eye(n)
    Q, _ = scipy.linalg.qr(M, mode="full")
    return Q[:, k:]


def kalman_decomposition(model, tol=None) -> KalmanDecomposition:
    """Split a model into its four Kalman parts.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance; default ``3e-11`` of the model's scale, as for
        :func:`plantcore.controllability_staircase` (see :mod:`plantcore.rank`).

    Returns
    -------
    KalmanDecomposition

    Notes
    -----
    The construction uses three orthogonal staircase reductions on the equilibrated model
    (Van Dooren 1981; Varga 1981) and never the Krylov matrix:

    * the controllability staircase gives an orthonormal basis ``V_c`` of R;
    * the observability staircase of the controllable part ``(A11, C V_c)`` splits R into
      R ∩ N (part 2) and its orthogonal complement in R (part 1);
    * the observability staircase of the *whole* model gives N.  Part 4 is the orthogonal
      complement of R ∩ N inside N.  (Splitting the uncontrollable quotient system on its
      own would be wrong: an uncontrollable state may be seen only through its coupling
      into controllable, measured states.)
    * part 3 is the orthogonal complement of R + N.

    Each part has an orthonormal basis; ``T`` is well conditioned unless N is nearly
    inside R + (part 3) directions, which ``condition`` reports.  The zero pattern is then
    imposed exactly and the size of what was zeroed is reported as ``residual``.

    The two rank decisions that determine N and R ∩ N are made separately; when they are
    not consistent (only possible when a decision is fragile), a
    :class:`plantcore.NumericalBreakdown` is raised naming the tolerance to change.

    References
    ----------
    .. [1] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.
    .. [2] P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
       IEEE Trans. Automatic Control 26(1), 111-129, 1981.
    .. [3] A. Varga, "Numerically stable algorithm for standard controllability form
       determination", Electronics Letters 17(2), 74-75, 1981.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -2.0, -3.0, -4.0])
    >>> B = np.array([[1.0], [1.0], [0.0], [0.0]])
    >>> C = np.array([[1.0, 0.0, 1.0, 0.0]])
    >>> kd = pc.kalman_decomposition((A, B, C))
    >>> tuple(kd.sizes)
    (1, 1, 1, 1)
    >>> bool(np.allclose(kd.T @ kd.model.A @ kd.T_inv, A))
    True
    """
    p = _prepare(model, tol)
    n = p.model.n
    co = _controllable_then_observable(p)
    nc = co.V_c.shape[1]
    n1 = co.n1
    n2 = nc - n1
    T1 = co.V_c @ co.Z[:, :n1]
    T2 = co.V_c @ co.Z[:, n1:]
    # Unobservable subspace of the whole model.
    _, _, _, U_o, blocks_o, dec_o = _staircase_core(
        p.A.T, p.C_dec.T, np.zeros((0, n)), scale=p.scale, tol=p.tol, label="observability")
    no = int(sum(blocks_o))
    W_n = U_o[:, no:]
    nN = n - no
    decisions = co.decisions + tuple(dec_o)
    if n2 > nN:
        raise NumericalBreakdown(
            f"the rank decisions disagree: the controllable part has {n2} unobservable "
            f"directions but the whole model only {nN}; the answer depends on the tolerance "
            f"(tol={p.tol:g}); try a different tol.",
            {"n2": n2, "nN": nN, "decisions": decisions})
    P = W_n.T @ T2  # nN x n2, orthonormal columns when R ∩ N lies in N
    if n2:
        cosines = np.linalg.svd(P, compute_uv=False)
        if cosines.min() < 0.5:
            raise NumericalBreakdown(
                "the unobservable directions found inside the controllable subspace do not lie "
                f"in the unobservable subspace (smallest cosine {cosines.min():.3g}); the answer "
                f"depends on the tolerance (tol={p.tol:g}); try a different tol.",
                {"cosines": cosines, "decisions": decisions})
    Qp, _ = scipy.linalg.qr(P, mode="full") if nN else (np.zeros((0, 0)), None)
    T4 = W_n @ Qp[:, n2:] if nN else np.zeros((n, 0))
    n4 = T4.shape[1]
    if n1 + n2 + n4 > n:
        raise NumericalBreakdown(
            f"the rank decisions disagree: a controllable subspace of dimension {nc} and an "
            f"unobservable subspace of dimension {nN} meeting in dimension {n2} do not fit in "
            f"{n} states; the answer depends on the tolerance (tol={p.tol:g}); see the "
            "fragile decisions and try a different tol.",
            {"sizes": (n1, n2, n4), "decisions": decisions})
    M = np.hstack([T1, T2, T4])
    T3 = _complement(M, n)
    n3 = T3.shape[1]
    T_e = np.hstack([T1, T2, T3, T4])
    if n:
        sv = np.linalg.svd(T_e, compute_uv=False)
        if sv[-1] <= np.finfo(float).eps * n * sv[0]:
            raise NumericalBreakdown(
                "the four parts are linearly dependent (the transformation is singular); the "
                f"answer depends on the tolerance (tol={p.tol:g}).", {"singular_values": sv})
        Ti_e = np.linalg.solve(T_e, np.eye(n))
    else:
        sv = np.ones(1)
        Ti_e = np.zeros((0, 0))
    s = p.s
    T = s[:, None] * T_e
    T_inv = Ti_e / s[None, :]
    Az = Ti_e @ p.A @ T_e
    Bz = Ti_e @ p.B
    Cz = p.C @ T_e
    sizes = PartSizes(n1, n2, n3, n4)
    residual = _impose_zero_pattern(Az, Bz, Cz, sizes)
    states = tuple(f"z{i + 1}" for i in range(n))
    new = StateSpaceModel(Az, Bz, Cz, p.model.D, p.model.dt, states=states,
                          inputs=p.model.inputs, outputs=p.model.outputs, name=p.model.name)
    condition = float(sv[0] / sv[-1]) if n else 1.0
    return KalmanDecomposition(new, T, T_inv, condition, sizes, decisions,
                               any_fragile(decisions), residual)


def _impose_zero_pattern(A, B, C, sizes) -> float:
    """Set the structural zeros exactly (in place); return the largest relative entry zeroed."""
    cuts = np.cumsum((0,) + tuple(sizes))
    blk = [slice(cuts[i], cuts[i + 1]) for i in range(4)]
    zero_A = [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]
    res = 0.0
    nA = max(np.linalg.norm(A), np.finfo(float).tiny)
    nB = max(np.linalg.norm(B), np.finfo(float).tiny)
    nC = max(np.linalg.norm(C), np.finfo(float).tiny)
    for i, j in zero_A:
        sub = A[blk[i], blk[j]]
        if sub.size:
            res = max(res, np.abs(sub).max() / nA)
            A[blk[i], blk[j]] = 0.0
    for i in (2, 3):
        sub = B[blk[i], :]
        if sub.size:
            res = max(res, np.abs(sub).max() / nB)
            B[blk[i], :] = 0.0
    for j in (1, 3):
        sub = C[:, blk[j]]
        if sub.size:
            res = max(res, np.abs(sub).max() / nC)
            C[:, blk[j]] = 0.0
    return float(res)
