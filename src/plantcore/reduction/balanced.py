r"""Gramians, Hankel singular values and balanced truncation.

For a stable model the controllability and observability Gramians ``P`` and ``Q`` solve

.. math::

    A P + P A^T + B B^T = 0,\qquad A^T Q + Q A + C^T C = 0 \qquad\text{(continuous)}

    A P A^T - P + B B^T = 0,\qquad A^T Q A - Q + C^T C = 0 \qquad\text{(discrete)}

and the Hankel singular values are the square roots of the eigenvalues of ``P Q``.  They
measure how much each balanced state is both moved by the inputs and seen by the outputs;
truncating the states with small values gives a reduced model with a guaranteed error.

Everything here works with **Cholesky factors** ``P = R_c^T R_c`` and ``Q = R_o^T R_o``,
computed directly by Hammarling's method, never with the Gramians themselves: the
Hankel singular values are then the singular values of ``R_o R_c^T``, whose small values are
obtained to much better relative accuracy than from the eigenvalues of ``P Q``.

Modes on the stability boundary (within the tolerance of :mod:`plantcore.structure.modes`) are
refused: a Gramian does not exist for them, and no stable/unstable split is possible.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
from scipy.linalg import lapack

from plantcore.core.derived_names import balanced_state_names
from plantcore.core.errors import AccuracyWarning, NumericalBreakdown
from plantcore.core.model import StateSpaceModel, as_model, sparse_model_or_none
from plantcore.core.safe_norms import frobenius
from plantcore.reduction.gramians import _fmt, _schur_factors
from plantcore.reduction.power_of_two_scaling import model_scaling
from plantcore.structure.certificate import _Schur
from plantcore.structure.kalman import _prepare
from plantcore.structure.modes import _stability, _stability_data
from plantcore.structure.pbh_measures import schur_from_form, threads_by_size

__all__ = ["EQUAL_HSV_RTOL", "ReducedModel", "balanced_truncation", "hankel_singular_values", "truncation_error"]


_EPS = np.finfo(float).eps

EQUAL_HSV_RTOL = 1e-9

"""Hankel singular values within this relative distance count as one repeated value.

Used for the error bound (each distinct value is counted once) and to refuse an order that
would cut through a repeated value.  Values that differ by less than ``1e-9`` relative are
not distinguishable after the rounding of the Gramian factors and the SVD.
"""

_DECOUPLING_LIMIT = 1e6

"""Above this 2-norm of the Sylvester solution the stable/unstable split warns: the
decoupling similarity ``[[I, X], [0, I]]`` then has condition number about ``||X||^2``
(``1e12``), so about four of the sixteen digits may be lost."""

_NEGLIGIBLE_FACTOR = 1e3

"""Hankel singular values at or below ``1e3 * n * eps * sigma_1`` are at the rounding level."""


@dataclass(frozen=True)
class _Split:
    As: np.ndarray
    Bs: np.ndarray
    Cs: np.ndarray
    Au: np.ndarray
    Bu: np.ndarray
    Cu: np.ndarray
    decoupling_norm: float
    schur: object = None      # real Schur form of As (A_s = Q T Q^T), computed once


def _unscaled(value, time_exponent: int):
    """An eigenvalue (or a distance) of a time-rescaled model in the original time unit."""
    if not time_exponent:
        return value
    with np.errstate(over="ignore"):
        if isinstance(value, complex):
            return complex(float(np.ldexp(value.real, time_exponent)),
                           float(np.ldexp(value.imag, time_exponent)))
        return float(np.ldexp(value, time_exponent))


def _split(model: StateSpaceModel, p=None, schur=None, time_exponent: int = 0) -> _Split:
    """Additive decomposition ``G = G_stable + G_unstable`` (internal).

    Works on the equilibrated model (an exact power-of-two similarity; ``p``, its prepared
    form, may be handed in).  One real Schur form of ``A`` (``schur``, computed here when
    not handed in) gives the eigenvalues, the boundary test and, reordered by LAPACK
    ``trsen`` with the stable eigenvalues first (``A -> [[T11, T12], [0, T22]]``; Bai and
    Demmel 1993), the split: the Sylvester equation ``T11 X - X T22 = -T12`` (LAPACK
    ``trsyl``, the Bartels-Stewart method on quasi-triangular matrices) decouples the two
    blocks with the similarity ``[[I, X], [0, I]]``.  The stable part keeps its Schur form
    (``T11`` with ``Q = I``), so the Gramians need no further factorization.  Refuses modes
    on the stability boundary.  ``time_exponent`` is the exponent ``t`` of an exact time
    rescaling (``A = A_original 2^-t``, :mod:`plantcore.reduction.power_of_two_scaling`), so
    that a refusal names the mode in the original units.
    """
    p = _prepare(model, None) if p is None else p
    discrete = model.is_discrete
    A, B, C = p.A, p.B, p.C
    n = A.shape[0]
    schur = _Schur(A) if schur is None else schur
    delta, values = _stability_data(p, schur)
    flags = [_stability(complex(lam), delta, discrete) for lam in values]
    boundary = [lam for lam, (_, marginal) in zip(values, flags) if marginal]
    if boundary:
        where = "unit circle" if discrete else "imaginary axis"
        raise ValueError(
            f"the model has a mode at {_fmt(_unscaled(boundary[0], time_exponent))}, on the "
            f"{where} (boundary tolerance {_unscaled(delta, time_exponent):.2g}); balanced "
            "truncation and Hankel singular values need every mode strictly stable or strictly "
            "unstable. Remove or shift that mode first (for example, treat an integrator "
            "separately).")
    stable = np.array([f[0] for f in flags], dtype=bool)
    n_stable = int(stable.sum())
    if n_stable == n:
        empty = np.zeros((0, 0))
        return _Split(A, B, C, empty, np.zeros((0, B.shape[1])), np.zeros((C.shape[0], 0)), 0.0,
                      schur)
    # the two positions of a 2 x 2 block hold a conjugate pair: select both or neither
    pairs = np.nonzero(np.diag(schur.T, -1))[0]
    both = stable[pairs] | stable[pairs + 1]
    stable[pairs], stable[pairs + 1] = both, both
    T, Zs, _, _, sdim, _, _, info = lapack.dtrsen(stable.astype(np.int32), schur.T, schur.Q,
                                                  job="N")
    if info != 0 or sdim != n_stable:
        raise NumericalBreakdown(
            f"the reordered Schur form found {sdim} stable modes where {n_stable} were "
            "expected; some mode lies too close to the stability boundary to be split reliably.",
            {"sdim": sdim, "expected": n_stable, "info": info})
    k = n_stable
    T11, T12, T22 = T[:k, :k], T[:k, k:], T[k:, k:]
    Bz = Zs.T @ B
    Cz = C @ Zs
    if k:
        X, scale, info = lapack.dtrsyl(T11, T22, -T12, isgn=-1)
        if info < 0:  # pragma: no cover - argument error
            raise RuntimeError(f"trsyl failed with info={info}")
        X = X / scale
        resid = frobenius(T11 @ X - X @ T22 + T12)
        size = frobenius(T11) * frobenius(X) + frobenius(X) * frobenius(T22) + frobenius(T12)
        if info > 0 or resid > 1e-8 * max(size, np.finfo(float).tiny):
            warnings.warn(
                "the stable and unstable parts are nearly coupled (a stable and an unstable "
                f"mode are close; Sylvester residual {resid / max(size, 1e-300):.2g} relative); "
                "the split and the reduced model may be inaccurate.", AccuracyWarning, stacklevel=3)
        x_norm = float(np.linalg.norm(X, 2)) if X.size else 0.0
        if x_norm > _DECOUPLING_LIMIT:
            warnings.warn(
                f"the stable and unstable parts are nearly dependent (decoupling norm "
                f"{x_norm:.2g} > {_DECOUPLING_LIMIT:.0e}: a stable and an unstable mode are "
                "close together); the split and the reduced model may have lost accuracy.",
                AccuracyWarning, stacklevel=3)
    else:
        X = np.zeros((0, n - k))
    Bs = Bz[:k, :] - X @ Bz[k:, :]
    Bu = Bz[k:, :]
    Cs = Cz[:, :k]
    Cu = Cz[:, :k] @ X + Cz[:, k:]
    T11 = np.array(T11)
    return _Split(T11, Bs, Cs, np.array(T22), Bu, Cu,
                  float(np.linalg.norm(X, 2)) if X.size else 0.0,
                  schur_from_form(T11, np.eye(k)))


def _hsv_and_factors(sp: _Split, discrete: bool, *, vectors: bool = True):
    """Hankel singular values of the stable part and, with ``vectors``, what the
    square-root method needs: ``(s, R_c, R_o, U, V)`` with ``R_c``, ``R_o`` the Gramian
    factors in the coordinates of the stable part's Schur form and
    ``R_o R_c^T = U diag(s) V^T``."""
    Rc, Ro = _schur_factors(sp.schur, sp.Bs, sp.Cs, discrete)
    if sp.As.shape[0] == 0:
        return np.zeros(0), Rc, Ro, np.zeros((0, 0)), np.zeros((0, 0))
    product = Ro @ Rc.T
    if not vectors:
        return scipy.linalg.svd(product, compute_uv=False), Rc, Ro, None, None
    U, s, Vt = scipy.linalg.svd(product)
    return s, Rc, Ro, U, Vt.T


@threads_by_size()
def hankel_singular_values(model) -> np.ndarray:
    """Hankel singular values of the stable part of a model, largest first.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        A sparse model goes to :func:`plantcore.large.low_rank_hankel_singular_values`
        (stable models only; approximate values from low-rank Gramian factors).

    Returns
    -------
    (n_stable,) ndarray
        ``sigma_i = sqrt(eig_i(P Q))`` of the stable part, in the model's input and output
        units, descending.  A model whose modes are all stable gives ``n`` values.  Unstable
        modes have no Hankel singular value (their Gramians do not exist); they are split off
        by an additive stable/unstable decomposition and contribute nothing, so a model with
        ``n_u`` unstable modes gives ``n - n_u`` values.  Uncontrollable or unobservable
        stable modes give values at the rounding level.

    Raises
    ------
    ValueError
        When a mode lies on the stability boundary (imaginary axis or unit circle, within
        the tolerance of :mod:`plantcore.structure.modes`).

    Notes
    -----
    Singular values of ``R_o R_c^T`` where ``R_c``, ``R_o`` are the Cholesky factors of the
    Gramians of the stable part computed by Hammarling's method (see
    :func:`gramian_factors`).  This is the first half of the square-root method (Laub,
    Heath, Paige and Ward 1987).

    References
    ----------
    .. [1] K. Glover, "All optimal Hankel-norm approximations of linear multivariable
       systems and their L-infinity error bounds", International Journal of Control 39(6),
       1115-1193, 1984.
    .. [2] A. J. Laub, M. T. Heath, C. C. Paige and R. C. Ward, "Computation of system
       balancing transformations and other applications of simultaneous diagonalization
       algorithms", IEEE Trans. Automatic Control 32(2), 115-122, 1987.

    Examples
    --------
    For ``1/(s + a)`` both Gramians equal ``1/(2a)``, so the only value is ``1/(2a)``:

    >>> import numpy as np
    >>> import plantcore as pc
    >>> hsv = pc.hankel_singular_values(([[-4.0]], [[1.0]], [[1.0]]))
    >>> bool(np.isclose(hsv[0], 1.0 / 8.0))
    True
    """
    sparse = sparse_model_or_none(model)
    if sparse is not None:  # large sparse models: low-rank factors (issue 18)
        from plantcore.large.low_rank_balanced import low_rank_hankel_singular_values

        return low_rank_hankel_singular_values(sparse)
    model = as_model(model)
    if model.n == 0:
        return np.zeros(0)
    # far from unit scale, the values of an exactly rescaled model, multiplied back exactly
    scaling = model_scaling(model)
    values = _hankel_values(_split(scaling.apply(model), time_exponent=scaling.time),
                            model.is_discrete)
    return values if scaling.is_identity else scaling.restore_gains(values)


def _hankel_values(sp: _Split, discrete: bool) -> np.ndarray:
    """The Hankel singular values of a split model (internal; :func:`analyze` hands in the
    split made on its own Schur form)."""
    return _hsv_and_factors(sp, discrete, vectors=False)[0]


@dataclass(frozen=True)
class ReducedModel:
    """A balanced-truncated model and its guarantee.

    Attributes
    ----------
    model : StateSpaceModel
        The reduced model: the balanced, truncated stable part (states first) followed by
        the unstable part, unreduced.  Same ``D``, inputs, outputs and time domain.  Its
        states are ``"balanced 1"``, ``"balanced 2"``, ... (state ``k`` has the Hankel
        singular value ``sigma_k``), then ``"unstable k"`` by position for the unstable
        part (:func:`plantcore.core.derived_names.balanced_state_names`).
    hankel_singular_values : (n_stable,) ndarray
        All Hankel singular values of the original model's stable part, descending.
    error_bound : float
        ``2 x`` the sum of the distinct discarded Hankel singular values: the peak gain of
        the difference between the original and the reduced transfer function never exceeds
        it (Enns 1984; Glover 1984; Al-Saggaf and Franklin 1987 in discrete time).
    order : int
        Number of states of the reduced model (``stable_order + unstable_order``).
    stable_order : int
        Number of balanced stable states kept.
    unstable_order : int
        Number of unstable states, all kept.
    original_order : int
        Number of states of the original model.
    decoupling_norm : float
        2-norm of the Sylvester solution that decoupled the stable from the unstable part
        (0 when there is no unstable part); large values mean a nearly coupled split, and
        above ``1e6`` an :class:`plantcore.AccuracyWarning` is issued.
    removed_unstable_modes : tuple of RemovedMode
        Modes removed by the truncation that are unstable or on the stability boundary
        (part ``"truncated"``).  Always empty, by construction: the truncation acts on the
        strictly stable part only, the unstable part is kept unreduced, and a mode on the
        boundary is refused.  The field is there so that every reduction result answers
        the same question (:attr:`plantcore.MinimalRealization.removed_unstable_modes`).
    """

    model: StateSpaceModel
    hankel_singular_values: np.ndarray = field(repr=False)
    error_bound: float
    order: int
    stable_order: int
    unstable_order: int
    original_order: int
    decoupling_norm: float
    removed_unstable_modes: tuple = ()


def _groups(hsv: np.ndarray) -> list[int]:
    """Indices ``r`` where ``hsv[r-1]`` and ``hsv[r]`` are distinct (admissible cut points)."""
    cuts = [0]
    for r in range(1, hsv.size):
        if hsv[r - 1] - hsv[r] > EQUAL_HSV_RTOL * hsv[r - 1]:
            cuts.append(r)
    cuts.append(hsv.size)
    return cuts


def _tail_bound(hsv: np.ndarray, r: int) -> float:
    """2 x sum of the distinct values among ``hsv[r:]``."""
    tail = hsv[r:]
    if tail.size == 0:
        return 0.0
    total = float(tail[0])
    for i in range(1, tail.size):
        if tail[i - 1] - tail[i] > EQUAL_HSV_RTOL * tail[i - 1]:
            total += float(tail[i])
    return 2.0 * total


def _check_options(order, max_error):
    if order is not None and max_error is not None:
        raise ValueError("give either order or max_error, not both: order fixes the number of "
                         "states, max_error lets the error bound choose it.")
    if order is not None:
        if isinstance(order, bool) or not isinstance(order, (int, np.integer)):
            raise ValueError(f"order must be a whole number of states, got {order!r}.")
        if order < 0:
            raise ValueError(f"order must be 0 or more, got {order}.")
    if max_error is not None:
        if isinstance(max_error, bool):
            raise ValueError(f"max_error must be a non-negative number, got {max_error!r}.")
        try:
            max_error = float(max_error)
        except (TypeError, ValueError):
            raise ValueError(f"max_error must be a non-negative number, got {max_error!r}.") from None
        if not math.isfinite(max_error) or max_error < 0:
            raise ValueError(f"max_error must be a non-negative finite number, got {max_error!r}.")
    return order, max_error


@threads_by_size()
def balanced_truncation(model, order=None, max_error=None) -> ReducedModel:
    """Reduce a model by balanced truncation, with a guaranteed error bound.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Continuous or discrete time; no mode on the stability boundary.  A sparse model goes
        to :func:`plantcore.large.low_rank_balanced_truncation` (stable models only), which
        returns a :class:`plantcore.large.LowRankReduction` with the same leading fields.
    order : int, optional
        Number of states of the reduced model, counting the unstable states (which are
        all kept).  Must lie between the number of unstable modes and that number plus the
        count of Hankel singular values above the rounding level; it may not cut through a
        repeated Hankel singular value.
    max_error : float, optional
        Choose the smallest order whose error bound does not exceed this value.
        ``order`` and ``max_error`` are mutually exclusive.  With neither, only the stable
        states whose Hankel singular values are at the rounding level are removed.

    Returns
    -------
    ReducedModel

    Raises
    ------
    ValueError
        For conflicting or invalid options, an order outside the admissible range, a
        ``max_error`` no order can certify, or a mode on the stability boundary.

    Notes
    -----
    1. Split ``G = G_s + G_u`` into a strictly stable and a strictly unstable part (ordered
       real Schur form and a Sylvester equation; common practice, see e.g. Safonov,
       Jonckheere, Verma and Limebeer 1987).  ``G_u`` is kept unreduced, so no unstable
       mode is ever truncated (``removed_unstable_modes`` stays empty; a mode on the
       boundary is refused before anything is removed).
    2. Cholesky factors of the Gramians of ``G_s`` by Hammarling's method (Hammarling 1982).
    3. Square-root method (Laub, Heath, Paige and Ward 1987; Tombs and Postlethwaite 1987):
       ``R_o R_c^T = U Σ V^T``; with ``T = R_c^T V_r Σ_r^{-1/2}`` and
       ``W = R_o^T U_r Σ_r^{-1/2}`` (so ``W^T T = I``) the reduced stable part is
       ``(W^T A_s T, W^T B_s, C_s T)``.  It is balanced with Gramians ``Σ_r`` (continuous
       time), stable when ``σ_r > σ_{r+1}`` (Pernebo and Silverman 1982).
    4. Error bound ``||G - G_r||_∞ <= 2 Σ_{distinct discarded} σ_i`` (Enns 1984; Glover
       1984; in discrete time Al-Saggaf and Franklin 1987).  Values within
       :data:`EQUAL_HSV_RTOL` count as one.

    The square-root method avoids forming the badly conditioned balancing transformation
    when the model is far from minimal; the truncation to ``r`` states divides by
    ``sqrt(σ_r)``, which is why orders that keep rounding-level values are refused.

    References
    ----------
    .. [1] B. C. Moore, "Principal component analysis in linear systems: controllability,
       observability, and model reduction", IEEE Trans. Automatic Control 26(1), 17-32,
       1981.
    .. [2] D. F. Enns, "Model reduction with balanced realizations: an error bound and a
       frequency weighted generalization", Proc. 23rd IEEE Conference on Decision and
       Control, 127-132, 1984.
    .. [3] K. Glover, "All optimal Hankel-norm approximations of linear multivariable
       systems and their L-infinity error bounds", International Journal of Control 39(6),
       1115-1193, 1984.
    .. [4] A. J. Laub, M. T. Heath, C. C. Paige and R. C. Ward, "Computation of system
       balancing transformations and other applications of simultaneous diagonalization
       algorithms", IEEE Trans. Automatic Control 32(2), 115-122, 1987.
    .. [5] M. S. Tombs and I. Postlethwaite, "Truncated balanced realization of a stable
       non-minimal state-space system", International Journal of Control 46(4),
       1319-1330, 1987.
    .. [6] S. J. Hammarling, "Numerical solution of the stable, non-negative definite
       Lyapunov equation", IMA Journal of Numerical Analysis 2(3), 303-323, 1982.
    .. [7] U. M. Al-Saggaf and G. F. Franklin, "An error bound for a discrete reduced order
       model of a linear multivariable system", IEEE Trans. Automatic Control 32(9),
       815-819, 1987.
    .. [8] L. Pernebo and L. M. Silverman, "Model reduction via balanced state space
       representations", IEEE Trans. Automatic Control 27(2), 382-387, 1982.
    .. [9] M. G. Safonov, E. A. Jonckheere, M. Verma and D. J. N. Limebeer, "Synthesis of
       positive real multivariable feedback systems", International Journal of Control
       45(3), 817-842, 1987 (from memory).

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -10.0, -100.0]); B = np.ones((3, 1)); C = np.ones((1, 3))
    >>> red = pc.balanced_truncation((A, B, C), order=1)
    >>> red.order, red.stable_order, red.unstable_order
    (1, 1, 0)
    >>> err = abs(red.model.transfer_at(0.0) - pc.StateSpaceModel(A, B, C).transfer_at(0.0))
    >>> bool(err[0, 0] <= red.error_bound * (1 + 1e-9))
    True
    """
    order, max_error = _check_options(order, max_error)
    sparse = sparse_model_or_none(model)
    if sparse is not None:  # large sparse models: low-rank factors (issue 18)
        from plantcore.large.low_rank_balanced import low_rank_balanced_truncation

        return low_rank_balanced_truncation(sparse, order=order, max_error=max_error)
    model = as_model(model)
    n = model.n
    discrete = model.is_discrete
    if n == 0:
        if order not in (None, 0):
            raise ValueError(f"order {order} is impossible: the model has no states.")
        return ReducedModel(model, np.zeros(0), 0.0, 0, 0, 0, 0, 0.0)
    if order is not None and order > n:
        raise ValueError(f"order {order} exceeds the model's {n} states; choose at most {n}.")
    # Far from unit scale the work is done on an exactly rescaled model (powers of two in
    # the time, input and output units) and the values and the reduced model are brought
    # back exactly; ``hsv`` and every bound below are in the model's own units.
    scaling = model_scaling(model)
    sp = _split(scaling.apply(model), time_exponent=scaling.time)
    nu = sp.Au.shape[0]
    ns = sp.As.shape[0]
    unit_hsv, Rc, Ro, U, V = _hsv_and_factors(sp, discrete)
    hsv = unit_hsv if scaling.is_identity else scaling.restore_gains(unit_hsv)
    negligible = _NEGLIGIBLE_FACTOR * max(ns, 1) * _EPS * (hsv[0] if hsv.size else 0.0)
    cuts = _groups(hsv)
    r_max = max([r for r in cuts if r == 0 or hsv[r - 1] > negligible], default=0)
    if order is not None:
        if order < nu:
            raise ValueError(
                f"order {order} is below the {nu} unstable modes, which are always kept; "
                f"choose an order of at least {nu}.")
        r = order - nu
        if r > r_max:
            raise ValueError(
                f"order {order} would keep {r} stable states, but only {r_max} Hankel singular "
                f"values lie above the rounding level ({negligible:.2g}); choose an order of at "
                f"most {nu + r_max} (the rest of the stable part is numerically invisible).")
        if r not in cuts:
            raise ValueError(
                f"order {order} cuts through a repeated Hankel singular value "
                f"(σ_{r} = σ_{r + 1} = {hsv[r]:.6g}); the truncation is not unique there and the "
                f"error bound does not apply. Choose order {nu + max(c for c in cuts if c < r)} "
                f"or {nu + min(c for c in cuts if c > r)}.")
    elif max_error is not None:
        admissible = [c for c in cuts if c <= r_max]
        fitting = [c for c in admissible if _tail_bound(hsv, c) <= max_error]
        if not fitting:
            raise ValueError(
                f"max_error {max_error:.6g} is below the smallest error bound any truncation can "
                f"certify ({_tail_bound(hsv, r_max):.6g}, from Hankel singular values at the "
                "rounding level); give a larger max_error or an explicit order.")
        r = min(fitting)
    else:
        r = r_max
    bound = _tail_bound(hsv, r)
    if r:
        # projections in the coordinates of the stable part's Schur form A_s = Q T_s Q^T
        sig = unit_hsv[:r] ** -0.5
        T = Rc.T @ V[:, :r] * sig[None, :]
        W = Ro.T @ U[:, :r] * sig[None, :]
        Q = sp.schur.Q
        Ar = W.T @ (sp.schur.T @ T)
        Br = W.T @ (Q.T @ sp.Bs)
        Cr = (sp.Cs @ Q) @ T
    else:
        Ar = np.zeros((0, 0))
        Br = np.zeros((0, model.n_inputs))
        Cr = np.zeros((model.n_outputs, 0))
    A_new = scipy.linalg.block_diag(Ar, sp.Au) if (r + nu) else np.zeros((0, 0))
    B_new = np.vstack([Br, sp.Bu])
    C_new = np.hstack([Cr, sp.Cu])
    name = f"{model.name} (balanced truncation)" if model.name else None
    reduced = StateSpaceModel(A_new, B_new, C_new, model.D, model.dt,
                              states=balanced_state_names(model.states, r, nu),
                              inputs=model.inputs, outputs=model.outputs, name=name)
    reduced = scaling.restore_balanced(reduced, model.D)
    return ReducedModel(reduced, hsv, float(bound), r + nu, r, nu, n, sp.decoupling_norm)


def truncation_error(original, reduced):
    """Measure the error of a reduced model: the peak gain of ``original - reduced``.

    Parameters
    ----------
    original, reduced : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Models with the same inputs, outputs and time domain.

    Returns
    -------
    plantcore.reduction.norms.PeakGain
        Of the difference model (a parallel connection with the sign of ``reduced``
        flipped), computed by :func:`plantcore.reduction.norms.peak_gain`.  For a balanced truncation
        its ``value`` never exceeds :attr:`ReducedModel.error_bound` (up to the accuracy of
        the computation).

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -10.0]); B = np.ones((2, 1)); C = np.ones((1, 2))
    >>> red = pc.balanced_truncation((A, B, C), order=1)
    >>> err = pc.reduction.truncation_error((A, B, C), red.model)
    >>> bool(err.value <= red.error_bound * (1 + 1e-9))   # attained at s = 0 here
    True
    """
    from plantcore.reduction.norms import peak_gain

    a = as_model(original)
    b = as_model(reduced)
    if (a.n_inputs, a.n_outputs) != (b.n_inputs, b.n_outputs):
        raise ValueError(
            f"the reduced model has {b.n_inputs} inputs and {b.n_outputs} outputs but the "
            f"original has {a.n_inputs} and {a.n_outputs}; they must match.")
    if a.dt != b.dt:
        raise ValueError(f"the reduced model has sample time {b.dt} but the original {a.dt}; "
                         "both must be in the same time domain.")
    A = scipy.linalg.block_diag(a.A, b.A) if (a.n + b.n) else np.zeros((0, 0))
    diff = StateSpaceModel(A, np.vstack([a.B, b.B]), np.hstack([a.C, -b.C]), a.D - b.D, a.dt)
    return peak_gain(diff)
