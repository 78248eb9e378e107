"""Minimal realization by orthogonal staircase reductions."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import StateSpaceModel
from plantcore.core.rank import any_fragile
from plantcore.core.errors import NumericalBreakdown
from plantcore.structure.kalman import _decompose, _prepare, _start
from plantcore.structure.reconcile import certificate_decisions, confirm_window

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
        Relative rank tolerance; default ``5e-11`` of the model's scale (see
        :mod:`plantcore.core.rank`).

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
    tolerance; ``fragile`` says when another tolerance would change the order.  The minimal
    model is the leading block of the second staircase form (equal to ``W.T @ A @ V`` up to
    rounding), and only the ``order`` columns of the transformation are formed.

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
    m = p.model.n_inputs
    g_in, g_out, cert, nest = _start(p, keep_A=False)
    red1, red2, nc, r = nest.red1, nest.red2, nest.nc, nest.n1
    decisions = tuple(nest.decisions)
    if cert is not None:
        # The same counts as the Kalman decomposition: the minimal order and the number of
        # uncontrollable states must both agree with the certificate; when they do not, the
        # decomposition reconciles the two (and the minimal model is its first part).
        found = cert.sizes()
        staircase_like = (r, nc - r, found[2], found[3])
        disagree = (found[0], found[2] + found[3]) != (r, n - nc)
        if disagree and found[0] < r and found[2] + found[3] >= n - nc:
            # the certificate proves modes the staircase kept: the decomposition decides
            try:
                kd = _decompose(p)
                if kd.sizes.controllable_observable < r:
                    return _minimal_from_decomposition(kd, p.s)
            except NumericalBreakdown:
                pass
        if disagree:
            staircase_like = (r, nc - r, n - nc, 0)   # the conflict is recorded below
        decisions = confirm_window(decisions, cert, staircase_like)
        decisions = decisions + certificate_decisions(cert, staircase_like)
    # The minimal model is the leading block of the second staircase, in the coordinates
    # W1 = U1 diag(Z, I) (or Z alone when everything is controllable); only the r kept
    # columns of W1 are formed, by applying the recorded reflectors to [Z_r; 0].
    A_min = np.array(red2.A[:r, :r].T)
    B_min = red2.C[:m, :r].T / g_in[None, :]
    C_min = red2.B[:r, :].T / g_out[:, None]
    X = red2.form_U(r)
    del nest, red2
    if nc < n:
        Y = np.zeros((n, r), order="F")
        Y[:nc, :] = X
        X = red1.apply_U(Y) if red1.transforms else Y   # orthonormal, equilibrated
        del Y
    del red1
    s = p.s
    V = s[:, None] * X
    W = X / s[:, None]
    del X
    states = tuple(f"z{i + 1}" for i in range(r))
    name = f"{p.model.name} (minimal)" if p.model.name else None
    new = StateSpaceModel(A_min, B_min, C_min, p.model.D, p.model.dt, states=states,
                          inputs=p.model.inputs, outputs=p.model.outputs, name=name)
    return MinimalRealization(new, r, n - nc, nc - r, V, W, decisions,
                              any_fragile(decisions))


def _minimal_from_decomposition(kd, state_scaling) -> MinimalRealization:
    """The minimal realization read off a Kalman decomposition (internal; used by analyze).

    Part 1 of the decomposition has the orthonormal (equilibrated) basis that
    :func:`minimal_realization` computes with the same two staircases, and its diagonal
    block, rows of ``B`` and columns of ``C`` do not depend on how the other parts were
    completed (``A T1 = T1 A11 + T2 A21`` with ``T2`` orthogonal to ``T1``), so no staircase
    is run twice.  The decisions are those of the decomposition (a superset).
    """
    sizes = kd.sizes
    r = sizes.controllable_observable
    n = kd.T.shape[0]
    nc = r + sizes.controllable_unobservable
    part = kd.part("controllable_observable")
    V = kd.T[:, :r].copy()
    s = np.asarray(state_scaling, dtype=float)
    W = V / (s * s)[:, None]           # X / s with V = s X and X orthonormal
    source = kd.model.name
    states = tuple(f"z{i + 1}" for i in range(r))
    name = f"{source} (minimal)" if source else None
    model = StateSpaceModel(part.A, part.B, part.C, part.D, part.dt, states=states,
                            inputs=part.inputs, outputs=part.outputs, name=name)
    return MinimalRealization(model, r, n - nc, nc - r, V, W, tuple(kd.decisions), kd.fragile)
