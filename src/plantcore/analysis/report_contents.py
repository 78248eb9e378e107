"""What one model report shows, computed: :func:`collect_report` and :class:`ReportContents`.

The HTML report (:mod:`plantcore.reports.html`) only renders what this module collects:
the analysis (reused when the caller has one), the peak gain, the certificate of the minimal
realization, the balanced truncation with its rule, the certificate of the reduced model,
the transmission zeros and each mode's distance to the nearest one, and the sampled
frequency responses its plot draws.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.analysis.analyze import analyze
from plantcore.core.model import as_model
from plantcore.core.progress import Progress
from plantcore.core.rank import DEFAULT_RELATIVE_TOLERANCE
from plantcore.core.safe_norms import frobenius
from plantcore.reduction.balanced import balanced_truncation
from plantcore.reduction.equivalence import check_equivalence
from plantcore.reduction.norms import _equilibrated, shared_response
from plantcore.reduction.norms import peak_gain as _peak_gain
from plantcore.structure.placement import report_placement
from plantcore.structure.zeros import transmission_zeros

__all__ = ["DEFAULT_RELATIVE_ERROR", "ModeZeroDistance", "ReportContents", "SampledResponse",
           "collect_report"]

#: When neither an order nor a largest error is asked for, the report (and ``plantcore
#: demo``) truncates to the lowest order whose guaranteed error bound is at most this
#: fraction of the model's peak gain.  A tenth is a common first cut for design models whose
#: controllers are later checked against the full model; the report shows the bound and the
#: measured error so the reader can judge.
DEFAULT_RELATIVE_ERROR = 0.1


#: The highest frequency (rad/s) the report's plot draws: the Nyquist frequency
#: ``pi / dt`` must not exceed it.  A logarithmic axis pads its range by a few percent of its
#: decades on each side, so the end of the double range (1.8e308) is kept 2 decades away
#: (measured: a Nyquist frequency of 1e308 breaks the drawing, 1e306 does not).
LARGEST_PLOTTED_FREQUENCY = 1e306


def _nyquist(dt: float) -> float:
    """``pi / dt`` in rad/s; ValueError naming the sample time when it is above
    :data:`LARGEST_PLOTTED_FREQUENCY` (a sample time below about ``3.1e-306``, such as the
    subnormal ``1e-310``, whose Nyquist frequency is not even a double)."""
    if dt < math.pi / LARGEST_PLOTTED_FREQUENCY:
        digits = math.log10(math.pi) - math.log10(dt)
        power = math.floor(digits)
        raise ValueError(
            f"sample_time {dt:.3g} is too small for a report: its frequency axis would run up "
            f"to pi / sample_time = {10.0 ** (digits - power):.3g}e+{power} rad/s, above the "
            f"{LARGEST_PLOTTED_FREQUENCY:.0e} rad/s a plot can draw (doubles end at 1.8e+308); "
            "write the sample time in a larger time unit (the matrices of a sampled model do "
            "not depend on it)")
    return math.pi / dt


def _frequency_grid(model, modes, points: int) -> np.ndarray:
    """A logarithmic frequency grid around the model's physical modes (rad per time unit).

    Eigenvalues within the default rank tolerance of zero (of ``z = 1`` in discrete time),
    relative to ``||A||_F``, are integrators whose computed value is rounding: they set no
    frequency (a rigid-body pair computed as ``2.7e-17`` would otherwise stretch the grid
    down to ``1e-18``).  The grid spans the other modes with a decade of margin on each side.
    """
    values = np.array([complex(m.value) for m in modes], dtype=complex)
    norm_A = frobenius(model.A)
    rounding = DEFAULT_RELATIVE_TOLERANCE * max(norm_A, np.finfo(float).tiny)
    if model.is_discrete:
        dt = model.dt
        nyquist = _nyquist(dt)
        physical = values[(np.abs(values) > 0) & (np.abs(values - 1.0) > rounding)]
        with np.errstate(over="ignore"):   # a fast real pole of a tiny sample time: inf, dropped
            w = np.abs(np.log(physical)) / dt if physical.size else np.array([])
        w = w[(w > 0) & np.isfinite(w)]
        low = 0.1 * w.min() if w.size else 1e-3 * nyquist
        low = min(low, 1e-2 * nyquist)
        return np.geomspace(low, nyquist, points)
    w = np.abs(values)
    w = w[w > rounding]
    if not w.size:
        return np.geomspace(1e-2, 1e2, points)
    return np.geomspace(0.1 * w.min(), 10.0 * w.max(), points)


#: Above this many states the sampled responses come from one complex Schur form.
SCHUR_RESPONSE_STATES = 40


def _singular_values(model, w: np.ndarray) -> np.ndarray:
    """Singular values of the transfer matrix on the imaginary axis (or unit circle).

    Small models: :meth:`StateSpaceModel.transfer_at` (a dense solve per frequency).  Above
    :data:`SCHUR_RESPONSE_STATES` states (dense ``A``): one complex Schur form, then one
    triangular solve per frequency, ``O(n^2 m)`` instead of ``O(n^3)`` (A. J. Laub,
    "Efficient multivariable frequency response computations", IEEE Trans. Automatic
    Control 26(2), 1981, with the triangular instead of the Hessenberg form; shared with
    :func:`plantcore.peak_gain` through :func:`plantcore.reduction.norms.shared_response`)."""
    k = min(model.n_inputs, model.n_outputs)
    out = np.full((w.size, k), np.nan)
    schur = None
    if model.n > SCHUR_RESPONSE_STATES and not getattr(model, "is_sparse", False):
        # the equilibrated arrays, as the peak gain uses: the Schur form is shared with it
        schur = shared_response(*_equilibrated(model), model.is_discrete)
    for i, wi in enumerate(w):
        if schur is not None:
            G = schur.response(float(wi * model.dt) if model.is_discrete else float(wi))
            if G is None:   # the grid point is an eigenvalue
                continue
        else:
            point = np.exp(1j * wi * model.dt) if model.is_discrete else 1j * wi
            try:
                G = model.transfer_at(point)
            except ValueError:  # the grid point is an eigenvalue
                continue
        if k:
            out[i] = np.linalg.svd(G, compute_uv=False)
    return out


@dataclass(frozen=True)
class SampledResponse:
    """The singular values of one model's transfer matrix on a frequency grid.

    Attributes
    ----------
    label : str
        ``"original"``, ``"minimal"`` or ``"reduced"``.
    states : int
        The model's number of states.
    frequencies : (k,) ndarray
        Frequencies in rad per time unit (rad/s for a sampled model).
    singular_values : (k, min(p, m)) ndarray
        Largest first; NaN where the grid point is an eigenvalue.
    """

    label: str
    states: int
    frequencies: np.ndarray = field(repr=False)
    singular_values: np.ndarray = field(repr=False)


def _sampled_responses(analysis, reduction) -> tuple:
    """The frequency responses a report draws: the original sampled coarsely (it may be
    large), the minimal and the reduced model finely, on one grid set by the eigenvalues
    (the coarse points are a subset of the fine ones)."""
    model = analysis.model
    fine = _frequency_grid(model, analysis.modes, 400)
    # The original is sampled at every k-th frequency of the fine grid, so the plotted
    # points of the original lie exactly on the minimal model's curve where they agree.
    coarse = fine[::10 if model.n > 200 else 6]
    curves = [("original", model, coarse), ("minimal", analysis.minimal.model, fine)]
    if reduction is not None:
        curves.append(("reduced", reduction.model, fine))
    return tuple(SampledResponse(label, m.n, w, _singular_values(m, w)) for label, m, w in curves)


@dataclass(frozen=True)
class ModeZeroDistance:
    """How close one mode lies to a transmission zero (a near pole-zero cancellation).

    Attributes
    ----------
    nearest_zero : complex or None
        The finite transmission zero nearest to the mode's eigenvalue, or None when the
        model has no finite zero.
    distance : float
        ``|λ - z|`` in the units of the eigenvalue (``inf`` without a finite zero).
    relative_distance : float
        ``|λ - z| / max(|λ|, ρ)`` with ``ρ`` the largest eigenvalue modulus, so that a value
        near zero means the pole is all but cancelled by the zero, whatever the mode's size.
    """

    nearest_zero: complex | None
    distance: float
    relative_distance: float


def _zero_distances(modes, zeros) -> tuple:
    """Per mode, the nearest finite transmission zero (``zeros`` may be None: unknown)."""
    if zeros is None:
        return ()
    z = np.asarray(zeros.finite_zeros, dtype=complex)
    values = np.array([complex(m.value) for m in modes], dtype=complex)
    if not z.size:
        return tuple(ModeZeroDistance(None, math.inf, math.inf) for _ in modes)
    rho = float(np.max(np.abs(values))) if values.size else 0.0
    out = []
    for lam in values:
        gaps = np.abs(z - lam)
        k = int(np.argmin(gaps))
        size = max(abs(lam), rho, np.finfo(float).tiny)
        out.append(ModeZeroDistance(complex(z[k]), float(gaps[k]), float(gaps[k]) / size))
    return tuple(out)


@dataclass(frozen=True)
class ReportContents:
    """Everything one report shows, computed by the library.

    Attributes
    ----------
    analysis : plantcore.analysis.Analysis
        The diagnosis of the original model (parts, decisions, modes, verdicts).
    certificate : EquivalenceCertificate or None
        Original model against its minimal realization (None only when the comparison
        itself failed; ``certificate_problem`` says why).
    certificate_problem : str
        Why there is no certificate, or ``""``.
    reduction : ReducedModel or None
        Balanced truncation of the minimal realization, or None (see ``reduction_problem``).
    reduction_rule : str
        How the reduced order was chosen, in one sentence.
    reduction_problem : str
        Why there is no reduced model, or ``""``.
    reduced_certificate : EquivalenceCertificate or None
        Original model against the reduced model: its ``peak_error`` is the error actually
        reached, to compare with the bound.
    peak_gain : PeakGain or None
        Peak gain of the original model.
    responses : tuple of SampledResponse
        Frequency responses of the original, minimal and reduced models, for the plot.
    zeros : TransmissionZeros or None
        The transmission zeros (the invariant zeros of the minimal realization), or None
        when they could not be computed (``zeros_problem`` says why).
    mode_zero_distances : tuple of ModeZeroDistance
        One per mode of ``analysis.modes``, in the same order (empty without ``zeros``).
    zeros_problem : str
        Why there are no zeros, or ``""``.
    source : str or None
        The file the model came from, shown in the header.
    created : str
        Local date and time the report was made (ISO format, minutes).
    placement : tuple of PlacementSuggestion
        Actuator and sensor suggestions when some mode is uncontrollable, unobservable or
        below the near-cancellation margin (see :func:`plantcore.structure.placement.report_placement`).
    """

    analysis: object
    certificate: object
    certificate_problem: str
    reduction: object
    reduction_rule: str
    reduction_problem: str
    reduced_certificate: object
    peak_gain: object
    responses: tuple = field(default=(), repr=False)
    source: str | None = None
    zeros: object = None
    mode_zero_distances: tuple = field(default=(), repr=False)
    zeros_problem: str = ""
    created: str = field(default_factory=lambda: _dt.datetime.now().isoformat(timespec="minutes"))
    placement: tuple = field(default=(), repr=False)

    @property
    def model(self):
        """The original model."""
        return self.analysis.model

    @property
    def minimal_model(self):
        """The minimal realization's model."""
        return self.analysis.minimal.model


def _progress(progress, label, total):
    if progress is not None and not isinstance(progress, bool):
        raise ValueError(f"progress must be True, False or None (automatic), got {progress!r}.")
    return Progress(label, total, enabled=progress)


def collect_report(model, *, tol=None, order=None, max_error=None, source=None,
                   analysis=None, progress=None) -> ReportContents:
    """Run the analysis, reduction and certificates that a report shows.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance (see :mod:`plantcore.core.rank`).
    order : int, optional
        Order of the balanced truncation of the minimal realization.
    max_error : float, optional
        Largest acceptable error bound (peak gain of the difference, in the model's units);
        the lowest order that meets it is chosen.  ``order`` and ``max_error`` exclude each
        other; with neither, the bound may be :data:`DEFAULT_RELATIVE_ERROR` times the peak
        gain.
    source : str, optional
        File name to show in the report's header.
    analysis : Analysis, optional
        An analysis of ``model`` already made (it is reused, not repeated).
    progress : bool or None, optional
        Show progress on standard error: ``None`` (default) when it is a terminal,
        ``True`` always, ``False`` never.

    Returns
    -------
    ReportContents

    Raises
    ------
    ValueError
        For invalid options (both ``order`` and ``max_error``, an order above the minimal
        order, a ``max_error`` that no truncation can certify).  Problems of the default
        reduction (a mode on the stability boundary) are reported in the contents instead.
    """
    if order is not None and max_error is not None:
        raise ValueError("give either order or max_error, not both: order fixes the number of "
                         "states, max_error lets the error bound choose it.")
    if order is not None and (isinstance(order, bool) or not isinstance(order, (int, np.integer))
                              or order < 0):
        raise ValueError(f"order must be a whole number of states, 0 or more, got {order!r}.")
    given = analysis.model if analysis is not None else as_model(model, allow_sparse=True)
    if given.is_discrete:
        _nyquist(given.dt)      # refuse a sample time whose Nyquist frequency is not a double
    bar = _progress(progress, "report", 7)
    try:
        if analysis is None:
            bar.step("analysing the model")
            analysis = analyze(model, tol=tol)
        else:
            bar.step("reusing the analysis")
        model = analysis.model
        minimal = analysis.minimal
        r = minimal.order
        if order is not None and order > r:
            raise ValueError(f"order {order} is above the minimal order {r}; a balanced truncation "
                             f"can only remove states, so choose an order of at most {r}.")
        bar.step("peak gain")
        try:
            gain = _peak_gain(model)
        except ValueError:
            gain = None
        bar.step("certifying the minimal realization")
        certificate, certificate_problem = None, ""
        try:
            certificate = check_equivalence(model, minimal.model, reference_peak_gain=gain)
        except (ValueError, ArithmeticError) as exc:
            certificate_problem = f"the comparison could not be made: {exc}"
        bar.step("balanced truncation")
        reduction, rule, problem = None, "", ""
        if order is not None:
            rule = f"order {order}, as requested"
            reduction = balanced_truncation(minimal.model, order=order)
        elif max_error is not None:
            rule = f"the lowest order whose error bound is at most {max_error:.4g}, as requested"
            reduction = balanced_truncation(minimal.model, max_error=max_error)
        elif r == 0:
            problem = "the minimal realization has no states; there is nothing to truncate."
        elif gain is None or not math.isfinite(gain.value) or gain.value == 0.0:
            problem = ("the model has a mode on the stability boundary (an integrator, say) "
                       "or no gain, so no relative error bound can be set; balanced truncation "
                       "needs the boundary modes separated from the model first."
                       if gain is None or not math.isfinite(gain.value) else
                       "the model has no gain (its transfer function is zero); there is "
                       "nothing to truncate.")
        else:
            limit = DEFAULT_RELATIVE_ERROR * gain.value
            rule = (f"the lowest order whose error bound is at most "
                    f"{DEFAULT_RELATIVE_ERROR:g} x the peak gain ({limit:.4g})")
            try:
                reduction = balanced_truncation(minimal.model, max_error=limit)
            except ValueError as exc:
                problem = f"balanced truncation was not possible: {exc}"
        bar.step("checking the reduced model")
        reduced_certificate = None
        if reduction is not None:
            try:
                reduced_certificate = check_equivalence(model, reduction.model, reference_peak_gain=gain)
            except (ValueError, ArithmeticError):
                reduced_certificate = None
        bar.step("transmission zeros")
        zeros, zeros_problem = None, ""
        try:   # the minimal realization's invariant zeros are the transmission zeros
            zeros = transmission_zeros(minimal.model, tol=analysis.tolerance,
                                       realization="as_given")
        except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            zeros_problem = f"the transmission zeros could not be computed: {exc}"
        bar.step("frequency responses")
        responses = _sampled_responses(analysis, reduction)
    finally:
        bar.close()
    return ReportContents(analysis, certificate, certificate_problem, reduction, rule, problem,
                          reduced_certificate, gain, responses,
                          None if source is None else os.fsdecode(os.fspath(source)),
                          zeros=zeros, mode_zero_distances=_zero_distances(analysis.modes, zeros),
                          zeros_problem=zeros_problem,
                          placement=report_placement(model, analysis.modes, tol=analysis.tolerance))
