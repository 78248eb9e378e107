"""Minimal realization by orthogonal staircase reductions."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .kalman import _controllable_then_observable, _prepare
from .model import StateSpaceModel
from .rank import any_fragile

__all__ = ["MinimalRealization", "minimal_realization"]


@dataclass(frozen=True)
class MinimalRealization:
    """A minimal realization and the projection that produced it.

    Attributes
    ----------
    model : StateSpaceModel
        The minimal model: ``A = W.T @ A_orig @ V``, ``B = W.T @ B_orig``,
        ``C = C_orig @ V``, the same ``D`` and the same time domain.
    order : int
        Number of states kept.
    removed_uncontrollable : int
        States removed because the inputs cannot move them.
    removed_unobservable : int
        Controllable states removed because the outputs cannot see them.
    V, W : (n, order) ndarray
        Right and left bases with ``W.T @ V = I``.  ``V`` maps minimal states to original
        states (``x ≈ V z`` on the controllable, observable part).
    decisions : tuple of RankDecision
    fragile : bool
    """

    model: StateSpaceModel
    order: int
    removed_uncontrollable: int
    removed_unobservable: int
    V: np.ndarray = field(repr=False)
    W: np.ndarray = field(repr=False)
    decisions: tuple
    fragile: bool


def minimal_realization(model, tol=None) -> MinimalRealization:
    """Remove the uncontrollable and then the unobservable states.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance; default ``3e-11`` of the model's scale (see
        :mod:`plantcore.rank`).

    Returns
    -------
    MinimalRealization

    Notes
    -----
    Two orthogonal staircase reductions of the equilibrated model: the controllability
    staircase keeps the controllable part ``(A11, B1, C1)``; the observability staircase of
    that part keeps its observable part.  Only orthogonal transformations and an exact
    power-of-two diagonal scaling are used, so the minimal model is obtained in a backward
    stable way (Van Dooren 1981; Varga 1981).  The result is minimal with respect to the
    tolerance; ``fragile`` says when another tolerance would change the order.

    References
    ----------
    .. [1] P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
       IEEE Trans. Automatic Control 26(1), 111-129, 1981.
    .. [2] A. Varga, "Minimal realization procedures based on balancing and related
       techniques", in *Numerical Methods in the Theory of Linear Systems*, 1991.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> g = pc.from_transfer_function([1.0, 1.0], [1.0, 3.0, 2.0])  # (s+1)/((s+1)(s+2))
    >>> mr = pc.minimal_realization(g)
    >>> mr.order
    1
    >>> bool(np.allclose(mr.model.transfer_at(2j), g.transfer_at(2j)))
    True
    """
    p = _prepare(model, tol)
    n = p.model.n
    co = _controllable_then_observable(p)
    nc = co.V_c.shape[1]
    r = co.n1
    X = co.V_c @ co.Z[:, :r]          # orthonormal, equilibrated coordinates
    s = p.s
    V = s[:, None] * X
    W = X / s[:, None]
    A_min = X.T @ p.A @ X
    B_min = X.T @ p.B
    C_min = p.C @ X
    states = tuple(f"z{i + 1}" for i in range(r))
    name = f"{p.model.name} (minimal)" if p.model.name else None
    new = StateSpaceModel(A_min, B_min, C_min, p.model.D, p.model.dt, states=states,
                          inputs=p.model.inputs, outputs=p.model.outputs, name=name)
    return MinimalRealization(new, r, n - nc, nc - r, V, W, co.decisions,
                              any_fragile(co.decisions))
