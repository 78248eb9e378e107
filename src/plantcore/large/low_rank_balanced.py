"""Balanced truncation of large sparse models from low-rank Gramian factors.

The route: exact structural pre-reduction (:mod:`plantcore.large.structural`), low-rank
factors ``P ~ Zc Zc^T`` and ``Q ~ Zo Zo^T`` by the ADI iteration
(:mod:`plantcore.large.low_rank_gramians`), the square-root method on the small matrix
``Zo^T Zc``, and an a posteriori check of the error by sparse solves of the full model
(:mod:`plantcore.large.frequency`).  The reduced model is an ordinary dense
:class:`~plantcore.core.model.StateSpaceModel`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.derived_names import balanced_state_names
from plantcore.core.errors import NumericalBreakdown
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.large.frequency import PeakErrorEstimate, estimate_peak_error
from plantcore.large.low_rank_gramians import (
    DEFAULT_RESIDUAL_TOLERANCE,
    LowRankGramians,
    low_rank_gramians,
)
from plantcore.large.structural import StructuralReduction, structural_reduction

__all__ = ["LowRankReduction", "low_rank_balanced_truncation",
           "low_rank_hankel_singular_values"]

#: Hankel singular values within this relative distance count as one (as in the dense path).
_EQUAL_RTOL = 1e-9


@dataclass(frozen=True)
class LowRankReduction:
    """A balanced truncation computed from low-rank Gramian factors, with its checks.

    The fields of :class:`plantcore.ReducedModel` (the dense result) come first, with the
    same meaning, so code that reads a reduction works with either.

    Attributes
    ----------
    model : StateSpaceModel
        The reduced model (dense), same ``D``, inputs, outputs and time domain; states
        ``"balanced 1"``, ``"balanced 2"``, ... as in the dense result.
    hankel_singular_values : (k,) ndarray
        Approximate Hankel singular values, the singular values of ``Zo^T Zc`` (``k`` is the
        smaller factor rank), descending.
    error_bound : float
        ``2 x`` the sum of the distinct discarded values among them.  Exact for exact
        Gramians; here the values come from factors with the residuals below, and the
        values beyond the factor rank (all below the last one) are not counted.
    order, stable_order, unstable_order, original_order : int
        ``unstable_order`` is 0: the sparse route needs a stable model.
    decoupling_norm : float
        0.0 (no stable/unstable split is made).
    removed_unstable_modes : tuple
        Empty.
    structural : StructuralReduction
        The exact pre-reduction; the Gramians are those of ``structural.model``.
    gramians : LowRankGramians
        The factors, their residuals and the shifts.
    peak_error : PeakErrorEstimate or None
        The measured error ``σ_max(G - G_r)`` by sparse solves of the full model (a lower
        bound of the true peak), or None when the check was not asked for.
    """

    model: StateSpaceModel
    hankel_singular_values: np.ndarray = field(repr=False)
    error_bound: float
    order: int
    stable_order: int
    unstable_order: int
    original_order: int
    decoupling_norm: float
    removed_unstable_modes: tuple
    structural: StructuralReduction = field(repr=False)
    gramians: LowRankGramians = field(repr=False)
    peak_error: PeakErrorEstimate | None


def _tail_bound(hsv: np.ndarray, r: int) -> float:
    tail = hsv[r:]
    if not tail.size:
        return 0.0
    distinct = np.concatenate([[True], tail[:-1] - tail[1:] > _EQUAL_RTOL * tail[:-1]])
    return 2.0 * float(tail[distinct].sum())


def _factors(model, tol, progress, precomputed=None):
    model = as_model(model, allow_sparse=True)
    if precomputed is not None:  # (structural, gramians) of this model, computed before
        structural, gramians = precomputed
    else:
        structural = structural_reduction(model)
        if progress is not None:
            progress(f"structural reduction: {structural.original_order} -> "
                     f"{structural.order} states")
        gramians = low_rank_gramians(structural.model, tol=tol, progress=progress)
    for label, factor in (("controllability", gramians.controllability),
                          ("observability", gramians.observability)):
        if not factor.converged:
            raise NumericalBreakdown(
                f"the low-rank ADI iteration for the {label} Gramian stopped after "
                f"{factor.iterations} steps at relative residual {factor.relative_residual:.2e}, "
                f"above the tolerance {tol:.1e}; the model may be unstable, or the shifts poor "
                "(give a larger tol, or check the model's stability).",
                {"relative_residual": factor.relative_residual})
    Zc, Zo = gramians.controllability.factor, gramians.observability.factor
    if Zc.shape[1] and Zo.shape[1]:
        U, s, Vt = scipy.linalg.svd(Zo.T @ Zc, full_matrices=False)
    else:
        U, s, Vt = np.zeros((Zo.shape[1], 0)), np.zeros(0), np.zeros((0, Zc.shape[1]))
    return model, structural, gramians, U, s, Vt.T


def low_rank_hankel_singular_values(model, *, tol: float = DEFAULT_RESIDUAL_TOLERANCE,
                                    progress=None) -> np.ndarray:
    """Approximate Hankel singular values of a stable (sparse) model, largest first.

    The singular values of ``Zo^T Zc`` for the low-rank ADI factors of the structurally
    reduced model (:func:`low_rank_balanced_truncation` explains the route).  Only as many
    values as the smaller factor rank are returned; the rest lie below the last one.
    """
    return _factors(model, tol, progress)[4]


def _accurate_count(hsv: np.ndarray, tol: float) -> int:
    """Values above the accuracy the factors allow (heuristic, see the docstring)."""
    if not hsv.size:
        return 0
    floor = hsv[0] * max(math.sqrt(tol), 1e3 * hsv.size * np.finfo(float).eps)
    return int(np.count_nonzero(hsv > floor))


def _cuts(hsv: np.ndarray) -> list[int]:
    return [0] + [r for r in range(1, hsv.size)
                  if hsv[r - 1] - hsv[r] > _EQUAL_RTOL * hsv[r - 1]] + [hsv.size]


def low_rank_balanced_truncation(model, order=None, max_error=None, *,
                                 tol: float = DEFAULT_RESIDUAL_TOLERANCE, check_error: bool = True,
                                 progress=None, _precomputed=None) -> LowRankReduction:
    """Balanced truncation of a stable sparse model from low-rank Gramian factors.

    Parameters
    ----------
    model : StateSpaceModel (sparse or dense), or tuple (A, B, C[, D])
        Asymptotically stable, continuous or discrete time.
    order : int, optional
        Number of states kept.
    max_error : float, optional
        Keep the fewest states whose bound (from the computed values) does not exceed this.
        With neither, every value above the accuracy of the factors is kept.
    tol : float, default 1e-18
        Relative Lyapunov residual of the ADI iteration (see :func:`low_rank_gramians`).
    check_error : bool, default True
        Measure the error by sparse solves of the full model (``peak_error``).
    progress : callable, optional
        Called with one-line texts as the work proceeds.

    Returns
    -------
    LowRankReduction

    Raises
    ------
    ValueError
        Conflicting or invalid options; an order beyond the values the factors resolve;
        a model that is not asymptotically stable (singular ``A``).
    NumericalBreakdown
        When the ADI iteration does not reach ``tol`` (an unstable model, or poor shifts).

    Notes
    -----
    1. Structural pre-reduction (exact; Lin 1974) removes the states no input reaches and
       those that reach no output.
    2. Low-rank ADI factors ``Zc``, ``Zo`` (Penzl 2000; Li and White 2002; Benner,
       Kuerschner and Saak 2013) with residual-based stopping.
    3. Square-root method on the factors (Laub, Heath, Paige and Ward 1987; for low-rank
       factors Penzl 2006): ``Zo^T Zc = U Σ V^T``, ``T = Zc V_r Σ_r^{-1/2}``,
       ``W = Zo U_r Σ_r^{-1/2}`` (so ``W^T T = I``), reduced ``(W^T A T, W^T B, C T, D)``;
       ``A T`` is a sparse product, nothing ``n x n`` is formed.
    4. Bound ``2 Σ_{distinct discarded} σ_i`` (Enns 1984; Glover 1984; Al-Saggaf and
       Franklin 1987 in discrete time) from the computed values; values below
       ``σ_1 * max(sqrt(tol), 1e3 k eps)`` are not resolved by the factors and may not be kept.
    5. A posteriori: the error ``σ_max(G - G_r)`` at adaptively chosen frequencies by sparse
       solves of the full model (:func:`plantcore.large.frequency.estimate_peak_error`).

    References
    ----------
    .. [1] T. Penzl, "Algorithms for model reduction of large dynamical systems", Linear
       Algebra and its Applications 415(2-3), 322-343, 2006.
    .. [2] A. J. Laub, M. T. Heath, C. C. Paige and R. C. Ward, "Computation of system
       balancing transformations and other applications of simultaneous diagonalization
       algorithms", IEEE Trans. Automatic Control 32(2), 115-122, 1987.
    .. [3] D. F. Enns, "Model reduction with balanced realizations: an error bound and a
       frequency weighted generalization", Proc. 23rd IEEE Conference on Decision and
       Control, 127-132, 1984.
    .. [4] K. Glover, "All optimal Hankel-norm approximations of linear multivariable
       systems and their L-infinity error bounds", International Journal of Control 39(6),
       1115-1193, 1984.
    .. [5] C.-T. Lin, "Structural controllability", IEEE Trans. Automatic Control 19(3),
       201-208, 1974.
    """
    if order is not None and max_error is not None:
        raise ValueError("give either order or max_error, not both: order fixes the number of "
                         "states, max_error lets the error bound choose it.")
    if order is not None and (isinstance(order, bool) or not isinstance(order, int | np.integer)
                              or order < 0):
        raise ValueError(f"order must be a whole number of states, 0 or more, got {order!r}.")
    if max_error is not None and (isinstance(max_error, bool)
                                  or not isinstance(max_error, int | float)
                                  or not math.isfinite(max_error) or max_error < 0):
        raise ValueError(f"max_error must be a non-negative finite number, got {max_error!r}.")
    model, structural, gramians, U, hsv, V = _factors(model, tol, progress, _precomputed)
    r_max = _accurate_count(hsv, tol)
    cuts = [c for c in _cuts(hsv) if c <= r_max]
    if order is not None:
        if order > r_max:
            raise ValueError(
                f"order {order} would keep {order} states, but only {r_max} Hankel singular "
                f"values are resolved by the low-rank factors (the structurally reduced model "
                f"has {structural.order} states); choose an order of at most {r_max}, or a "
                "smaller tol.")
        if order not in cuts:
            raise ValueError(f"order {order} cuts through a repeated Hankel singular value "
                             f"(σ_{order} = σ_{order + 1} = {hsv[order]:.6g}); choose order "
                             f"{max(c for c in cuts if c < order)} or "
                             f"{min(c for c in cuts if c > order)}.")
        r = order
    elif max_error is not None:
        fitting = [c for c in cuts if _tail_bound(hsv, c) <= max_error]
        if not fitting:
            raise ValueError(f"max_error {max_error:.6g} is below the smallest bound the factors "
                             f"can certify ({_tail_bound(hsv, r_max):.6g}); give a larger "
                             "max_error, a smaller tol, or an explicit order.")
        r = min(fitting)
    else:
        r = r_max
    kept = structural.model
    if r:
        scale = hsv[:r] ** -0.5
        T = gramians.controllability.factor @ (V[:, :r] * scale)
        W = gramians.observability.factor @ (U[:, :r] * scale)
        Ar, Br, Cr = W.T @ (kept.A @ T), W.T @ kept.B, kept.C @ T
    else:
        Ar = np.zeros((0, 0))
        Br, Cr = np.zeros((0, model.n_inputs)), np.zeros((model.n_outputs, 0))
    name = f"{model.name} (balanced truncation)" if model.name else None
    reduced = StateSpaceModel(Ar, Br, Cr, model.D, model.dt,
                              states=balanced_state_names(model.states, r),
                              inputs=model.inputs, outputs=model.outputs, name=name)
    peak = estimate_peak_error(model, reduced, progress=progress) if check_error else None
    return LowRankReduction(reduced, hsv, _tail_bound(hsv, r), r, r, 0, model.n, 0.0, (),
                            structural, gramians, peak)
