"""Orthogonal controllability and observability staircase forms.

The controllability staircase brings ``(A, B)`` by an orthogonal change of state
coordinates to

.. math::

    Q^{-1} A Q = \\begin{bmatrix} A_{11} & A_{12} \\\\ 0 & A_{22} \\end{bmatrix},\\qquad
    Q^{-1} B = \\begin{bmatrix} B_1 \\\\ 0 \\end{bmatrix},

with ``(A11, B1)`` controllable and ``A11`` block upper Hessenberg whose subdiagonal blocks
have full row rank.  The observability staircase is the dual form
``[[A11, 0], [A21, A22]]``, ``C Q = [C1, 0]``.
"""

from __future__ import annotations

import functools

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
from scipy.linalg import lapack

from plantcore.core.equilibration import Equilibration, equilibrate, io_scaled
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import FRAGILITY_FACTOR, RankDecision, any_fragile, resolve_tolerance
from plantcore.core.safe_norms import frobenius, frobenius_of_columns, frobenius_of_rows
from plantcore.structure.balancing_connectivity import balancing_connectivity
from plantcore.structure.certificate import modal_certificate, schur_eigenvalues
from plantcore.structure.feedback_count import resolve_uncounted
from plantcore.structure.reconcile import (
    bounded_text,
    confirm_window,
    deflation_allowed,
    deflated_note,
    strongly_rescaled,
    supersede,
    undecided_text,
)
from plantcore.structure.staircase_kernels import reduce_staircase

__all__ = ["StaircaseForm", "controllability_staircase", "observability_staircase"]


@dataclass(frozen=True)
class StaircaseForm:
    """A staircase form and how it was reached.

    Attributes
    ----------
    model : StateSpaceModel
        The model in the new coordinates ``z`` (``x = Q z``), with the zero blocks exactly 0.
    Q : (n, n) ndarray
        The transformation ``x = Q z``.  It is ``diag(scaling) @ orthogonal``: orthogonal
        whenever the model needed no equilibration (``scaling`` all ones, the usual case for
        a well-scaled model).
    Q_inv : (n, n) ndarray
        Its inverse, ``orthogonal.T @ diag(1 / scaling)`` (exact, no matrix inversion).
    rank : int
        Dimension of the controllable (or observable) subspace.
    block_sizes : tuple of int
        Rank gained at each step; sums to ``rank``.
    decisions : tuple of RankDecision
        Every rank decision with its margin.
    fragile : bool
        True when any decision lies within a factor 100 of the tolerance.
    scaling : (n,) ndarray
        The diagonal equilibration (powers of two).
    orthogonal : (n, n) ndarray
        The orthogonal factor of ``Q``.
    kind : str
        ``"controllability"`` or ``"observability"``.
    """

    model: StateSpaceModel
    Q: np.ndarray = field(repr=False)
    Q_inv: np.ndarray = field(repr=False)
    rank: int
    block_sizes: tuple
    decisions: tuple
    fragile: bool
    scaling: np.ndarray = field(repr=False)
    orthogonal: np.ndarray = field(repr=False)
    kind: str = "controllability"


def _staircase_core(A, B, C, *, scale, tol, label):
    """Controllability staircase of arrays already equilibrated.

    ``B`` is used for the rank decisions (inputs rescaled); ``C`` is transformed along.
    Returns ``(A_t, B_t, C_t, U, blocks, decisions)`` with ``A_t = U.T @ A @ U`` and the
    structural zeros set exactly.

    The algorithm is the staircase reduction of Van Dooren (1981) and Varga (1981): at each
    step the block below the current diagonal position is compressed by Householder
    reflectors and its rank is decided from true singular values.  Steps whose block keeps
    full column rank are done in blocked (level-3) form and the first rank-deficient step by
    QR with column pivoting followed by an SVD; see :mod:`plantcore.structure.staircase_kernels`.
    """
    red = reduce_staircase(A, B, C, scale=scale, tol=tol, label=label)
    return red.A, red.B, red.C, red.form_U(), red.blocks, red.decisions


def _prepare(model, tol):
    model = as_model(model)
    tol = resolve_tolerance(tol, model.n)
    eq = equilibrate(model.A, model.B, model.C)
    A_e, B_e, C_e = eq.apply(model.A, model.B, model.C)
    return model, tol, eq, A_e, B_e, C_e


def _scale_of(A_e, B_e, C_e) -> float:
    """The model's scale for rank decisions: ``||A_e||_F``.

    Inputs and outputs are rescaled to this size before deciding ranks (their units do not
    change controllability or observability), so only ``A`` sets the scale; the norms of
    ``B`` and ``C`` are used only when ``A`` is zero.  Including them always would let an
    input in large units make every coupling inside ``A`` look negligible.
    """
    norm_A = float(frobenius(A_e))
    if norm_A > 0 and np.isfinite(norm_A):
        return norm_A
    parts = [0.0]
    if B_e.size:
        parts.append(float(np.max(frobenius_of_columns(B_e))))
    if C_e.size:
        parts.append(float(np.max(frobenius_of_rows(C_e))))
    scale = max(parts)
    return scale if scale > 0 else 1.0


def _input_gains(B_e, B_s):
    """Per-column factors (powers of 2) with ``B_s = B_e * g``; 1 where a column is zero."""
    g = np.ones(B_e.shape[1])
    for j in range(B_e.shape[1]):
        nz = np.flatnonzero(B_e[:, j])
        if nz.size:
            g[j] = B_s[nz[0], j] / B_e[nz[0], j]
    return g


def _controllability(model, tol, label="controllability"):
    model, tol, eq, A_e, B_e, C_e = _prepare(model, tol)
    scale = _scale_of(A_e, B_e, C_e)
    B_s, _ = io_scaled(B_e, C_e, scale)
    g = _input_gains(B_e, B_s)
    del B_e
    # how well the balancing is determined, asked (once) only where the states were
    # rescaled beyond MILD_SCALING_ORDERS, by the deflation rule and the window rule
    s = eq.state_scaling
    connectivity = (functools.cache(lambda: balancing_connectivity(A_e, B_s, C_e))
                    if strongly_rescaled(s) else None)
    # the modal certificate (controllability side only); reduce_staircase copies A_e
    cert = modal_certificate(A_e, B_s, np.zeros((0, model.n)), scale=scale, tol=tol,
                             keep_schur=True,
                             deflate=deflation_allowed(s, connectivity, tol))
    cert = resolve_uncounted(cert, A_e, B_s, np.zeros((0, model.n)))
    red = reduce_staircase(A_e, B_s, C_e, scale=scale, tol=tol, label=label)
    rank = int(sum(red.blocks))
    check = _certificate_check(cert, rank, label, staircase_decisions=red.decisions)
    if check and check[0].conflict and check[0].rank < rank:   # the staircase kept noise
        corrected = _spectral_staircase(A_e, B_s, C_e, cert, scale=scale, tol=tol,
                                        label=label)
        if corrected is not None:
            A_t, B_t, C_t, U, blocks, decisions = corrected
            decisions = (supersede(red.decisions) + tuple(decisions)
                         + _certificate_check(cert, int(sum(blocks)), label, decided=True))
            return model, eq, A_t, B_t / g[None, :], C_t, U, blocks, decisions
    del A_e, C_e, B_s     # (kept by ``connectivity`` only on strongly rescaled models)
    U = red.form_U()
    red.transforms.clear()
    B_t = red.B / g[None, :]  # back to the user's input units (exact: powers of two)
    decisions = confirm_window(
        tuple(red.decisions), cert, None, rank=rank, state_scaling=s,
        connectivity=connectivity) + check
    return model, eq, red.A, B_t, red.C, U, red.blocks, decisions


def _spectral_staircase(A, B, C, cert, *, scale, tol, label):
    """The staircase form the certificate supports when the staircase kept noise.

    The eigenvalues the certificate finds controllable are moved to the top of the real
    Schur form (LAPACK ``?trsen``; Golub and Van Loan, *Matrix Computations*, 2013, 7.6):
    their Schur vectors span the controllable subspace R, and ``B`` has only rounding
    outside it.  The staircase of the restricted pair then gives the block Hessenberg form
    of the controllable part.  None when a cluster is shared between the parts, the
    reordering fails, the rows of ``B`` outside R exceed ``100 tol``, or the restricted
    staircase does not keep all of R.
    """
    n = A.shape[0]
    copies = cert.uncontrollable_copies()
    if np.any((copies > 0) & (copies < cert.multiplicities)):
        return None
    controllable = copies == 0
    T, Q = cert.schur if cert.schur is not None else scipy.linalg.schur(A, output="real")
    ev = schur_eigenvalues(T)
    select = controllable[np.argmin(np.abs(ev[:, None] - cert.eigenvalues[None, :]), axis=1)]
    sub = np.nonzero(np.diag(T, -1))[0]
    select[sub + 1] = select[sub]
    nc = int(select.sum())
    if 0 < nc < n:
        T, Q, *_, info = lapack.dtrsen(select.astype(np.int32), T, Q, job="N")
        if info != 0:
            return None
    Bq = Q.T @ B
    norm_B = max(float(frobenius(B)), 1e-300)
    if nc < n and float(np.abs(Bq[nc:]).max()) / norm_B > FRAGILITY_FACTOR * tol:
        return None
    Cq = C @ Q
    red = reduce_staircase(T[:nc, :nc], Bq[:nc], Cq[:, :nc], scale=scale, tol=tol,
                           label=label + " of the controllable part")
    if int(sum(red.blocks)) != nc:
        return None
    U1 = red.form_U()
    U = Q.copy()
    U[:, :nc] = Q[:, :nc] @ U1
    A_t = np.zeros((n, n))
    A_t[:nc, :nc] = red.A
    A_t[:nc, nc:] = U1.T @ T[:nc, nc:]
    A_t[nc:, nc:] = T[nc:, nc:]
    B_t = np.zeros_like(Bq)
    B_t[:nc] = red.B
    C_t = np.hstack([red.C, Cq[:, nc:]])
    return A_t, B_t, C_t, U, list(red.blocks), tuple(red.decisions)


def _certificate_check(cert, rank: int, label: str, *, decided: bool = False,
                       staircase_decisions=()) -> tuple:
    """The certificate's count of modes not uncontrollable, against the staircase's rank:
    a conflict when they differ (the staircase form is returned as found); the window is
    examined as in :func:`plantcore.structure.reconcile.certificate_decisions`."""
    if cert is None:
        return ()
    n = cert.n
    t = cert.tolerance
    window = (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR)
    word = "uncontrollable" if label == "controllability" else "unobservable"
    if not decided and cert.has_uncounted() and \
            not any(cert.undecided_by_sensitivity(x) for x in window):
        # defective clusters bounded, not counted (see reconcile.bounded_agreement)
        bounds = {x: cert.count_bounds("c", x) for x in window}
        outside = tuple(x for x, (low, high) in bounds.items() if not low <= n - rank <= high)
        low, high = bounds[t]
        kept, dropped = cert.counts_summary("c")
        clusters = len(cert._uncounted)
        text = bounded_text(cert, staircase_decisions)
        if outside:
            text = (f"the staircase gives rank {rank}, outside the bounds {n - high}..{n - low}"
                    f" the PBH measures give for {clusters} repeated eigenvalue cluster(s) at "
                    + ", ".join(f"{x:.2g}" for x in outside))
        label_text = f"modal certificate: modes not {word}" + (
            "" if outside else f" (between {n - high} and {n - low}: {clusters} repeated "
            "cluster(s) bounded, not counted)")
        return (RankDecision(label_text, n - low, n, kept,
                             dropped, t, conflict=t in outside, check_only=True,
                             window_outcome=text),)
    counts = {x: n - int(cert.uncontrollable_copies(x).sum()) for x in window}
    outcome = ""
    if len(set(counts.values())) > 1:
        outcome = "inside the window the rank changes: " + ", ".join(
            f"{r} at {x:.2g}" for x, r in counts.items())
    undecided = max(cert.undecided(x) for x in counts)
    if undecided:
        outcome = (f"{outcome}; " if outcome else "") + undecided_text(undecided)
    conflict = counts[t] != rank and not decided
    if conflict:
        outcome = (f"the staircase gives rank {rank}, the PBH measures {counts[t]}"
                   + (f"; {outcome}" if outcome else ""))
    kept, dropped = cert.counts_summary("c")
    return (RankDecision(f"modal certificate: modes not {word}" + deflated_note(cert, "c"),
                         counts[t], n, kept, dropped,
                         t, conflict=conflict, check_only=not decided,
                         window_outcome=outcome),)


def _form(model, eq, A_t, B_t, C_t, U, blocks, decisions, kind) -> StaircaseForm:
    s = eq.state_scaling
    Q = s[:, None] * U
    Q_inv = U.T / s[None, :]
    rank = int(sum(blocks))
    states = tuple(f"z{i + 1}" for i in range(model.n))
    new = StateSpaceModel(A_t, B_t, C_t, model.D, model.dt, states=states,
                          inputs=model.inputs, outputs=model.outputs, name=model.name)
    return StaircaseForm(new, Q, Q_inv, rank, tuple(blocks), tuple(decisions),
                         any_fragile(decisions), s.copy(), U, kind)


def controllability_staircase(model, tol=None) -> StaircaseForm:
    """Orthogonal controllability staircase form.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance; default :data:`plantcore.core.rank.DEFAULT_RELATIVE_TOLERANCE`
        (``5e-11``, growing as ``20 n eps`` for very large n).  Singular values are measured
        relative to ``max(||A||_F, column norms of B, row norms of C)`` of the equilibrated
        model, after each input column has been rescaled by a power of two to that size
        (input units do not change controllability).  See :mod:`plantcore.core.rank` for the
        reasoning behind the default.

    Returns
    -------
    StaircaseForm
        ``A = [[A11, A12], [0, A22]]``, ``B = [[B1], [0]]`` with zeros exact, ``(A11, B1)``
        controllable, ``A11`` block upper Hessenberg with full-row-rank subdiagonal blocks
        of sizes ``block_sizes``.

    Notes
    -----
    Before deciding ranks the model is equilibrated by a diagonal similarity of powers of two
    (:func:`plantcore.core.rank.equilibrate`), so answers do not depend on the units of the
    states.  Each step compresses one block by Householder reflectors and decides its rank
    from the singular values of the small triangular factor (an SVD); every rank is a count
    of singular values above the tolerance, recorded in ``decisions``.  The Krylov matrix
    ``[B, AB, ...]`` is never formed.  The method can mislead only when a singular value lies
    near the tolerance; the ``fragile`` flag says so.

    Steps whose block keeps full column rank (the usual case) are carried out in blocked
    form, several at a time, with matrix-matrix products as in LAPACK's reduction to
    Hessenberg form [4]_ (for a single input the remaining steps *are* that reduction,
    LAPACK ``dgehrd``); the first step found rank deficient is redone by QR with column
    pivoting and an SVD, which moves the dropped part into rows then set exactly to zero.
    The cost is about that of one Hessenberg reduction plus forming ``Q``.

    References
    ----------
    .. [1] H. H. Rosenbrock, *State-Space and Multivariable Theory*, Nelson, 1970.
    .. [2] P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
       IEEE Trans. Automatic Control 26(1), 111-129, 1981.
    .. [3] A. Varga, "Numerically stable algorithm for standard controllability form
       determination", Electronics Letters 17(2), 74-75, 1981.
    .. [4] G. Quintana-Orti and R. van de Geijn, "Improving the performance of reduction to
       Hessenberg form", ACM Trans. Math. Software 32(2), 180-194, 2006.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -2.0, -3.0]); B = np.array([[1.0], [1.0], [0.0]])
    >>> form = pc.controllability_staircase((A, B, np.eye(3)))
    >>> form.rank, form.block_sizes
    (2, (1, 1))
    >>> bool(np.allclose(form.Q @ form.model.A @ form.Q_inv, A))
    True
    """
    model, eq, A_t, B_t, C_t, U, blocks, decisions = _controllability(model, tol)
    return _form(model, eq, A_t, B_t, C_t, U, blocks, decisions, "controllability")


def observability_staircase(model, tol=None) -> StaircaseForm:
    """Orthogonal observability staircase form (the dual of the controllability form).

    Returns a :class:`StaircaseForm` with ``A = [[A11, 0], [A21, A22]]``, ``C = [C1, 0]``
    (zeros exact) and ``(A11, C1)`` observable; ``rank`` is the dimension of the observable
    part.  Computed as the controllability staircase of the dual ``(A^T, C^T)``; tolerance,
    equilibration and references as in :func:`controllability_staircase`.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -2.0]); C = np.array([[1.0, 0.0]])
    >>> form = pc.observability_staircase((A, np.ones((2, 1)), C))
    >>> form.rank
    1
    >>> bool(np.allclose(form.model.C[:, 1:], 0.0))
    True
    """
    model = as_model(model)
    dual = StateSpaceModel(model.A.T, model.C.T, model.B.T, model.D.T)
    _, eq, A_t, B_t, C_t, U, blocks, decisions = _controllability(dual, tol, label="observability")
    # The dual's equilibration of (A^T, C^T, B^T) is S^{-1} A^T S, i.e. S is applied to the
    # transposed model; in the original coordinates the scaling is 1/S.
    s = 1.0 / eq.state_scaling
    eq_primal = Equilibration(s)
    return _form(model, eq_primal, A_t.T, C_t.T, B_t.T, U, blocks, decisions, "observability")
