"""The steady-state (DC) gain of a model, infinite in the channels that see an integrator.

Continuous time: ``G(0) = D - C A^{-1} B``; discrete time: ``G(1) = D + C (I - A)^{-1} B``.
An eigenvalue at ``s = 0`` (``z = 1``) that a channel sees makes that entry infinite, with
the sign its step response grows with; one that no channel sees (an uncontrollable or
unobservable integrator) changes nothing, because the gain is taken from the minimal
realization whenever the model has such an eigenvalue.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.equilibration import equilibrate
from plantcore.core.model import as_model
from plantcore.core.rank import RankDecision, any_fragile, decide_rank, resolve_tolerance
from plantcore.structure.minimal import minimal_realization
from plantcore.structure.pbh_measures import threads_by_size

__all__ = ["SteadyStateGain", "steady_state_gain"]


@dataclass(frozen=True)
class SteadyStateGain:
    """The steady-state gain of each input-output channel.

    Attributes
    ----------
    matrix : (p, m) ndarray
        The gain; ``+inf`` or ``-inf`` where the channel has a pole at ``s = 0``
        (``z = 1``): the sign is that of the leading coefficient ``c`` of
        ``c / s^k`` (``c / (z - 1)^k``), the sign with which the step response grows.
    pole_order : (p, m) int ndarray
        The order ``k`` of that pole in each channel; 0 where the gain is finite.
    integrators : int
        How many eigenvalues at ``s = 0`` (``z = 1``), with multiplicity, the realization
        used has (the minimal one when ``realization == "minimal"``).
    realization : str
        ``"as_given"`` when ``A`` (``I - A``) is nonsingular and the gain was computed on
        the model itself; ``"minimal"`` when the model has an eigenvalue at the point and
        the gain was computed on its minimal realization.
    decisions : tuple of RankDecision
        The rank decisions with their margins: singularity of ``A`` (``A - I``), those of the
        minimal realization, the null-space steps at the point, and one decision per channel
        on whether it sees the integrators.
    """

    matrix: np.ndarray
    pole_order: np.ndarray = field(repr=False)
    integrators: int
    realization: str
    decisions: tuple = field(default=(), repr=False)

    @property
    def fragile(self) -> bool:
        """True when some decision lies near its tolerance (see ``RankDecision``)."""
        return any_fragile(self.decisions)


@threads_by_size()
def steady_state_gain(model, *, tol=None) -> SteadyStateGain:
    """The steady-state gain ``G(0)`` (continuous) or ``G(1)`` (discrete) of every channel.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance; default ``5e-11`` (see :mod:`plantcore.core.rank`).  It
        decides whether ``A`` (``A - I`` in discrete time) is singular, relative to
        ``||A||_F`` after the power-of-two state scaling, and whether a channel sees an
        integrator: the coefficient of ``s^{-(j+1)}`` in entry ``(i, l)``, divided by
        ``||c_i|| ||b_l|| ||A||_F^j``.

    Returns
    -------
    SteadyStateGain

    Notes
    -----
    When ``A`` (``A - I``) is nonsingular at the tolerance, the gain is
    ``D - C A^{-1} B`` (``D - C (A - I)^{-1} B``), by an LU solve; a nearly singular ``A``
    gives a large finite gain and a fragile decision.

    Otherwise the minimal realization is taken (so that hidden integrators do not count),
    and on it ``M = A`` (``A - I``) is brought by orthogonal null-space steps to
    ``V^T M V = [[N, T01], [0, T11]]`` with ``N`` strictly block upper triangular
    (nilpotent) and ``T11`` nonsingular (V. N. Kublanovskaya, "On a method of solving the
    complete eigenvalue problem for a degenerate matrix", USSR Comput. Math. and Math.
    Physics 6(4), 1-14, 1966; G. H. Golub and J. H. Wilkinson, "Ill-conditioned
    eigensystems and the computation of the Jordan canonical form", SIAM Review 18(4),
    578-619, 1976).  A Sylvester equation ``N X - X T11 = -T01`` decouples the two blocks,
    and with ``w = s`` (``w = z - 1``)

    .. math::

        G = \\sum_{j \\ge 0} C_0 N^j \\tilde B_0 \\, w^{-(j+1)}
            + D - (C_0 X + C_1) T_{11}^{-1} B_1 + O(w),
        \\qquad \\tilde B_0 = B_0 - X B_1 .

    An entry whose singular coefficients are all zero at the tolerance takes the finite
    value; otherwise it is ``±inf``, signed by its most singular coefficient (the limit as
    ``s -> 0`` or ``z -> 1`` from above).

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> g = pc.steady_state_gain(pc.from_transfer_function([2.0], [1.0, 4.0]))      # 2 / (s + 4)
    >>> float(g.matrix[0, 0])
    0.5
    >>> float(pc.steady_state_gain(pc.from_transfer_function([-3.0], [1.0, 2.0, 0.0])).matrix[0, 0])
    -inf
    """
    model = as_model(model)
    tol = resolve_tolerance(tol, model.n)
    p, m = model.n_outputs, model.n_inputs
    decisions: list[RankDecision] = []
    A, B, C = _equilibrated(model)
    M = _shifted(A, model.is_discrete)
    scale = float(np.linalg.norm(A))
    if model.n:
        s = scipy.linalg.svdvals(M)
        first = decide_rank(s, scale, tol, "dc gain: rank of " + _name(model.is_discrete))
        decisions.append(first)
    if model.n == 0 or first.rank == model.n:
        gain = model.D - (C @ np.linalg.solve(M, B) if model.n else 0.0)
        return SteadyStateGain(np.array(gain, dtype=float), np.zeros((p, m), dtype=int), 0,
                               "as_given", tuple(decisions))

    # (a removed unstable mode is not warned about to plantcore's own callers)
    minimal = minimal_realization(model, tol)
    decisions.extend(minimal.decisions)
    A, B, C = _equilibrated(minimal.model)
    M = _shifted(A, model.is_discrete)
    scale = float(np.linalg.norm(A))
    V, sizes = _nilpotent_split(M, scale, tol, decisions)
    k = sum(sizes)
    T = V.T @ M @ V
    Bh, Ch = V.T @ B, C @ V
    N, T01, T11 = _strictly_block_upper(T[:k, :k], sizes), T[:k, k:], T[k:, k:]
    B0, B1, C0, C1 = Bh[:k], Bh[k:], Ch[:, :k], Ch[:, k:]
    if T11.size:
        X = scipy.linalg.solve_sylvester(N, -T11, -T01)
        finite = minimal.model.D - (C0 @ X + C1) @ np.linalg.solve(T11, B1)
        B0 = B0 - X @ B1
    else:
        finite = np.array(minimal.model.D, dtype=float)
    gain, order = _channels(N, B0, C0, B, C, scale, finite, tol, decisions, minimal.model)
    return SteadyStateGain(gain, order, int(k), "minimal", tuple(decisions))


def _equilibrated(model):
    eq = equilibrate(model.A, model.B, model.C)
    return eq.apply(model.A, model.B, model.C)


def _shifted(A, discrete: bool) -> np.ndarray:
    return A - np.eye(A.shape[0]) if discrete else np.array(A, dtype=float)


def _name(discrete: bool) -> str:
    return "A - I" if discrete else "A"


def _nilpotent_split(M, scale, tol, decisions) -> tuple[np.ndarray, list]:
    """Orthogonal ``V`` and block sizes ``k_1, k_2, ...`` such that the leading block of
    ``V^T M V`` (size ``Σ k_i``) is strictly block upper triangular with these diagonal
    blocks, up to what the rank decisions dropped, and the trailing block is nonsingular
    (the null-space steps; each step's rank is a recorded decision)."""
    n = M.shape[0]
    V = np.eye(n)
    k = 0
    sizes = []
    step = 0
    while k < n:
        step += 1
        R = (V.T @ M @ V)[k:, k:]
        _, s, Wt = np.linalg.svd(R)
        dec = decide_rank(s, scale, tol, f"dc gain: null-space step {step} at the point")
        decisions.append(dec)
        nullity = R.shape[0] - dec.rank
        if nullity == 0:
            break
        # kernel directions first
        W = np.hstack([Wt[dec.rank:].T, Wt[:dec.rank].T])
        V[:, k:] = V[:, k:] @ W
        k += nullity
        sizes.append(nullity)
    return V, sizes


def _strictly_block_upper(T, sizes) -> np.ndarray:
    """``T`` with its diagonal blocks and everything below them set to zero (the rounding
    the null-space steps decided to drop)."""
    out = np.zeros_like(T)
    start = 0
    for size in sizes:
        out[:start, start:start + size] = T[:start, start:start + size]
        start += size
    return out


def _channels(N, B0, C0, B, C, scale, finite, tol, decisions, model):
    p, m = finite.shape
    k = N.shape[0]
    if k == 0:    # every integrator was hidden and left with the minimal realization
        return np.array(finite, dtype=float), np.zeros((p, m), dtype=int)
    coefficients = []
    power = np.eye(k)
    for j in range(k):
        coefficients.append(C0 @ power @ B0)
        power = power @ N
    gain = np.array(finite, dtype=float)
    order = np.zeros((p, m), dtype=int)
    for i in range(p):
        for col in range(m):
            size = float(np.linalg.norm(C[i])) * float(np.linalg.norm(B[:, col]))
            rel = [abs(c[i, col]) / (size * scale ** j) if size > 0 else 0.0
                   for j, c in enumerate(coefficients)]
            label = f"dc gain: {model.outputs[i]} sees an integrator through {model.inputs[col]}"
            dec = decide_rank([max(rel)], 1.0, tol, label)
            decisions.append(dec)
            if dec.rank:
                j = max(j for j, r in enumerate(rel) if r > tol)
                gain[i, col] = math.copysign(math.inf, coefficients[j][i, col])
                order[i, col] = j + 1
    return gain, order
