"""Minimal realization by orthogonal staircase reductions."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from plantcore.core.derived_names import derived_state_names
from plantcore.core.errors import NumericalBreakdown
from plantcore.core.model import StateSpaceModel
from plantcore.core.rank import any_fragile
from plantcore.core.safe_norms import frobenius
from plantcore.structure.kalman import _decompose, _prepare, _start
from plantcore.structure.pbh_measures import one_blas_thread
from plantcore.structure.reconcile import certificate_decisions, confirm_window
from plantcore.structure.removed_modes import (
    removed_from_blocks,
    removed_from_decomposition,
    warn_hidden_modes,
)

__all__ = ["MinimalRealization", "minimal_realization"]


@dataclass(frozen=True)
class MinimalRealization:
    """A minimal realization and the projection that produced it.

    Attributes
    ----------
    model : StateSpaceModel
        The minimal model: ``A = W.T @ A_orig @ V``, ``B = W.T @ B_orig``,
        ``C = C_orig @ V``, the same ``D`` and the same time domain.  A state that is an
        original state kept unchanged keeps its name; the others are named
        ``"combination k"`` by position (:mod:`plantcore.core.derived_names`).
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
    removed_unstable_modes : tuple of RemovedMode
        The removed modes that are unstable or on the stability boundary (classified as
        :func:`plantcore.classify_modes` does), each with its eigenvalue and the part it
        was in; empty when every removed mode is stable.  When it is not empty the reduced
        model cannot be used to stabilize or regulate the plant through those modes (see
        :class:`plantcore.HiddenModeWarning`).
    """

    model: StateSpaceModel
    order: int
    removed_uncontrollable: int
    removed_unobservable: int
    V: np.ndarray = field(repr=False)
    W: np.ndarray = field(repr=False)
    decisions: tuple
    fragile: bool
    removed_unstable_modes: tuple = ()


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

    Warns
    -----
    HiddenModeWarning
        When a removed mode is unstable or on the stability boundary; the message names
        the eigenvalues and their parts, and ``removed_unstable_modes`` holds them.  (Not
        issued to plantcore's own internal callers, which read the field.)

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
    # one BLAS thread, for the reason given in plantcore.structure.kalman.kalman_decomposition
    with one_blas_thread():
        return _minimal(model, tol)


def _minimal(model, tol) -> MinimalRealization:
    """The body of :func:`minimal_realization` (internal)."""
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
                    result = _minimal_from_decomposition(kd, p.s,
                                                         removed_from_decomposition(kd, p))
                    warn_hidden_modes(result.removed_unstable_modes,
                                      "the minimal realization", stacklevel=3)
                    return result
            except NumericalBreakdown:
                pass
        if disagree:
            staircase_like = (r, nc - r, n - nc, 0)   # the conflict is recorded below
        decisions = confirm_window(
            decisions, cert, staircase_like, state_scaling=p.s,
            connectivity=lambda: p.connectivity)
        decisions = decisions + certificate_decisions(
            cert, staircase_like, part4_unknown=disagree, staircase_decisions=decisions)
    # The minimal model is the leading block of the second staircase, in the coordinates
    # W1 = U1 diag(Z, I) (or Z alone when everything is controllable); only the r kept
    # columns of W1 are formed, by applying the recorded reflectors to [Z_r; 0].
    A_min = np.array(red2.A[:r, :r].T)
    B_min = red2.C[:m, :r].T / g_in[None, :]
    C_min = red2.B[:r, :].T / g_out[:, None]
    X = red2.form_U(r)
    removed = _removed_modes(p, red1, red2, nc, r)
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
    states = derived_state_names(p.model.states, V, W)
    name = f"{p.model.name} (minimal)" if p.model.name else None
    new = StateSpaceModel(A_min, B_min, C_min, p.model.D, p.model.dt, states=states,
                          inputs=p.model.inputs, outputs=p.model.outputs, name=name)
    result = MinimalRealization(new, r, n - nc, nc - r, V, W, decisions,
                                any_fragile(decisions), removed)
    warn_hidden_modes(removed, "the minimal realization", stacklevel=3)
    return result


def _removed_modes(p, red1, red2, nc: int, r: int) -> tuple:
    """The removed modes that are not stable, from the two staircase forms (internal).

    The unobservable part of the controllable subsystem is the trailing block of the second
    staircase (of the dual, hence transposed); the uncontrollable part is the first
    staircase's trailing block, formed as ``U_u^T A_e U_u`` from the reflectors (the
    minimal realization does not keep that block).  Both are orthogonal restrictions of
    the equilibrated ``A``.  Only when the uncontrollable part holds a mode that is not
    stable is the Kalman decomposition made, to tell whether the outputs see that mode
    (part 3) or not (part 4); should its part sizes disagree with this realization, the
    mode is reported as ``"uncontrollable"``.
    """
    n = p.model.n
    norm_A = float(frobenius(p.A))
    discrete = p.model.is_discrete
    unobservable = np.array(red2.A[r:nc, r:nc].T)
    removed = removed_from_blocks([("controllable_unobservable", unobservable)], norm_A,
                                  discrete)
    if nc == n:
        return removed
    E = np.zeros((n, n - nc), order="F")
    E[nc:, :] = np.eye(n - nc)
    U_u = red1.apply_U(E) if red1.transforms else E
    hidden = removed_from_blocks([("uncontrollable", U_u.T @ p.A @ U_u)], norm_A, discrete)
    if not hidden:
        return removed
    try:
        kd = _decompose(p)
    except NumericalBreakdown:
        return removed + hidden
    if tuple(kd.sizes)[:2] != (r, nc - r):
        return removed + hidden
    return removed_from_decomposition(kd, p)


def _minimal_from_decomposition(kd, state_scaling, removed=()) -> MinimalRealization:
    """The minimal realization read off a Kalman decomposition (internal; used by analyze).

    Part 1 of the decomposition has the orthonormal (equilibrated) basis that
    :func:`minimal_realization` computes with the same two staircases, and its diagonal
    block, rows of ``B`` and columns of ``C`` do not depend on how the other parts were
    completed (``A T1 = T1 A11 + T2 A21`` with ``T2`` orthogonal to ``T1``), so no staircase
    is run twice.  The decisions are those of the decomposition (a superset).
    ``removed`` is the tuple of removed modes that are not stable (the caller classifies
    them; see :mod:`plantcore.structure.removed_modes`).
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
    states = kd.model.states[:r]       # part 1 comes first: the same names (core.derived_names)
    name = f"{source} (minimal)" if source else None
    model = StateSpaceModel(part.A, part.B, part.C, part.D, part.dt, states=states,
                            inputs=part.inputs, outputs=part.outputs, name=name)
    return MinimalRealization(model, r, n - nc, nc - r, V, W, tuple(kd.decisions), kd.fragile,
                              tuple(removed))
