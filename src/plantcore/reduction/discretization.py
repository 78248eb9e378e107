"""Sampling a continuous model (zero-order hold, first-order hold, bilinear map), the way
back for a zero-order hold, and what sampling did to controllability and observability.

The hold equivalents come from the exponential of one augmented matrix (C. F. Van Loan,
"Computing integrals involving the matrix exponential", IEEE Transactions on Automatic
Control 23(3), 395-404, 1978), so no integral is approximated; the bilinear map is rational
and needs one LU factorization.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.errors import SamplingWarning
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import any_fragile
from plantcore.reduction.gramians import _fmt
from plantcore.structure.kalman import kalman_decomposition

__all__ = ["ContinuousFromSampled", "SampledModel", "SamplingComparison", "compare_sampling",
           "continuous_from_sampled", "discretize"]

ALIASING_TOLERANCE = 1e-6
"""Two continuous eigenvalues count as an aliased pair when their real parts agree to this
fraction of ``max(|λ_i|, |λ_j|, 1 / T)`` and their imaginary parts differ by a nonzero
multiple of ``2 pi / T`` to this fraction of ``2 pi / T``.  A pair that close gives sampled
eigenvalues that agree to about the same relative size, so controllability (observability)
of the sampled model is lost or, if not exactly, decided by margins of that size."""


@dataclass(frozen=True)
class SampledModel:
    """A continuous model sampled with a hold or the bilinear map.

    Attributes
    ----------
    model : StateSpaceModel
        The discrete model, ``dt = sample_time``, with the names of the continuous one.
    method : str
        ``"zero_order_hold"``, ``"first_order_hold"`` or ``"bilinear"``.
    sample_time : float
    prewarp_frequency : float or None
        The frequency (rad/s) at which the bilinear map matches the continuous response
        exactly; None for no prewarping.
    aliased_pairs : tuple of (complex, complex)
        Pairs of continuous eigenvalues that the sampling maps to one eigenvalue
        (see :data:`ALIASING_TOLERANCE`); empty for the bilinear map, which is one-to-one.
    """

    model: StateSpaceModel
    method: str
    sample_time: float
    prewarp_frequency: float | None
    aliased_pairs: tuple = ()


@dataclass(frozen=True)
class ContinuousFromSampled:
    """The continuous model whose zero-order-hold sample is the given discrete model.

    Attributes
    ----------
    model : StateSpaceModel
        The continuous model (``dt = None``); its eigenvalues have imaginary parts in
        ``(-pi / T, pi / T)`` (the principal logarithm).
    sample_time : float
    residual : float
        Relative 2-norm error of re-sampling: ``||expm(T [[A, B], [0, 0]]) - [[A_d, B_d],
        [0, I]]|| / ||[[A_d, B_d], [0, I]]||``.
    """

    model: StateSpaceModel
    sample_time: float
    residual: float


@dataclass(frozen=True)
class SamplingComparison:
    """Structure of a continuous model and of its sampled model, side by side.

    Attributes
    ----------
    continuous_controllable, sampled_controllable : int
        Dimension of the controllable subspace.
    continuous_observable, sampled_observable : int
        Dimension of the observable part (``n`` minus that of the unobservable subspace).
    continuous_minimal_order, sampled_minimal_order : int
    aliased_pairs : tuple of (complex, complex)
        As in :class:`SampledModel` (empty when the sampled model is not a hold equivalent
        or the method is the bilinear map).
    reasons : tuple of str
        Plain sentences: what sampling lost, or that nothing was lost.
    decisions : tuple of RankDecision
        The rank decisions of both Kalman decompositions, labelled ``"continuous: ..."`` and
        ``"sampled: ..."``.
    """

    continuous_controllable: int
    sampled_controllable: int
    continuous_observable: int
    sampled_observable: int
    continuous_minimal_order: int
    sampled_minimal_order: int
    aliased_pairs: tuple
    reasons: tuple
    decisions: tuple = field(default=(), repr=False)

    @property
    def lost_controllability(self) -> bool:
        return self.sampled_controllable < self.continuous_controllable

    @property
    def lost_observability(self) -> bool:
        return self.sampled_observable < self.continuous_observable

    @property
    def fragile(self) -> bool:
        return any_fragile(self.decisions)


def discretize(model, sample_time, *, method="zero_order_hold", prewarp_frequency=None) -> SampledModel:
    """The discrete-time equivalent of a continuous model at sample time ``T``.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        A continuous-time model.
    sample_time : float
        ``T > 0``, in the time unit of the model.
    method : {"zero_order_hold", "first_order_hold", "bilinear"}
        ``"zero_order_hold"``: the input is held constant over each period (exact for
        step-wise inputs).  ``"first_order_hold"``: the input is interpolated linearly
        between samples (the non-causal triangle hold, made causal by a shift of the state,
        below).  ``"bilinear"``: ``s = α (z - 1) / (z + 1)`` with ``α = 2 / T`` (Tustin),
        or ``α = ω0 / tan(ω0 T / 2)`` with prewarping at ``ω0``.
    prewarp_frequency : float, optional
        ``ω0`` in rad/s, ``0 < ω0 < π / T``; only with ``method="bilinear"``.

    Returns
    -------
    SampledModel
        With a :class:`~plantcore.core.errors.SamplingWarning` when two eigenvalues alias
        (the hold methods only).

    Notes
    -----
    Zero-order hold: ``expm(T [[A, B], [0, 0]]) = [[A_d, B_d], [0, I]]``; ``C_d = C``,
    ``D_d = D``.

    First-order hold: ``expm([[A T, B T, 0], [0, 0, I], [0, 0, 0]])`` has first block row
    ``[Φ, Γ1, Γ2]`` with ``Φ = e^{AT}``, ``Γ1 = ∫_0^T e^{Aσ} dσ B`` and
    ``Γ2 = ∫_0^T e^{A(T-σ)} (σ/T) dσ B`` (Van Loan 1978, theorem 1).  The linearly
    interpolated input gives ``x_{k+1} = Φ x_k + (Γ1 - Γ2) u_k + Γ2 u_{k+1}``; the state
    ``ξ_k = x_k - Γ2 u_k`` removes the dependence on ``u_{k+1}``:
    ``A_d = Φ``, ``B_d = Γ1 + (Φ - I) Γ2``, ``C_d = C``, ``D_d = D + C Γ2``.

    Bilinear: with ``F = (α I - A)^{-1}``, ``A_d = (α I + A) F``,
    ``B_d = sqrt(2 α) F B``, ``C_d = sqrt(2 α) C F``, ``D_d = D + C F B``.  Splitting the
    factor ``2 α`` evenly between ``B_d`` and ``C_d`` makes the discrete Gramians equal the
    continuous ones (so Hankel singular values and balanced truncation commute with the
    map); other tools put it elsewhere, which differs only by a scaling of the state.  The
    map fails when ``α`` is an eigenvalue of ``A``.

    Aliasing: sampling maps ``λ`` to ``e^{λT}`` (hold methods), so two eigenvalues with
    equal real parts whose imaginary parts differ by a nonzero multiple of ``2π / T``
    become one.  Then a model with one input loses controllability, and one with one output
    loses observability; with more inputs it can (R. E. Kalman, Y. C. Ho and K. S.
    Narendra, "Controllability of linear dynamical systems", Contributions to Differential
    Equations 1, 189-213, 1963).  :func:`compare_sampling` decides what was lost.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> sampled = pc.discretize(([[-2.0]], [[2.0]], [[1.0]]), 0.1)
    >>> bool(np.isclose(sampled.model.A[0, 0], np.exp(-0.2)))
    True
    """
    model = as_model(model)
    if model.is_discrete:
        raise ValueError(f"the model is already discrete (sample time {model.dt:g}); "
                         "discretize takes a continuous model.")
    T = _positive(sample_time, "sample_time")
    if method not in _METHODS:
        raise ValueError(f"method must be one of {', '.join(repr(k) for k in _METHODS)}; "
                         f"got {method!r}.")
    if prewarp_frequency is not None:
        if method != "bilinear":
            raise ValueError(f"prewarp_frequency applies to method='bilinear' only, not {method!r}.")
        w0 = _positive(prewarp_frequency, "prewarp_frequency")
        if not w0 < math.pi / T:
            raise ValueError(f"prewarp_frequency must lie below the Nyquist frequency "
                             f"pi / sample_time = {math.pi / T:.6g} rad/s; got {w0:.6g}.")
        prewarp_frequency = w0
    A, B, C, D = _METHODS[method](model, T, prewarp_frequency)
    sampled = StateSpaceModel(A, B, C, D, dt=T, states=model.states, inputs=model.inputs,
                              outputs=model.outputs, name=model.name)
    pairs = () if method == "bilinear" else _aliased_pairs(model.A, T)
    if pairs:
        warnings.warn(_aliasing_message(pairs, T), SamplingWarning, stacklevel=2)
    return SampledModel(sampled, method, T, prewarp_frequency, pairs)


def continuous_from_sampled(model) -> ContinuousFromSampled:
    """The continuous model whose zero-order-hold equivalent is ``model``.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace
        A discrete-time model (``dt > 0``).

    Returns
    -------
    ContinuousFromSampled

    Raises
    ------
    ValueError
        When ``A_d`` has an eigenvalue on the closed negative real axis (zero included).
        Then no continuous model with the principal (real) logarithm exists: a singular
        ``A_d`` has no logarithm at all, and a negative real eigenvalue would need a pole
        exactly at the Nyquist frequency, which a real model has only in pairs of equal
        Jordan blocks and never uniquely (W. J. Culver, "On the existence and uniqueness of
        the real logarithm of a matrix", Proceedings of the AMS 17(5), 1146-1151, 1966).

    Notes
    -----
    ``[[A T, B T], [0, 0]]`` is the principal logarithm of ``[[A_d, B_d], [0, I]]`` (the
    inverse of the zero-order hold of :func:`discretize`), computed by
    :func:`scipy.linalg.logm` (inverse scaling and squaring); ``C = C_d``, ``D = D_d``.  The
    continuous eigenvalues found have ``|Im λ| < π / T``: modes above the Nyquist frequency
    come back aliased, which no method can undo.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> model = pc.StateSpaceModel([[-1.0, 2.0], [-2.0, -1.0]], [[0.0], [1.0]], [[1.0, 0.0]])
    >>> back = pc.continuous_from_sampled(pc.discretize(model, 0.2).model).model
    >>> bool(np.allclose(back.A, model.A, atol=1e-12) and np.allclose(back.B, model.B, atol=1e-12))
    True
    """
    model = as_model(model)
    if not model.is_discrete:
        raise ValueError("the model is continuous; continuous_from_sampled takes a discrete "
                         "model (dt > 0).")
    T = float(model.dt)
    n, m = model.n, model.n_inputs
    values = scipy.linalg.eigvals(model.A) if n else np.zeros(0)
    bad = [v for v in values
           if abs(v.imag) <= 1e2 * np.finfo(float).eps * max(1.0, abs(v)) and v.real <= 0.0]
    if bad:
        listed = ", ".join(_fmt(v) for v in bad)
        raise ValueError(
            f"A has the eigenvalue(s) {listed} on the closed negative real axis: no real "
            "continuous model has this zero-order-hold sample (a zero eigenvalue has no "
            "logarithm; a negative one needs a pole at the Nyquist frequency, which a real "
            "model cannot have uniquely).")
    G = np.zeros((n + m, n + m))
    G[:n, :n], G[:n, n:], G[n:, n:] = model.A, model.B, np.eye(m)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)   # logm's own accuracy notice
        L = scipy.linalg.logm(G) if n + m else G
    if np.iscomplexobj(L):
        if np.max(np.abs(L.imag), initial=0.0) > 1e-10 * max(1.0, np.max(np.abs(L), initial=0.0)):
            raise ValueError("the matrix logarithm of [[A, B], [0, I]] is not real; no real "
                             "continuous model has this zero-order-hold sample.")
        L = L.real
    L = L / T
    back = scipy.linalg.expm(L * T) if n + m else G
    size = float(np.linalg.norm(G, 2)) if G.size else 1.0
    residual = float(np.linalg.norm(back - G, 2)) / size if G.size else 0.0
    result = StateSpaceModel(L[:n, :n], L[:n, n:], model.C, model.D, dt=None,
                             states=model.states, inputs=model.inputs, outputs=model.outputs,
                             name=model.name)
    return ContinuousFromSampled(result, T, residual)


def compare_sampling(continuous, sampled, *, tol=None) -> SamplingComparison:
    """Controllability, observability and minimal order before and after sampling.

    Parameters
    ----------
    continuous : model
        The continuous model.
    sampled : SampledModel or model
        Its sampled model (a :class:`SampledModel` from :func:`discretize`, or any discrete
        model, then taken to be a hold equivalent for the aliasing check).
    tol : float, optional
        Relative rank tolerance of both Kalman decompositions (see
        :mod:`plantcore.core.rank`).

    Returns
    -------
    SamplingComparison
        With a :class:`~plantcore.core.errors.SamplingWarning` when the sampled model lost
        controllability or observability.
    """
    method = sampled.method if isinstance(sampled, SampledModel) else "zero_order_hold"
    sampled_model = sampled.model if isinstance(sampled, SampledModel) else as_model(sampled)
    continuous = as_model(continuous)
    if continuous.is_discrete or not sampled_model.is_discrete:
        raise ValueError("compare_sampling takes a continuous model, then a discrete one.")
    if sampled_model.n != continuous.n:
        raise ValueError(f"the sampled model has {sampled_model.n} states but the continuous "
                         f"one has {continuous.n}; give the sample of this model.")
    kc = kalman_decomposition(continuous, tol)
    ks = kalman_decomposition(sampled_model, tol)
    counts = []
    for kd in (kc, ks):
        s = kd.sizes
        counts.append((s.controllable_observable + s.controllable_unobservable,
                       s.controllable_observable + s.uncontrollable_observable,
                       s.controllable_observable))
    (cc, co, cm), (sc, so, sm) = counts
    pairs = () if method == "bilinear" else _aliased_pairs(continuous.A, float(sampled_model.dt))
    reasons = []
    if sc < cc:
        reasons.append(f"Sampling lost controllability: the controllable subspace has "
                       f"dimension {sc} after sampling and {cc} before.")
    if so < co:
        reasons.append(f"Sampling lost observability: the observable part has dimension {so} "
                       f"after sampling and {co} before.")
    if sm != cm:
        reasons.append(f"The minimal order is {sm} after sampling and {cm} before.")
    if reasons and pairs:
        reasons.append(_aliasing_message(pairs, float(sampled_model.dt), tail=False))
    if reasons:
        warnings.warn(" ".join(reasons), SamplingWarning, stacklevel=2)
    else:
        reasons.append("Sampling kept the dimensions of the controllable subspace and the "
                       f"observable part ({cc} and {co}) and the minimal order ({cm}).")
    decisions = (_prefixed(kc.decisions, "continuous: ") + _prefixed(ks.decisions, "sampled: "))
    return SamplingComparison(cc, sc, co, so, cm, sm, pairs, tuple(reasons), decisions)


def _prefixed(decisions, prefix: str) -> tuple:
    return tuple(dataclasses.replace(d, label=prefix + d.label) for d in decisions)


def _positive(value, name: str) -> float:
    if isinstance(value, bool):
        raise TypeError(f"{name} must be a positive number, got {value!r}.")
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a positive number, got {value!r}.") from None
    if not (math.isfinite(value) and value > 0.0):
        raise ValueError(f"{name} must be a positive finite number, got {value!r}.")
    return value


def _zero_order_hold(model, T, _prewarp):
    n, m = model.n, model.n_inputs
    G = np.zeros((n + m, n + m))
    G[:n, :n], G[:n, n:] = model.A * T, model.B * T
    E = scipy.linalg.expm(G)
    return E[:n, :n], E[:n, n:], model.C, model.D


def _first_order_hold(model, T, _prewarp):
    n, m = model.n, model.n_inputs
    G = np.zeros((n + 2 * m, n + 2 * m))
    G[:n, :n], G[:n, n:n + m] = model.A * T, model.B * T
    G[n:n + m, n + m:] = np.eye(m)
    E = scipy.linalg.expm(G)
    Phi, Gamma1, Gamma2 = E[:n, :n], E[:n, n:n + m], E[:n, n + m:]
    return Phi, Gamma1 + (Phi - np.eye(n)) @ Gamma2, model.C, model.D + model.C @ Gamma2


def _bilinear(model, T, prewarp):
    A, B, C, D = model.A, model.B, model.C, model.D
    n = model.n
    alpha = 2.0 / T if prewarp is None else prewarp / math.tan(prewarp * T / 2.0)
    M = alpha * np.eye(n) - A
    if n and scipy.linalg.svdvals(M)[-1] <= 1e2 * n * np.finfo(float).eps * np.linalg.norm(M, 2):
        raise ValueError(f"A has an eigenvalue at alpha = {alpha:.6g} (= 2 / sample_time, or the "
                         "prewarped value), which the bilinear map sends to z = infinity; "
                         "choose another sample time.")
    if n == 0:
        return A, B, C, D
    lu = scipy.linalg.lu_factor(M)
    FB = scipy.linalg.lu_solve(lu, B)
    FA = scipy.linalg.lu_solve(lu, np.eye(n))
    root = math.sqrt(2.0 * alpha)
    Ad = (alpha * np.eye(n) + A) @ FA
    return Ad, root * FB, root * (C @ FA), D + C @ FB


_METHODS = {"zero_order_hold": _zero_order_hold, "first_order_hold": _first_order_hold,
            "bilinear": _bilinear}


def _aliased_pairs(A, T: float) -> tuple:
    """Pairs of eigenvalues of ``A`` with ``e^{λ_i T} = e^{λ_j T}`` and ``λ_i != λ_j``."""
    if A.shape[0] < 2:
        return ()
    values = scipy.linalg.eigvals(A)
    period = 2.0 * math.pi / T
    pairs = []
    for i in range(values.size):
        for j in range(i + 1, values.size):
            a, b = values[i], values[j]
            if a.imag + b.imag < 0:            # the mirror image of a pair already listed
                continue
            q = (a.imag - b.imag) / period
            k = round(q)
            size = max(abs(a), abs(b), 1.0 / T)
            if k != 0 and abs(q - k) <= ALIASING_TOLERANCE and abs(a.real - b.real) <= ALIASING_TOLERANCE * size:
                pairs.append((complex(a), complex(b)) if a.imag >= b.imag else (complex(b), complex(a)))
    return tuple(pairs)


def _aliasing_message(pairs, T: float, tail: bool = True) -> str:
    listed = "; ".join(f"{_fmt(a)} and {_fmt(b)}" for a, b in pairs)
    return (f"sampling at T = {T:.6g} maps eigenvalues whose imaginary parts differ by a "
            f"multiple of 2 pi / T = {2 * math.pi / T:.6g} to one sampled eigenvalue: {listed}. "
            "The sampled model may be uncontrollable or unobservable in these modes "
            "(Kalman, Ho and Narendra 1963)"
            + ("; compare_sampling says what was lost." if tail else "."))
