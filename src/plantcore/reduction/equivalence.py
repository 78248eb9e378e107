"""The equivalence certificate: do two models have the same transfer matrix?

A reduced model is only useful when a reviewer can see that it behaves like the original.
:func:`check_equivalence` compares two models through their transfer matrices, never their
state coordinates: it measures the difference of the two frequency responses (in block
form, each model evaluated in its own coordinates) against the accuracy floating point can
attain, locates the peak of the difference (by the peak-gain level-set method on the
minimal or block-form difference for small models, by a local search for large ones),
reduces the difference to a minimal realization only when it is small or when asked (order
0 means the transfer functions agree), compares the first Markov parameters (the
impulse-response coefficients) and the feedthrough matrices, and writes down in plain
sentences what was compared and why the verdict is what it is.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import any_fragile
from plantcore.core.rendering import render
from plantcore.core.safe_norms import frobenius
from plantcore.core.wording import counted, frequency_phrase, short_number
from plantcore.reduction.equivalence_resolution import (
    ATTAINABLE_LIMIT,
    DENSE_LIMIT,
    RESOLUTION_MARGIN,
    FrequencyCheck,
    ResponseEvaluator,
    compare_responses,
    compare_shared_responses,
    examined_frequencies,
    refine_largest_difference,
    resolution_verdict,
    shared_matrices,
)
from plantcore.reduction.norms import PeakGain, _equilibrated, _peak_gain, peak_gain
from plantcore.structure.pbh_measures import one_blas_thread, threads_by_size

__all__ = ["EquivalenceCertificate", "FrequencyCheck", "check_equivalence"]

#: The three verdicts of a certificate.
VERDICTS = ("equivalent", "not equivalent", "undecided")


@dataclass(frozen=True)
class EquivalenceCertificate:
    """The result of comparing the transfer matrices of two models ``a`` and ``b``.

    Attributes
    ----------
    equivalent : bool
        True when :attr:`verdict` is ``"equivalent"``: at every frequency examined the
        measured difference is within the tolerance or within the attainable accuracy (or,
        with ``exact=True``, the transfer matrices are identical in exact rational
        arithmetic).  False for ``"not equivalent"`` and ``"undecided"``, and for models
        that cannot be compared (different numbers of inputs or outputs, or time domains).
    verdict : str
        ``"equivalent"``, ``"not equivalent"`` or ``"undecided"`` (the difference exceeds
        the tolerance and the attainable accuracy, but not by the margin
        ``RESOLUTION_MARGIN`` that would tell it from rounding; see
        :func:`check_equivalence`, Notes).  Never ``"not equivalent"`` on a difference that
        rounding can explain.
    verdict_basis : str
        What the verdict rests on: ``"tolerance"``, ``"attainable accuracy"``,
        ``"resolved"``, ``"unresolved"``, ``"boundary pole"``, ``"no frequency"``,
        ``"exact rational arithmetic"`` or ``"not comparable"``.
    attainable_accuracy : float
        The accuracy floating point can reach for these two models, relative to
        :attr:`reference_gain`, at :attr:`decision_frequency`: a first-order bound on the
        rounding in the measured difference there (evaluation and storage of both models;
        :func:`plantcore.reduction.equivalence_resolution.response_with_rounding_bound`).
        When ``a`` has a pole on the boundary, relative to the gain of ``a`` at
        :attr:`decision_frequency`.
        ``nan`` when no frequency was examined or the models cannot be compared.
    decision_frequency : float
        The frequency that decided the verdict (rad/s, ``inf`` allowed, or rad/sample):
        the resolved difference, the unresolved one, the largest attainable accuracy
        needed for "equivalent to the attainable accuracy", or the largest difference.
    frequency_checks : tuple of FrequencyCheck
        Every frequency examined, with the measured difference and its attainable accuracy
        (absolute).
    difference_order : int or None
        Order of a minimal realization of ``a - b``; 0 when the transfer functions agree up
        to the feedthrough; never more than ``n_a + n_b``.  None when the models cannot be
        compared, or when the difference has more than ``REALIZE_LIMIT`` (40) states and
        ``realize_difference`` was not set (the reduction is then not computed; the verdict
        never depended on it).  States that carry only a difference below the attainable accuracy are
        counted: on stiff models the rank decisions may not see the cancellation that the
        frequency responses show.
    difference_order_method : str
        How :attr:`difference_order` was found.
    peak_error : float
        The largest difference ``sigma_max(G_a - G_b)`` measured over the frequencies
        examined, which include the peak frequency of the difference found by the
        peak-gain iteration; 0 only when measured as 0, or proven 0 by the exact path.
        ``inf`` when the difference has a pole on the boundary or the models cannot be
        compared.
    peak_error_method : str
        How :attr:`peak_error` was found.
    relative_error : float
        ``peak_error`` divided by :attr:`reference_gain` (the peak gain of ``a``); 0 when
        both are zero, ``inf`` when only ``a`` is zero.  When ``a`` has a pole on the
        boundary, the largest measured difference relative to the gain of ``a`` at its own
        frequency (see :func:`check_equivalence`, Notes 3).
    peak_frequency : float
        Where the difference is largest: rad/s (``inf`` for infinite frequency), or
        rad/sample in discrete time.  ``nan`` when the difference is identically zero or the
        models cannot be compared; 0.0 when the difference is a nonzero constant.
    markov_error : float
        Largest difference between the Markov parameters ``D, CB, CAB, CA^2B, ...`` of the
        two models, relative to the largest Markov parameter of ``a``, after the frequency
        scaling described in :func:`check_equivalence`; ``inf`` when not comparable.
    reasons : tuple of str
        Plain sentences: what was compared, where the models differ, which criterion
        decided.
    tolerance : float
        The tolerance the relative error was held to.
    criterion : str
        What decided the verdict: ``"relative peak error"``, ``"exact rational arithmetic"``
        or ``"not comparable"``.
    reference_gain : float
        The gain the peak error was divided by: the peak gain of ``a``, or, when that is
        infinite (a pole of ``a`` on the boundary), the gain of ``a`` at the frequency of
        the largest relative difference.
    d_error : float
        Spectral norm of ``D_a - D_b`` (absolute); ``inf`` when not comparable.
    compared_markov_parameters : int
        How many Markov parameters were compared, ``D`` included.
    exact_equal : bool or None
        With ``exact=True``: whether the exact transfer matrices are identical; else None.
    is_discrete : bool or None
        Time domain of the models (None when they differ).
    sample_time : float or None
        The common sample time in discrete time.
    orders : tuple of int
        Numbers of states of ``a`` and ``b``.
    names : tuple
        Names of ``a`` and ``b`` (None where unnamed).
    decisions : tuple of RankDecision
        The rank decisions of the minimal realization of the difference.
    fragile : bool
        True when one of those decisions lies within a factor 100 of its tolerance, so that
        :attr:`difference_order` depends on the rank tolerance.
    difference_peak : PeakGain or None
        The full peak-gain result of the minimal difference (None when its order is 0 or
        the models cannot be compared); it locates the peak, which is then measured.
    """

    equivalent: bool
    difference_order: int | None
    peak_error: float
    relative_error: float
    peak_frequency: float
    markov_error: float
    reasons: tuple
    tolerance: float = 1e-9
    criterion: str = "relative peak error"
    reference_gain: float = math.nan
    d_error: float = math.nan
    compared_markov_parameters: int = 0
    exact_equal: bool | None = None
    is_discrete: bool | None = None
    sample_time: float | None = None
    orders: tuple = (0, 0)
    names: tuple = (None, None)
    decisions: tuple = field(default=(), repr=False)
    fragile: bool = False
    difference_peak: PeakGain | None = field(default=None, repr=False)
    verdict: str = ""
    verdict_basis: str = ""
    attainable_accuracy: float = math.nan
    decision_frequency: float = math.nan
    difference_order_method: str = ""
    peak_error_method: str = ""
    frequency_checks: tuple = field(default=(), repr=False)

    def __post_init__(self):
        if not self.verdict:   # a certificate built by hand with the bool only
            object.__setattr__(self, "verdict",
                               "equivalent" if self.equivalent else "not equivalent")
        if self.verdict not in VERDICTS:
            raise ValueError(f"verdict must be one of {VERDICTS}, got {self.verdict!r}.")
        if (self.verdict == "equivalent") != bool(self.equivalent):
            raise ValueError("equivalent must be True exactly when verdict is 'equivalent'.")

    def to_dict(self) -> dict:
        """A JSON-safe dictionary (non-finite numbers become None or strings)."""
        def num(x):
            if x is None:
                return None
            x = float(x)
            if math.isnan(x):
                return None
            if math.isinf(x):
                return "inf" if x > 0 else "-inf"
            return x

        return {
            "equivalent": bool(self.equivalent),
            "verdict": self.verdict,
            "verdict_basis": self.verdict_basis,
            "attainable_accuracy": num(self.attainable_accuracy),
            "decision_frequency": num(self.decision_frequency),
            "criterion": self.criterion,
            "tolerance": num(self.tolerance),
            "difference_order": self.difference_order,
            "difference_order_method": self.difference_order_method,
            "peak_error": num(self.peak_error),
            "peak_error_method": self.peak_error_method,
            "relative_error": num(self.relative_error),
            "reference_gain": num(self.reference_gain),
            "peak_frequency": num(self.peak_frequency),
            "frequency_unit": "rad/sample" if self.is_discrete else "rad/s",
            "markov_error": num(self.markov_error),
            "compared_markov_parameters": self.compared_markov_parameters,
            "d_error": num(self.d_error),
            "exact_equal": self.exact_equal,
            "is_discrete": self.is_discrete,
            "sample_time": self.sample_time,
            "orders": list(self.orders),
            "names": list(self.names),
            "fragile": bool(self.fragile),
            "decisions": [d.to_dict() for d in self.decisions],
            "reasons": list(self.reasons),
            "frequency_checks": [
                {"frequency": num(c.frequency), "difference": num(c.difference),
                 "attainable": num(c.attainable)} for c in self.frequency_checks],
        }

    def to_text(self, *, caution: bool = True, labels=None) -> str:
        """A plain, readable report of the certificate (rendered by
        :func:`plantcore.reports.text.certificate_text`).

        Parameters
        ----------
        caution : bool, optional
            End with the safety caution (default).  Pass False only when the caution is
            printed elsewhere in the same report.
        labels : (str, str), optional
            How to call the two models (file names, say); default their names.
        """
        return render(self, "text", caution=caution, labels=labels)

    def _frequency_text(self) -> str:
        return frequency_phrase(self.peak_frequency, self.is_discrete, self.sample_time)


def _validate_tol(tol) -> float:
    if isinstance(tol, bool):   # one error type for every bad tol
        raise ValueError(f"tol must be a positive number below 1, got {tol!r}.")  # noqa: TRY004
    try:
        value = float(tol)
    except (TypeError, ValueError):
        raise ValueError(f"tol must be a positive number below 1, got {tol!r}.") from None
    if not math.isfinite(value) or not (0.0 < value < 1.0):
        raise ValueError(f"tol must be a positive number below 1 (a relative error), got {tol!r}.")
    return value


def _float_model(obj, exact: bool, which: str) -> StateSpaceModel:
    """``as_model``; with ``exact=True`` also tuples of rational entries (strings, fractions)."""
    try:
        return as_model(obj)
    except ValueError:
        if not exact or not isinstance(obj, (tuple, list)):
            raise
    from plantcore.structure.exact import (
        _exact_model,  # the one validated converter for exact entries
    )

    em = _exact_model(obj)
    if em.parameters:
        names = ", ".join(s.name for s in em.parameters)
        raise ValueError(f"model {which} has symbols ({names}); the equivalence certificate "
                         "needs numbers, so substitute values for the symbols first.")

    def arr(M, rows, cols):
        return np.array([[float(M[i, j]) for j in range(cols)] for i in range(rows)], dtype=float)

    n, m, p = em.A.rows, em.B.cols, em.C.rows
    return StateSpaceModel(arr(em.A, n, n), arr(em.B, n, m), arr(em.C, p, n), arr(em.D, p, m))


def _mismatch(a: StateSpaceModel, b: StateSpaceModel) -> list:
    reasons = []
    if a.n_inputs != b.n_inputs:
        reasons.append(f"Model A has {a.n_inputs} inputs but model B has {b.n_inputs}; "
                       "transfer matrices of different sizes cannot be equal.")
    if a.n_outputs != b.n_outputs:
        reasons.append(f"Model A has {a.n_outputs} outputs but model B has {b.n_outputs}; "
                       "transfer matrices of different sizes cannot be equal.")
    if a.is_discrete != b.is_discrete:
        ca, cb = (("discrete" if m.is_discrete else "continuous") for m in (a, b))
        reasons.append(f"Model A is {ca}-time but model B is {cb}-time; discretize one of "
                       "them before comparing.")
    elif a.is_discrete and not math.isclose(a.dt, b.dt, rel_tol=1e-12, abs_tol=0.0):
        reasons.append(f"Model A has sample time {a.dt:g} but model B has {b.dt:g}; models "
                       "with different sample times cannot have the same transfer function.")
    return reasons


def _difference(a: StateSpaceModel, b: StateSpaceModel) -> StateSpaceModel:
    """The parallel connection ``a - b``: states of a, then of b; output y_a - y_b."""
    na, nb = a.n, b.n
    A = np.zeros((na + nb, na + nb))
    A[:na, :na] = a.A
    A[na:, na:] = b.A
    B = np.vstack([a.B, b.B])
    C = np.hstack([a.C, -b.C])
    D = a.D - b.D
    return StateSpaceModel(A, B, C, D, a.dt)


def _spectral_radius(A) -> float:
    if A.shape[0] == 0:
        return 0.0
    return float(np.max(np.abs(np.linalg.eigvals(A))))


#: What two models share when their difference is computed directly (see
#: :func:`plantcore.reduction.equivalence_resolution.difference_with_rounding_bound`).
_SHARED = {"input": "state and input matrices A and B",
           "output": "state and output matrices A and C"}


def _pole_at_defective_boundary_pole(A, defective, discrete: bool, scale: float):
    """The frequency of a pole of ``A`` (the minimal difference) that lies, within the
    accuracy of computed defective eigenvalues, on the boundary at a numerically defective
    pole of the two models; None when there is none.

    A defective eigenvalue of multiplicity ``k`` (a double integrator: ``k = 2``) is moved
    by a perturbation of size ``eps ||A||`` by about ``eps^(1/k) ||A||`` (J. H. Wilkinson,
    *The Algebraic Eigenvalue Problem*, Oxford, 1965, chapter 2), so the pole at 0 of the
    difference between two models with double integrators comes out of the minimal
    realization at ``1e-9`` rather than within the boundary tolerance of order ``eps``.
    Such a pole counts as on the boundary when it lies within ``1000 sqrt(eps) scale`` (the
    radius of :func:`~plantcore.reduction.equivalence_resolution.examined_frequencies`) of
    the boundary and of a defective pole of ``a`` or ``b`` that lies as near the boundary
    itself.
    """
    if A.shape[0] == 0 or np.asarray(defective).size == 0:
        return None
    radius = 1e3 * math.sqrt(np.finfo(float).eps) * max(scale, 1.0 if discrete else 0.0)

    def distance(lam):
        return np.abs(np.abs(lam) - 1.0) if discrete else np.abs(lam.real)

    defective = np.asarray(defective, dtype=complex)
    anchors = defective[distance(defective) <= radius]
    if anchors.size == 0:
        return None
    with np.errstate(all="ignore"):
        lam = np.linalg.eigvals(A)
    near = lam[(distance(lam) <= radius)
               & (np.min(np.abs(lam[:, None] - anchors[None, :]), axis=1) <= 2 * radius)]
    if near.size == 0:
        return None
    pole = near[np.argmin(distance(near))]
    return float(abs(np.angle(pole)) if discrete else abs(pole.imag))


def _jointly_equilibrated(a: StateSpaceModel, b: StateSpaceModel):
    """Both models after one exact power-of-two state scaling, chosen for the two together
    (``A``, ``[B_a, B_b]``, ``[C_a; C_b]``), so that matrices the two share stay identical."""
    from plantcore.core.equilibration import equilibrate

    eq = equilibrate(a.A, np.hstack([a.B, b.B]), np.vstack([a.C, b.C]))
    first = eq.apply(a.A, a.B, a.C) + (np.asarray(a.D, dtype=float),)
    second = eq.apply(b.A, b.B, b.C) + (np.asarray(b.D, dtype=float),)
    return first, second


def _markov_parameters(model: StateSpaceModel, count: int, rho: float) -> list:
    """``[D, C B / rho, C (A/rho) B / rho, ...]``: the first ``count`` Markov parameters of
    the frequency-scaled transfer matrix ``G(rho v)`` (same units as ``G``, no overflow)."""
    from plantcore.core.equilibration import equilibrate

    eq = equilibrate(model.A, model.B, model.C)
    A, B, C = eq.apply(model.A, model.B, model.C)
    out = [np.array(model.D, dtype=float)]
    X = B / rho
    As = A / rho
    for _ in range(count - 1):
        out.append(C @ X)
        X = As @ X
    return out


def _markov_scale(a: StateSpaceModel, b: StateSpaceModel, count: int, tol: float,
                  poles=None) -> float:
    """The frequency scale ``rho`` of the Markov check (see :func:`check_equivalence`, 5).

    The larger spectral radius of the two state matrices, but never so far below the norm
    ``N`` of the equilibrated state matrices that rounding in the powers ``(A/rho)^k`` could
    reach the tolerance: the first-order rounding error of ``(A/rho)^k`` grows like
    ``k eps (N/rho)^k`` (N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd
    ed., SIAM 2002, chapter 18), so ``N/rho`` is capped at ``kappa`` with
    ``kappa^(count-1) = tol / (100 eps)`` (at least 1).  Integrators computed at rounding level
    (a double integrator's eigenvalues near ``1e-16`` or, defective, ``1e-8``) then no longer
    set the scale, and their Markov parameters cannot blow up.
    """
    from plantcore.core.equilibration import equilibrate

    if poles is not None:
        rho = float(np.max(np.abs(poles))) if poles.size else 0.0
    else:
        rho = max(_spectral_radius(a.A), _spectral_radius(b.A))
    norm = 0.0
    for m in (a, b):
        if m.n:
            A_e = equilibrate(m.A, m.B, m.C).apply(m.A, m.B, m.C)[0]
            norm = max(norm, float(frobenius(A_e)))
    if not norm > 0 or not math.isfinite(norm):
        return rho if rho > 0 else 1.0
    growth = float(tol) / (100.0 * np.finfo(float).eps)
    kappa = growth ** (1.0 / (count - 1)) if count > 1 and growth > 1.0 else 1.0
    return max(rho, norm / kappa)


def _markov_error(a: StateSpaceModel, b: StateSpaceModel, poles=None, tol: float = 1e-9):
    """Largest relative difference of the first Markov parameters; returns (error, count).
    ``poles``: the eigenvalues of both state matrices when already known."""
    count = min(2 * max(a.n, b.n), 2 * MARKOV_LIMIT) + 1
    if a.n_inputs == 0 or a.n_outputs == 0:
        return 0.0, count
    rho = _markov_scale(a, b, count, tol, poles)
    Ma = _markov_parameters(a, count, rho)
    Mb = _markov_parameters(b, count, rho)
    size_a = max(np.linalg.norm(M, 2) for M in Ma)
    size_b = max(np.linalg.norm(M, 2) for M in Mb)
    ref = size_a if size_a > 0 else size_b
    worst = max(np.linalg.norm(x - y, 2) for x, y in zip(Ma, Mb))
    if worst == 0:
        return 0.0, count
    if not ref > 0 or not math.isfinite(ref):
        return math.inf, count
    return float(worst / ref), count


def _exact_comparison(a_obj, b_obj, a: StateSpaceModel, b: StateSpaceModel):
    """Exact comparison of the transfer matrices (Markov parameters in integer arithmetic)."""
    from plantcore.core.progress import Progress
    from plantcore.structure.exact import exact_transfer_comparison

    source_a = a_obj if isinstance(a_obj, (tuple, list)) else a
    source_b = b_obj if isinstance(b_obj, (tuple, list)) else b
    with Progress("exact comparison", total=2 * (a.n + b.n)) as progress:
        return exact_transfer_comparison(source_a, source_b, progress=progress)


def _gain_near(model: StateSpaceModel, w: float) -> float:
    """Gain of ``model`` at ``w`` (or just beside it, if ``w`` is a pole); inf if neither."""
    if math.isnan(w):
        w = 0.0
    if math.isinf(w):
        return float(np.linalg.norm(model.D, 2))
    for x in (w, w * (1 + 1e-3) + 1e-3):
        point = np.exp(1j * x) if model.is_discrete else 1j * x
        try:
            value = float(np.linalg.norm(model.transfer_at(point), 2))
        except ValueError:
            continue
        if math.isfinite(value):
            return value
    return math.inf


def _incomparable(a, b, tol, reasons) -> EquivalenceCertificate:
    return EquivalenceCertificate(
        equivalent=False, difference_order=None, peak_error=math.inf,
        relative_error=math.inf, peak_frequency=math.nan, markov_error=math.inf,
        reasons=tuple(reasons) + ("Not equivalent: the models cannot be compared.",),
        tolerance=tol, criterion="not comparable", reference_gain=math.nan,
        d_error=math.inf, compared_markov_parameters=0, exact_equal=None, is_discrete=None,
        sample_time=None, orders=(a.n, b.n), names=(a.name, b.name),
        verdict="not equivalent", verdict_basis="not comparable",
        difference_order_method="not formed: the models cannot be compared",
        peak_error_method="not measured: the models cannot be compared")


# --- public function --------------------------------------------------------------------------

#: At most ``2 * MARKOV_LIMIT + 1`` Markov parameters are compared: enough to determine the
#: difference of two models of up to ``MARKOV_LIMIT`` states each; on larger models they are
#: a check among others (they never decide the verdict), and ``2 n`` products with ``A``
#: would cost more than the rest of the certificate.
MARKOV_LIMIT = 64

#: Above this many states in total, the difference ``a - b`` is not reduced to a minimal
#: realization unless asked (``realize_difference=True``): on two models with shared
#: eigenvalues that reduction is the most expensive step by far, and the verdict rests on
#: the measured differences anyway.
REALIZE_LIMIT = 40

#: Up to this many states in total, the peak of the difference is located by the peak-gain
#: level-set test on the difference in block form; above, by a local search from the largest
#: measured difference (a level-set test on ``n_a + n_b`` states costs eight times the one
#: on ``a``).
BLOCK_PEAK_LIMIT = 200


@threads_by_size(2)
def check_equivalence(a, b, tol: float = 1e-9, *, exact: bool = False,
                      reference_peak_gain=None,
                      realize_difference: bool | None = None) -> EquivalenceCertificate:
    """Certify whether two models have the same transfer matrix.

    Parameters
    ----------
    a : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        The original (reference) model: ``A`` (n_a, n_a), ``B`` (n_a, m), ``C`` (p, n_a),
        ``D`` (p, m).
    b : same kinds
        The model to check against it (for example a reduced model), with the same numbers
        of inputs and outputs for the comparison to make sense.
    tol : float, optional
        Largest relative peak error accepted, default ``1e-9``: the models are equivalent
        when ``||G_a - G_b||_inf <= tol * ||G_a||_inf``.
    exact : bool, optional
        Also compare the transfer matrices in exact rational arithmetic (sympy), and let
        that comparison decide.  Floats are taken at their exact binary value, so a model
        and a rounded similarity transform of it are *not* exactly equal; for decimal data,
        give tuples of strings (``"0.1"``) or fractions.  Meant for small models (a few
        tens of states); models with symbols are refused.
    reference_peak_gain : PeakGain, optional
        ``peak_gain(a)`` when the caller has already computed it (a report compares one
        model with several others); it is used as given, not recomputed.
    realize_difference : bool or None, optional
        Reduce the difference ``a - b`` to a minimal realization to report its order:
        None (default) does so up to ``REALIZE_LIMIT`` states in all, True always, False
        never.  The verdict rests on the measured differences either way.

    Returns
    -------
    EquivalenceCertificate
        Never raises for models that cannot be compared (different numbers of inputs or
        outputs, continuous against discrete time, different sample times): those give
        ``equivalent=False`` with a reason.

    Raises
    ------
    ValueError
        A model is not valid, or ``tol`` is not in ``(0, 1)``.

    Notes
    -----
    1. *Measured difference.*  Both transfer matrices are evaluated, each in its own
       (exactly power-of-two equilibrated) coordinates, at a set of frequencies: zero,
       infinity, a logarithmic grid spanning the pole magnitudes of both models, the pole
       frequencies, the peak frequency of ``a`` and the peak frequency of the difference
       (below).  At each, ``sigma_max(G_a - G_b)`` is the measured difference: the
       difference in block form, ``A = diag(A_a, A_b)``, ``B = [B_a; B_b]``,
       ``C = [C_a, -C_b]``, evaluated without forming any realization of it.
       :attr:`~EquivalenceCertificate.peak_error` is the largest of them.
    2. *Attainable accuracy.*  At the same frequency, a first-order bound on the rounding
       in that difference, computed from the LU factorization of ``s I - A`` of each model:
       the backward error of the solve, ``|dM| <= gamma_3n P |L| |U|`` (Higham [3]_,
       Theorem 9.4), propagated as ``|C (sI - A)^{-1}| |dM| |(sI - A)^{-1} B|``; the rounding
       of ``C X + D`` (Higham [3]_, section 3.5); and the effect of a relative rounding
       ``u`` of every stored entry of ``A, B, C, D`` (the componentwise condition of the
       transfer matrix).  The two models' bounds are added.  On stiff models the first term
       dominates at low frequency and grows like ``u ||C M^{-1}|| ||M|| ||M^{-1} B||``:
       with eigenvalues from ``-1e-4`` to ``-1e4`` it is about ``1e-8`` of the gain, more
       than the default tolerance.  When the two models share ``A`` and ``B`` (or ``A`` and
       ``C``) bit for bit, as a model and a copy with changed output (input) gains do, the
       difference is computed directly as ``(C_a - C_b)(sI - A)^{-1} B + D_a - D_b`` (or
       the dual) from one solve, and bounded for that computation
       (:func:`~plantcore.reduction.equivalence_resolution.difference_with_rounding_bound`):
       the rounding of the shared solve then enters at the size of the difference, not of
       ``G``, so a true difference of ``1e-6`` is resolved on models whose evaluation is
       only accurate to ``1e-4`` (up to ``DENSE_LIMIT`` states).
    3. *Verdict* (``tau = tol * reference_gain``).  *Not equivalent* when at some frequency
       the difference exceeds both ``tau`` and ``RESOLUTION_MARGIN`` (100) times the
       attainable accuracy there: it is resolved, rounding cannot explain it.
       *Equivalent* when at every frequency the difference is at most ``tau`` ("within the
       tolerance") or at most the attainable accuracy ("equivalent to the attainable
       accuracy X", X the largest relative attainable accuracy needed).  *Undecided*
       otherwise: somewhere the difference exceeds the tolerance and the first-order
       rounding bound, but not by the margin; rounding the bound does not see (how one
       model was computed from the other) cannot be ruled out, and neither can a true
       difference.  A difference with a pole on the boundary (infinite peak error, found
       by the minimal realization below) is not equivalent; a pole of the minimal
       difference within ``1000 sqrt(eps) ||A||`` of the boundary and of a numerically
       defective boundary pole of the two models (a double integrator, whose poles are
       computed about ``sqrt(eps) ||A||`` apart; Wilkinson [4]_) counts as on the boundary.
       When ``a`` itself has a pole on the boundary (infinite peak gain), ``tau`` is taken
       frequency by frequency as ``tol`` times the gain of ``a`` there, wherever that gain
       is known to two digits (not near a zero of ``a``), and the relative error is the
       largest such ratio.  With ``exact=True`` exact equality decides.
    4. *Order and peak of the difference.*  Up to ``REALIZE_LIMIT`` (40) states in all, or
       with ``realize_difference=True``, the minimal realization of the block difference
       (:func:`plantcore.minimal_realization`, orthogonal staircase forms, default rank
       tolerance, decisions recorded); it has order 0 when the transfer functions agree up
       to the feedthrough, and never more than ``n_a + n_b``.  On stiff or large models the
       staircase may keep states whose contribution is only rounding, so a nonzero order
       alone does not mean the models differ; on two models that share their eigenvalues
       it is also the costliest step, which is why larger differences are not reduced
       (:attr:`~EquivalenceCertificate.difference_order` is then None, and
       :attr:`~EquivalenceCertificate.difference_order_method` says so).  The peak of the
       difference is located by the peak-gain level-set method on the minimal difference,
       or, when it was not formed, on the difference in block form up to
       ``BLOCK_PEAK_LIMIT`` (200) states; above that, by a local search (Brent's method)
       around the largest measured difference: a local search, stated in the reasons.
       The difference is then measured there as in 1.  Models above ``DENSE_LIMIT`` (150)
       states are evaluated on a Schur form shared with their peak gain (``O(n^2 (m + p))``
       per frequency), the attainable accuracy then including the measured residual of
       that Schur form.  The relative error divides by the peak
       gain of ``a``; when that is infinite (``a`` has a pole on the boundary), by the gain
       of ``a`` at the frequency where the measured difference peaks.
    5. *Markov parameters* (impulse-response coefficients) ``D, CB, CAB, ...``: the first
       ``2 max(n_a, n_b) + 1`` of them, enough to determine the difference (its order is
       at most ``n_a + n_b``), and at most ``2 MARKOV_LIMIT + 1 = 129``.  To avoid overflow and underflow they are those of the
       frequency-scaled models ``G(rho v)``, ``rho`` the larger spectral radius of the two
       state matrices, raised where it lies so far below their norm that rounding in the
       powers of ``A/rho`` could reach ``tol`` (integrators computed at rounding level, say;
       see ``_markov_scale``): ``C (A/rho)^k B / rho``, which have the units of ``G``.  The
       error is the largest difference relative to the largest scaled parameter of ``a``.
       For strongly non-normal or stiff ``A`` it may report a rounding-level difference
       above ``tol`` while the transfer functions agree; it does not decide the verdict.

    What the frequency set cannot do: a difference confined to a band narrower than the
    grid spacing away from every pole frequency and from the peak frequency of the
    minimal difference would be missed; the peak-gain iteration on the minimal difference
    is what finds such a band.

    The difference-system approach is the standard way of comparing realizations
    (Kailath [1]_, section 6.2; Zhou, Doyle and Glover [2]_, section 3.11 for the parallel
    connection and section 4 for the norms); the rounding bounds are Higham's [3]_.

    References
    ----------
    .. [1] T. Kailath, *Linear Systems*, Prentice Hall, 1980.
    .. [2] K. Zhou, J. C. Doyle and K. Glover, *Robust and Optimal Control*, Prentice Hall,
       1996.
    .. [3] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM,
       2002 (Lemma 3.5, section 3.5, section 7.2, Theorem 9.4).
    .. [4] J. H. Wilkinson, *The Algebraic Eigenvalue Problem*, Oxford, 1965, chapter 2.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> g = pc.from_transfer_function([1.0, 3.0], [1.0, 4.0, 3.0])   # (s+3)/((s+1)(s+3))
    >>> cert = pc.check_equivalence(g, pc.minimal_realization(g).model)
    >>> cert.equivalent, cert.difference_order
    (True, 0)
    >>> other = pc.from_transfer_function([1.0], [1.0, 1.001])         # pole moved by 1e-3
    >>> pc.check_equivalence(g, other).equivalent
    False
    >>> pc.check_equivalence(g, g.replace(dt=0.1)).equivalent          # domains differ
    False
    >>> pc.check_equivalence(g, other).verdict
    'not equivalent'
    """
    tol = _validate_tol(tol)
    exact = bool(exact)
    ma = _float_model(a, exact, "A")
    mb = _float_model(b, exact, "B")
    problems = _mismatch(ma, mb)
    if problems:
        return _incomparable(ma, mb, tol, problems)
    # The peak gain of A on every BLAS thread (above ONE_THREAD_SIZE states its Hamiltonian
    # eigenvalue problems gain from a second one), the rest of the certificate on one: its
    # evaluations are many triangular solves and small products, slower on two threads
    # (n = 1,000, three inputs and outputs, reference peak given: 2.6 s on one thread,
    # 3.5 s on two, two runs each).
    ref_peak = peak_gain(ma) if reference_peak_gain is None else reference_peak_gain
    with one_blas_thread():
        return _certify(a, b, ma, mb, tol, exact, ref_peak, realize_difference)


def _certify(a, b, ma: StateSpaceModel, mb: StateSpaceModel, tol: float, exact: bool,
             ref_peak, realize_difference) -> EquivalenceCertificate:
    """The certificate of two comparable models (the body of :func:`check_equivalence`),
    given the peak gain of ``a``."""
    from plantcore.structure.minimal import minimal_realization

    discrete, dt = ma.is_discrete, ma.dt
    where = "unit circle" if discrete else "imaginary axis"
    reasons = []
    kind = "discrete-time" if discrete else "continuous-time"
    reasons.append(
        f"Compared the transfer matrices of two {kind} models with {counted(ma.n_inputs, 'input')} "
        f"and {counted(ma.n_outputs, 'output')}, of orders {ma.n} and {mb.n}.")

    d_diff = np.asarray(ma.D - mb.D, dtype=float)
    d_error = float(np.linalg.norm(d_diff, 2)) if d_diff.size else 0.0
    total = ma.n + mb.n
    if ma.n_inputs == 0 or ma.n_outputs == 0:
        mr = None
        order, decisions = 0, ()
        order_method = "no inputs or no outputs: the transfer matrices are empty"
    elif realize_difference or (realize_difference is None and total <= REALIZE_LIMIT):
        mr = minimal_realization(_difference(ma, mb))
        order, decisions = min(mr.order, total), tuple(mr.decisions)
        order_method = (f"minimal realization of the {total}-state difference A - B in block "
                        "form (orthogonal staircase rank decisions, default tolerance)")
        if mr.order > total:
            order_method += f"; it reported {mr.order}, capped at the {total} states there are"
    else:
        mr = None
        order, decisions = None, ()
        order_method = (f"not formed: the {total}-state difference is not reduced to a minimal "
                        f"realization above {REALIZE_LIMIT} states unless "
                        "realize_difference=True; the verdict rests on the measured "
                        "differences")
    fragile = any_fragile(decisions)

    # Judge "pole on the boundary" against the scale of the two models, not of the small
    # minimal difference (whose shared-integrator remnant may be 1e-26).
    scale = max(frobenius(m.A) for m in (ma, mb))
    difference_peak = None
    if order == 0 and mr is None:
        located = "no peak of the difference to locate (the transfer matrices are empty)"
    elif mr is not None and order > 0:
        difference_peak = _peak_gain(mr.model, 1e-10, scale)
        located = "the peak of the minimal difference (level-set test)"
    elif mr is None and total <= BLOCK_PEAK_LIMIT:
        difference_peak = _peak_gain(_difference(ma, mb), 1e-10, scale)
        located = (f"the peak of the {total}-state difference in block form (level-set test, "
                   "no realization of it reduced)")
    elif mr is None:
        located = ("the largest measured difference refined by a local search (no level-set "
                   f"test on the {total}-state difference above {BLOCK_PEAK_LIMIT} states)")
    else:
        located = "no peak of the difference to locate (its minimal realization has order 0)"

    shared = shared_matrices((ma.A, ma.B, ma.C, ma.D), (mb.A, mb.B, mb.C, mb.D))
    first, second = _jointly_equilibrated(ma, mb) if shared else (_equilibrated(ma),
                                                                  _equilibrated(mb))
    evaluate_a = ResponseEvaluator(first, discrete)
    evaluate_b = ResponseEvaluator(second, discrete)
    poles = np.concatenate([evaluate_a.poles, evaluate_b.poles])
    extra = [ref_peak.frequency] + ([difference_peak.frequency] if difference_peak else [])
    state_scale = max(frobenius(m[0]) for m in (first, second))
    defective = np.concatenate([evaluate_a.defective(), evaluate_b.defective()])
    if mr is not None and difference_peak is not None and math.isfinite(difference_peak.value):
        on_boundary = _pole_at_defective_boundary_pole(mr.model.A, defective, discrete,
                                                       state_scale)
        if on_boundary is not None:
            difference_peak = dataclasses.replace(
                difference_peak, value=math.inf, upper_bound=math.inf, frequency=on_boundary,
                boundary_pole=True,
                message=("A pole of the minimal difference lies within the accuracy of a "
                         f"numerically defective pole on the {where} of the two models."))
    frequencies = examined_frequencies(poles, discrete, extra, scale=state_scale,
                                       defective=defective)
    if shared:
        checks = compare_shared_responses(first, second, shared, frequencies, discrete)
    else:
        checks = compare_responses(evaluate_a, evaluate_b, frequencies, discrete)
    if mr is None and difference_peak is None and checks:
        refined = refine_largest_difference(evaluate_a, evaluate_b, checks, discrete)
        if refined is not None and refined not in checks:
            checks = checks + (refined,)
    if shared:
        evaluated = (f"the difference computed directly from the shared {_SHARED[shared]}, "
                     "by a dense LU factorization")
    elif evaluate_a.dense and evaluate_b.dense:
        evaluated = "both responses evaluated, each by a dense LU factorization"
    else:
        evaluated = ("both responses evaluated, on Schur forms where a model has more than "
                     f"{DENSE_LIMIT} states")
    peak_method = (f"measured at {len(checks)} frequencies ({evaluated}); the grid includes "
                   f"the pole frequencies and {located}")

    # With a pole of a on the boundary its peak gain is infinite and ``tol`` times it bounds
    # nothing: each measured difference is then held to ``tol`` times the gain of a at its
    # own frequency (and the attainable accuracy to ATTAINABLE_LIMIT times it).
    pointwise = not math.isfinite(ref_peak.value)
    if pointwise:
        threshold, limit = _pointwise(tol, checks), math.inf
    else:
        threshold, limit = tol * ref_peak.value, _limit(ref_peak.value, checks)
    judged = resolution_verdict(checks, threshold, limit=limit)
    # A boundary pole of the minimal difference rests on its rank decisions and the pole
    # tolerance; it counts only when a measured difference is resolved from rounding somewhere.
    boundary_pole = (difference_peak is not None and math.isinf(difference_peak.value)
                     and resolution_verdict(checks, 0.0).verdict == "not equivalent")
    unconfirmed_pole = (difference_peak is not None and math.isinf(difference_peak.value)
                        and not boundary_pole)
    if boundary_pole:
        peak_error, peak_frequency = math.inf, difference_peak.frequency
        peak_method = "the minimal difference has a pole on the " + where
    elif checks:
        largest = max(checks, key=lambda c: c.difference)
        peak_error = largest.difference
        peak_frequency = largest.frequency if peak_error > 0 else math.nan
        if order == 0 and d_error > 0:
            peak_frequency = 0.0          # the difference is the constant D_A - D_B
    else:
        peak_error, peak_frequency = math.nan, math.nan

    reference = ref_peak.value
    relative_error = _relative(peak_error, reference)
    if pointwise and math.isfinite(peak_error) and peak_error > 0:
        against = [c for c in checks if _gain_known(c)] or [
            c for c in checks if 0 < c.gain < math.inf]
        if against:
            worst = max(against, key=lambda c: c.difference / c.gain)
            reference, relative_error = worst.gain, _relative(worst.difference, worst.gain)
        else:
            reference = _gain_near(ma, peak_frequency)
            relative_error = _relative(peak_error, reference)
        reasons.append(
            f"Model A has a pole on the {where} (at "
            f"{frequency_phrase(ref_peak.frequency, discrete, dt)}), so its peak gain is "
            "infinite; each measured difference is held against the gain of model A at its "
            "own frequency, and the relative error is the largest of these ratios.")

    if order is None:
        reasons.append(f"The {total}-state difference A - B was compared by its measured "
                       "frequency responses in block form; no minimal realization of it was "
                       "computed.")
    elif order == 0:
        reasons.append("A minimal realization of the difference A - B has order 0: the "
                       "dynamics agree" + (f", and the feedthrough matrices differ by "
                                           f"{short_number(d_error)}." if d_error > 0 else "."))
    else:
        reasons.append(f"A minimal realization of the difference A - B has order {order}.")
    reasons.append(f"The peak error was located at {located}.")
    if boundary_pole:
        reasons.append(
            f"The difference has a pole on the {where} at "
            f"{frequency_phrase(peak_frequency, discrete, dt)}: the models differ without "
            "bound there.")
    elif peak_error > 0 and order != 0:
        reasons.append(
            f"The transfer functions differ most at "
            f"{frequency_phrase(peak_frequency, discrete, dt)}, where the measured difference "
            f"is {short_number(relative_error)} of the original's peak gain.")
    if reference == 0 and peak_error > 0:
        reasons.append("Model A has zero gain at every frequency while model B does not, so "
                       "the relative error is infinite.")

    markov_error, markov_count = _markov_error(ma, mb, poles, tol)
    if markov_error <= tol:
        reasons.append(f"The first {markov_count} Markov parameters (impulse-response "
                       f"coefficients, D first) agree to {short_number(markov_error)} relative.")
    else:
        reasons.append(f"The first {markov_count} Markov parameters (impulse-response "
                       f"coefficients, D first) differ by up to {short_number(markov_error)} relative.")
    if d_error > 0 and order != 0:
        reasons.append(f"The feedthrough matrices D differ by {short_number(d_error)} (spectral norm).")

    if unconfirmed_pole:
        reasons.append(
            f"The minimal realization of the difference has a pole within the boundary "
            f"tolerance of the {where}, but no measured difference is resolved from rounding: "
            "the pole is not taken as a difference.")

    # The verdict from the measured differences against the tolerance and the attainable accuracy.
    if boundary_pole:
        verdict, basis, decided_at = "not equivalent", "boundary pole", None
    else:
        verdict, basis, decided_at = judged.verdict, judged.basis, judged.check
    # the gain the decisive frequency's figures are relative to
    local = decided_at.gain if pointwise and decided_at is not None else reference
    attainable = _relative(decided_at.attainable, local) if decided_at else math.nan
    decision_frequency = decided_at.frequency if decided_at else (
        peak_frequency if boundary_pole else math.nan)
    numeric_start = len(reasons)
    reasons += _verdict_reasons(verdict, basis, decided_at, local, tol, attainable,
                                relative_error, order, markov_error, discrete, dt)

    exact_equal = None
    criterion = "relative peak error"
    if exact:
        comparison = _exact_comparison(a, b, ma, mb)
        exact_equal, differing = comparison.equal, comparison.differing_entries
        how = (f" ({comparison.method}: D and the first {comparison.compared_markov_parameters} "
               "Markov parameters, which decide by the Cayley-Hamilton theorem)"
               if comparison.compared_markov_parameters else f" ({comparison.method})")
        if exact_equal:
            reasons.append("In exact rational arithmetic the transfer matrices are identical"
                           + how + ".")
        else:
            i, j = differing[0]
            reasons.append(
                f"In exact rational arithmetic the transfer matrices differ in {len(differing)} "
                f"of {ma.n_outputs * ma.n_inputs} entries, first from input "
                f"{ma.inputs[j]!r} to output {ma.outputs[i]!r}.")
        verdict = "equivalent" if exact_equal else "not equivalent"
        basis = criterion = "exact rational arithmetic"
        reasons[:] = _superseded_by_exact(reasons, numeric_start, exact_equal)
        if exact_equal:
            peak_error, relative_error, peak_frequency = 0.0, 0.0, math.nan
            peak_method = "proven 0 by exact rational arithmetic"
        reasons.append(("Equivalent" if exact_equal else "Not equivalent")
                       + ": decided by exact rational arithmetic.")
    if fragile:
        reasons.append("A rank decision of the difference's minimal realization lies within "
                       "a factor 100 of its tolerance: its order depends on the tolerance.")

    return EquivalenceCertificate(
        equivalent=verdict == "equivalent",
        difference_order=None if order is None else int(order),
        peak_error=float(peak_error), relative_error=float(relative_error),
        peak_frequency=float(peak_frequency), markov_error=float(markov_error),
        reasons=tuple(reasons), tolerance=tol, criterion=criterion,
        reference_gain=float(reference), d_error=d_error,
        compared_markov_parameters=markov_count, exact_equal=exact_equal,
        is_discrete=discrete, sample_time=dt, orders=(ma.n, mb.n), names=(ma.name, mb.name),
        decisions=decisions, fragile=fragile, difference_peak=difference_peak,
        verdict=verdict, verdict_basis=basis, attainable_accuracy=float(attainable),
        decision_frequency=float(decision_frequency), difference_order_method=order_method,
        peak_error_method=peak_method, frequency_checks=checks)


#: How the floating-point verdict sentences begin (see :func:`_verdict_reasons`).
_NUMERIC_VERDICTS = ("Equivalent to the attainable accuracy", "Not equivalent", "Undecided",
                     "Equivalent")


def _superseded_by_exact(reasons, numeric_start: int, exact_equal: bool) -> list:
    """The reasons with the floating-point verdict marked as superseded by the exact one.

    With ``exact=True`` the exact comparison decides; the floating-point sentences stay (they
    say what was measured) but no longer read as a verdict of their own, so the reasons
    cannot say "Equivalent" and "Not equivalent" side by side.  An order-0 difference that
    the exact comparison contradicts is qualified in the same way.
    """
    out = list(reasons)
    for k in range(numeric_start, len(out)):
        line = out[k]
        for prefix in _NUMERIC_VERDICTS:
            if line.startswith(prefix):
                phrase = prefix[0].lower() + prefix[1:]
                rest = line[len(prefix):]
                rest = ", since" + rest[1:] if rest.startswith(":") else rest
                out[k] = ("Superseded by the exact comparison: floating point alone would say "
                          f"{phrase}{rest}")
                break
    if not exact_equal:
        for k, line in enumerate(out[:numeric_start]):
            if line.startswith("A minimal realization of the difference A - B has order 0"):
                out[k] = ("A minimal realization of the difference A - B has order 0 at the "
                          "rank tolerance: in floating point the dynamics agree to that "
                          "tolerance; the exact comparison below finds a difference.")
    return out


def _limit(reference: float, checks) -> float:
    """The largest absolute attainable accuracy under which "equivalent" may be said:
    ``ATTAINABLE_LIMIT`` times the reference gain, or no limit when the gain of ``a`` is
    nowhere above the attainable accuracy (``a`` is zero up to rounding, and only absolute
    comparisons mean anything)."""
    if not any(c.gain > c.attainable for c in checks):
        return math.inf
    return ATTAINABLE_LIMIT * reference


def _gain_known(check) -> bool:
    """Whether the gain of ``a`` at this check is known to two digits: positive, finite and
    at least ``1 / ATTAINABLE_LIMIT`` times the attainable accuracy there."""
    return 0 < check.gain < math.inf and check.attainable <= ATTAINABLE_LIMIT * check.gain


def _pointwise(tol: float, checks):
    """The absolute threshold per :class:`FrequencyCheck` for a model ``a`` whose peak gain is
    infinite: ``tol`` times the gain of ``a`` at that frequency where that gain is known to
    two digits (:func:`_gain_known`); elsewhere (near a zero of ``a``, or a pole where the
    rounding swamps it) no bound, as a relative difference means nothing there.  When the
    gain is nowhere known so, ``tol`` times the gain everywhere."""
    strict = not any(_gain_known(c) for c in checks)

    def threshold(check) -> float:
        if strict or _gain_known(check):
            return tol * check.gain
        return math.inf
    return threshold


def _relative(value: float, reference: float) -> float:
    """``value / reference``: 0 for a zero value, ``inf`` when it cannot be formed."""
    if value == 0:
        return 0.0
    if math.isnan(value):
        return math.nan
    if math.isinf(value) or not (0 < reference < math.inf):
        return math.inf
    return value / reference


def _verdict_reasons(verdict, basis, check, reference, tol, attainable, relative_error,
                     order, markov_error, discrete, dt) -> list:
    """The sentences that say why the floating-point verdict is what it is."""
    if basis == "boundary pole":
        return ["Not equivalent: the difference has a pole on the boundary."]
    if basis == "no frequency":
        return ["Undecided: at no frequency examined were both transfer matrices defined."]
    at = frequency_phrase(check.frequency, discrete, dt)
    measured = _relative(check.difference, reference)
    if basis == "tolerance":
        out = [(f"Equivalent: the relative peak error {short_number(relative_error)} is within "
               f"the tolerance {short_number(tol)} (the attainable accuracy at the peak is "
               f"{short_number(attainable)}).")]
        if order:
            out.append(f"The {order} state(s) left in the difference carry only a difference "
                       "below the tolerance.")
        if markov_error > tol:
            out.append("The Markov parameters differ by more than the tolerance although the "
                       "peak error does not; this points to rounding in strongly non-normal "
                       "coordinates or fast modes, and deserves a look.")
        return out
    if basis == "attainable accuracy":
        out = [(f"Equivalent to the attainable accuracy {short_number(attainable)}: the relative "
               f"peak error {short_number(relative_error)} exceeds the tolerance "
               f"{short_number(tol)}, but at every frequency the difference is within what "
               "floating point can resolve for these two models (first-order rounding bound "
               f"of evaluating and storing them; largest needed at {at}).")]
        if order:
            out.append(f"The {order} state(s) left in the difference carry only a difference "
                       "below the attainable accuracy.")
        return out
    if basis == "resolved":
        ratio = (short_number(check.difference / check.attainable) if check.attainable > 0
                 else "infinitely many")
        return [(f"Not equivalent: at {at} the difference {short_number(measured)} (relative) "
                f"exceeds the tolerance {short_number(tol)} and is "
                f"{ratio}"
                f" times the attainable accuracy {short_number(attainable)} there (the margin "
                f"is {RESOLUTION_MARGIN:g}): rounding cannot explain it.")]
    return [(f"Undecided: at {at} the difference {short_number(measured)} (relative) exceeds "
            f"the tolerance {short_number(tol)} and the attainable accuracy "
            f"{short_number(attainable)} there, but by less than the margin "
            f"{RESOLUTION_MARGIN:g} that would tell it from rounding; neither equivalence nor "
            "a difference is proven. Compare with exact=True, or in better-conditioned "
            "coordinates (a balanced or modal realization).")]
