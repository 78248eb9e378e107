"""Exact zeros in written models: entries at rounding level of a computed model.

A minimal realization or a truncated model is computed by orthogonal transformations, and
entries that are zero in exact arithmetic because of the plant's own structure (two zones
that do not touch, an input that drives one zone only) come out as rounding dust such as
``1e-17`` or ``-3e-31``.  Written to a file, the dust reads as data.  The zero blocks that the
algorithms know (the zero pattern of a Kalman decomposition, the decoupled unstable block of
a balanced truncation, the structural zeros of a staircase form) are already exact zeros at
the source; this module deals with the dust in the remaining entries.

The rule
--------
A computed model is the exact result for a model that differs from the original by its
backward error ``eta`` (relative).  Setting entries to zero whose combined size is at most
``eta`` times the model's scale changes the written model by no more than the computation
already did, so the written model is the exact result for a model within ``2 eta`` of the
original.  An entry larger than that is kept, however small it looks: it may be real.

Sizes are judged in the units the computation worked in: the states exactly rescaled by
powers of two as :func:`plantcore.core.equilibration.equilibrate` does, and each input and
output column brought to the size of ``A`` by a power of two taken from the *reference*
model (the original the computation started from), so that an input in small units keeps its
small entries while an input whose column is pure dust (it drives only removed states) is
cleared.  The scale is the Frobenius norm of the joint system matrix in those units.  The
entries are cleared smallest first while the Frobenius norm of everything cleared stays at
most ``eta`` times that scale.  ``D`` is never changed (it is copied, not computed).

``eta`` (see :func:`reduction_backward_error`) is the largest of: the measured backward error
where the computation reports one (the Kalman decomposition's ``residual``); the largest
singular value its rank decisions dropped (relative to the model's scale: the staircase set
those couplings to zero, a backward perturbation of that size, P. Van Dooren, "The generalized
eigenstructure problem in linear system theory", IEEE Trans. Automatic Control 26(1), 1981);
and :func:`a_priori_backward_error`, the
first-order bound ``n eps`` for a sequence of Householder reflections on ``n`` states
(N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM, 2002,
Lemma 19.3, with the constant taken as 2 units of roundoff per state).

A balanced truncation computed from low-rank Gramian factors (the sparse route) has no
residual of its own, and its rounding dust is larger than ``n eps`` where a kept Hankel
singular value is small: the balancing transformation scales by ``sigma^(-1/2)``.  For it,
:func:`balanced_backward_error` measures how far the computed model is from being exactly
balanced with the computed values ``S = diag(sigma)``: the residuals of its two Lyapunov
equations (``A S + S A^T + B B^T`` and ``A^T S + S A + C^T C``; in discrete time
``A S A^T - S + B B^T`` and ``A^T S A - S + C^T C``), each entry divided by
``sigma_i + sigma_j`` (times ``||A||_2`` in discrete time), the first-order size of the change
of ``A`` that would remove that residual entry.  The kept block of an exactly balanced
realization satisfies both equations with ``S`` exactly (B. C. Moore, "Principal component
analysis in linear systems: controllability, observability, and model reduction", IEEE
Trans. Automatic Control 26(1), 1981), so what remains is the computation's error.

The certificate of the reduction must be run on the cleared model, which is what is written
(``plantcore reduce`` and ``plantcore demo`` do).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from plantcore.core.equilibration import equilibrate
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.safe_norms import frobenius

__all__ = ["ClearedModel", "a_priori_backward_error", "balanced_backward_error",
           "clear_rounding_dust", "reduction_backward_error"]


@dataclass(frozen=True)
class ClearedModel:
    """A computed model with its rounding dust set to exact zeros.

    Attributes
    ----------
    model : StateSpaceModel
        The model to write: the given one with the cleared entries exactly ``0.0`` (and every
        ``-0.0`` written as ``0.0``); names, ``D`` and the sample time unchanged.
    cleared : int
        Number of entries of ``A``, ``B`` and ``C`` set to zero.
    backward_error : float
        The relative figure ``eta`` the clearing stayed within.
    change : float
        Frobenius norm of what was cleared, relative to the model's scale (at most
        ``backward_error``).
    """

    model: StateSpaceModel
    cleared: int
    backward_error: float
    change: float

    def describe(self) -> str:
        """One sentence on the entries written as exact zeros; empty when there are none."""
        if not self.cleared:
            return ""
        entries = "1 entry" if self.cleared == 1 else f"{self.cleared} entries"
        return (f"{entries} at rounding level written as exact 0 (together {self.change:.2g} "
                f"of the model's scale, within the computation's backward error "
                f"{self.backward_error:.2g})")


def a_priori_backward_error(n: int) -> float:
    """``n eps``: first-order backward error of orthogonal reductions on ``n`` states.

    See the module documentation (Higham 2002, Lemma 19.3).
    """
    return max(int(n), 1) * float(np.finfo(float).eps)


def reduction_backward_error(result, n: int) -> float:
    """The backward error ``eta`` of a reduction result on ``n`` states (relative).

    The largest of the result's ``residual`` (when it has one), the largest singular value
    dropped by its own rank decisions (checks and superseded decisions excluded) and
    :func:`a_priori_backward_error` of ``n``.
    """
    eta = a_priori_backward_error(n)
    residual = getattr(result, "residual", None)
    if residual is not None and np.isfinite(residual):
        eta = max(eta, float(residual))
    for d in getattr(result, "decisions", ()):
        if getattr(d, "check_only", False) or getattr(d, "superseded", False):
            continue
        if np.isfinite(d.largest_dropped):
            eta = max(eta, float(d.largest_dropped))
    return eta


def balanced_backward_error(model, hankel_singular_values, *, worked_order: int) -> float:
    """The backward error ``eta`` of a computed balanced (truncated) model (relative).

    Parameters
    ----------
    model : StateSpaceModel, or tuple (A, B, C[, D])
        The computed model in balanced coordinates, ``r`` states.
    hankel_singular_values : (r,) array_like
        The computed Hankel singular values of the kept states, in the order of the states.
    worked_order : int
        Number of states the computation worked on (the structurally reduced model's),
        for the a priori floor :func:`a_priori_backward_error`.

    Returns
    -------
    float
        The largest of the a priori floor and the measured balancing residual (see the
        module documentation), relative to the Frobenius norm of ``[[A, B], [C, 0]]``.
    """
    model = as_model(model)
    eta = a_priori_backward_error(worked_order)
    sigma = np.asarray(hankel_singular_values, dtype=float)
    A, B, C = model.A, model.B, model.C
    r = A.shape[0]
    if r == 0 or sigma.shape != (r,) or not np.all(np.isfinite(sigma)) or sigma.min() <= 0:
        return eta
    scale = float(frobenius(np.array([frobenius(A), frobenius(B), frobenius(C)])))
    if not scale > 0 or not np.isfinite(scale):
        return eta
    S = np.diag(sigma)
    if model.is_discrete:
        residuals = (A @ S @ A.T - S + B @ B.T, A.T @ S @ A - S + C.T @ C)
        gain = max(float(np.linalg.norm(A, 2)), np.finfo(float).tiny)
    else:
        residuals = (A @ S + S @ A.T + B @ B.T, A.T @ S + S @ A + C.T @ C)
        gain = 1.0
    denominator = (sigma[:, None] + sigma[None, :]) * gain
    measured = max(float(np.max(np.abs(R) / denominator)) for R in residuals) / scale
    return max(eta, measured) if np.isfinite(measured) else eta


def _io_factors(norms: np.ndarray, target: float) -> np.ndarray:
    """Powers of two that bring each column (row) norm to ``target``; 1 for a zero one."""
    factors = np.ones(norms.shape)
    positive = norms > 0
    if target > 0:
        factors[positive] = np.exp2(np.clip(np.round(np.log2(target / norms[positive])),
                                            -1000.0, 1000.0))
    return factors


def clear_rounding_dust(model, backward_error: float, *, reference=None) -> ClearedModel:
    """Set the entries of a computed model that lie within its backward error to exact zero.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        A computed model (a minimal realization, a truncated model).
    backward_error : float
        The computation's relative backward error; it is raised to at least
        :func:`a_priori_backward_error` of the reference's number of states.
    reference : model, optional
        The model the computation started from; its input and output scales set the units
        in which the entries are judged (default: ``model`` itself).

    Returns
    -------
    ClearedModel

    Notes
    -----
    See the module documentation for the rule and why it cannot remove a real coupling:
    the cleared entries together are no larger than the backward error the computation
    already committed.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> computed = pc.StateSpaceModel([[-1.0, 3e-17], [-2e-31, -2.0]], [[1.0], [1e-18]],
    ...                               [[1.0, 1e-9]])
    >>> out = clear_rounding_dust(computed, 1e-15)
    >>> out.model.A.tolist(), out.model.B.tolist(), out.model.C.tolist(), out.cleared
    ([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [0.0]], [[1.0, 1e-09]], 3)
    """
    model = as_model(model)
    ref = model if reference is None else as_model(reference)
    eta = max(float(backward_error), a_priori_backward_error(ref.n))
    A, B, C = (np.array(M, dtype=float) for M in (model.A, model.B, model.C))
    n = A.shape[0]
    if n == 0 or not np.isfinite(eta):
        return ClearedModel(model, 0, eta, 0.0)
    s = equilibrate(A, B, C).state_scaling
    A_e = A / s[:, None] * s[None, :]
    B_e = B / s[:, None]
    C_e = C * s[None, :]
    # input and output units from the reference, in its own equilibrated coordinates
    if ref is model:
        rA, rB, rC = A_e, B_e, C_e
    else:
        r_s = equilibrate(ref.A, ref.B, ref.C).state_scaling
        rA = ref.A / r_s[:, None] * r_s[None, :]
        rB, rC = ref.B / r_s[:, None], ref.C * r_s[None, :]
    target = float(frobenius(rA)) or 1.0
    g = _io_factors(np.array([frobenius(rB[:, j]) for j in range(rB.shape[1])]), target)
    h = _io_factors(np.array([frobenius(rC[i, :]) for i in range(rC.shape[0])]), target)
    sizes = [np.abs(A_e), np.abs(B_e * g[None, :]), np.abs(C_e * h[:, None])]
    scale = float(frobenius(np.array([frobenius(x) for x in sizes])))
    flat = np.concatenate([x.ravel() for x in sizes])
    order = np.argsort(flat, kind="stable")
    ranked = flat[order]
    nonzero = ranked > 0
    # clear smallest first while the Frobenius norm of all cleared entries stays within eta
    # (scaled before squaring so that neither tiny nor huge entries leave the double range)
    budget = eta * scale
    with np.errstate(over="ignore", under="ignore"):
        cumulative = np.sqrt(np.cumsum((ranked / scale) ** 2)) * scale if scale > 0 else ranked
    take = nonzero & (cumulative <= budget)
    count = int(np.count_nonzero(take))
    mask = np.zeros(flat.shape, dtype=bool)
    mask[order[take]] = True
    change = float(cumulative[take][-1] / scale) if count and scale > 0 else 0.0
    parts = np.split(mask, np.cumsum([x.size for x in sizes])[:-1])
    out = []
    for M, keep_zero in zip((A, B, C), parts):
        M = M.copy()
        M[keep_zero.reshape(M.shape)] = 0.0
        M[M == 0.0] = 0.0           # -0.0 written as 0.0
        out.append(M)
    cleaned = StateSpaceModel(out[0], out[1], out[2], model.D, model.dt, states=model.states,
                              inputs=model.inputs, outputs=model.outputs, name=model.name)
    return ClearedModel(cleaned, count, eta, change)
