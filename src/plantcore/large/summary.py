"""What the command line and the reports show of a sparse model, computed without dense arrays.

:func:`summarize_sparse` gathers the structural verdicts and the approximate Hankel singular
values; :func:`sparse_report_contents` adds a balanced truncation and sampled frequency
responses of the model (sparse solves) and of the reduced model.  The display layer renders
these objects and computes nothing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.errors import NumericalBreakdown
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.large.frequency import frequency_response
from plantcore.large.low_rank_balanced import LowRankReduction, low_rank_balanced_truncation
from plantcore.large.low_rank_gramians import (
    DEFAULT_RESIDUAL_TOLERANCE,
    LowRankGramians,
    low_rank_gramians,
)
from plantcore.large.structural import StructuralReduction, structural_reduction

__all__ = ["SparseReportContents", "SparseSummary", "sparse_report_contents", "summarize_sparse"]


@dataclass(frozen=True)
class SparseSummary:
    """Structural verdicts and approximate Hankel singular values of a sparse model.

    Attributes
    ----------
    model : StateSpaceModel
        The model summarized.
    nonzeros : int
        Stored nonzeros of ``A``.
    structural : StructuralReduction
        The exact pre-reduction and Lin's verdicts.
    gramians : LowRankGramians or None
        The ADI factors of the structurally reduced model; None when they could not be
        computed (then ``gramian_problem`` says why).
    hankel_singular_values : ndarray
        Singular values of ``Zo^T Zc``, descending (empty without Gramians).
    gramian_problem : str or None
        Why there are no Gramians (an unstable or singular model, no convergence).
    """

    model: StateSpaceModel = field(repr=False)
    nonzeros: int
    structural: StructuralReduction = field(repr=False)
    gramians: LowRankGramians | None = field(repr=False)
    hankel_singular_values: np.ndarray = field(repr=False)
    gramian_problem: str | None


def summarize_sparse(model, *, tol: float = DEFAULT_RESIDUAL_TOLERANCE,
                     progress=None) -> SparseSummary:
    """Structural verdicts and approximate Hankel singular values, without dense arrays."""
    model = as_model(model, allow_sparse=True)
    structural = structural_reduction(model)
    nonzeros = int(model.A.nnz) if model.is_sparse else int(np.count_nonzero(model.A))
    try:
        gramians = low_rank_gramians(structural.model, tol=tol, progress=progress)
    except ValueError as exc:
        return SparseSummary(model, nonzeros, structural, None, np.zeros(0), str(exc))
    if not gramians.converged:
        worst = max(gramians.controllability.relative_residual,
                    gramians.observability.relative_residual)
        problem = (f"the low-rank ADI iteration did not reach the tolerance {tol:.1e} "
                   f"(relative residual {worst:.2e}); the model may be unstable")
        return SparseSummary(model, nonzeros, structural, None, np.zeros(0), problem)
    Zc, Zo = gramians.controllability.factor, gramians.observability.factor
    hsv = scipy.linalg.svd(Zo.T @ Zc, compute_uv=False) if Zc.size and Zo.size else np.zeros(0)
    return SparseSummary(model, nonzeros, structural, gramians, hsv, None)


@dataclass(frozen=True)
class SparseReportContents:
    """Everything a report on a sparse model shows.

    Attributes
    ----------
    summary : SparseSummary
    reduction : LowRankReduction or None
        The balanced truncation shown (None when it could not be made; ``reduction_problem``
        says why).
    reduction_problem : str or None
    frequencies : (k,) ndarray
        rad/s, or rad/sample in discrete time.
    gain, reduced_gain : (k,) ndarray
        Largest singular value of the model's (sparse solves) and of the reduced model's
        frequency response (``reduced_gain`` empty without a reduction).
    reduced_poles : ndarray of complex
        Eigenvalues of the reduced model's ``A`` (not of the plant; a modes table of the
        plant would need its dense eigen-decomposition).
    """

    summary: SparseSummary
    reduction: LowRankReduction | None
    reduction_problem: str | None
    frequencies: np.ndarray = field(repr=False)
    gain: np.ndarray = field(repr=False)
    reduced_gain: np.ndarray = field(repr=False)
    reduced_poles: np.ndarray = field(repr=False)


def _sigma_max(response: np.ndarray) -> np.ndarray:
    return np.array([np.linalg.svd(G, compute_uv=False)[0] if G.size else 0.0 for G in response])


def sparse_report_contents(model, *, order=None, max_error=None, points: int = 40,
                           tol: float = DEFAULT_RESIDUAL_TOLERANCE,
                           progress=None) -> SparseReportContents:
    """The summary, a balanced truncation and sampled frequency responses of a sparse model.

    Without ``order`` and ``max_error`` the truncation keeps the fewest states whose bound
    is at most a tenth of the largest Hankel singular value times two (a tenth of the
    Hankel norm's bound on the gain).  ``points`` frequencies (log-spaced over the reduced
    model's pole magnitudes, one sparse LU each) are sampled.
    """
    model = as_model(model, allow_sparse=True)
    summary = summarize_sparse(model, tol=tol, progress=progress)
    reduction, problem = None, summary.gramian_problem
    if summary.gramians is not None:
        if order is None and max_error is None and summary.hankel_singular_values.size:
            max_error = 0.2 * float(summary.hankel_singular_values[0])
        try:
            reduction = low_rank_balanced_truncation(
                model, order=order, max_error=max_error, tol=tol, progress=progress,
                _precomputed=(summary.structural, summary.gramians))
        except (ValueError, NumericalBreakdown) as exc:
            problem = str(exc)
    if reduction is not None and reduction.model.n:
        poles = np.linalg.eigvals(reduction.model.A)
    else:
        poles = np.zeros(0, dtype=complex)
    magnitudes = np.abs(poles[np.abs(poles) > 0])
    if model.is_discrete:
        frequencies = np.linspace(np.pi / points, np.pi, points)
    elif magnitudes.size:
        frequencies = np.geomspace(magnitudes.min() / 10.0, magnitudes.max() * 10.0, points)
    else:
        frequencies = np.geomspace(1e-3, 1e3, points)
    gain = []
    for k, w in enumerate(frequencies):
        gain.append(_sigma_max(frequency_response(model, [w]))[0])
        if progress is not None:
            progress(f"frequency response {k + 1}/{frequencies.size}")
    reduced_gain = (_sigma_max(frequency_response(reduction.model, frequencies))
                    if reduction is not None else np.zeros(0))
    return SparseReportContents(summary, reduction, problem, frequencies, np.array(gain),
                                reduced_gain, poles)
