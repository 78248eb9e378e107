r"""Reductions that keep the steady-state gain: balanced residualization and named-state elimination.

*Residualizing* the states ``x_2`` of a partitioned model means setting their derivative
to zero (continuous time) or holding them at their fixed point (discrete time) and solving
for them:

.. math::

    \text{continuous: } 0 = A_{21} x_1 + A_{22} x_2 + B_2 u, \qquad
    \text{discrete: } x_2 = A_{21} x_1 + A_{22} x_2 + B_2 u,

which gives, with :math:`M = A_{22}` and sign :math:`\varepsilon = -1` (continuous) or
:math:`M = I - A_{22}` and :math:`\varepsilon = +1` (discrete),

.. math::

    A_r = A_{11} + \varepsilon A_{12} M^{-1} A_{21},\quad
    B_r = B_1 + \varepsilon A_{12} M^{-1} B_2,\quad
    C_r = C_1 + \varepsilon C_2 M^{-1} A_{21},\quad
    D_r = D + \varepsilon C_2 M^{-1} B_2 .

The reduced model has exactly the steady-state gain ``G(0)`` (``G(1)`` in discrete time) of
the original, because at that point the eliminated equations hold exactly.  On a balanced
realization this is the singular perturbation approximation (Fernando and Nicholson 1982;
Liu and Anderson 1989), whose error obeys the same bound as balanced truncation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.derived_names import balanced_state_names
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.reduction.balanced import balanced_truncation, truncation_error
from plantcore.reduction.norms import peak_gain
from plantcore.structure.pbh_measures import threads_by_size

__all__ = [
    "EliminatedStates",
    "ResidualizedModel",
    "balanced_residualization",
    "eliminate_states",
]

_EPS = np.finfo(float).eps

#: A residualized block whose matrix ``A_22`` (``I - A_22``) has a 2-norm condition number
#: above this is refused as singular: solving with it would lose all sixteen digits.
_SINGULAR_CONDITION = 1.0 / (1e3 * _EPS)


@dataclass(frozen=True)
class ResidualizedModel:
    """A balanced model reduced by singular perturbation (residualization), with its guarantee.

    Attributes
    ----------
    model : StateSpaceModel
        The reduced model: the balanced, residualized stable part (states first) followed by
        the unstable part, unreduced.  Same inputs, outputs and time domain; ``D`` changes
        (it absorbs the steady-state contribution of the residualized states).  States are
        named as those of :class:`plantcore.ReducedModel` (``"balanced k"``, then
        ``"unstable k"`` for the unstable part).
    hankel_singular_values : (n_stable,) ndarray
        All Hankel singular values of the original model's stable part, descending.
    error_bound : float
        ``2 x`` the sum of the distinct discarded Hankel singular values: the peak gain of
        the difference between the original and the reduced model never exceeds it (Liu and
        Anderson 1989; Al-Saggaf and Franklin 1988 in discrete time).
    order, stable_order, unstable_order, original_order : int
        States of the reduced model, its balanced stable states, its unstable states (all
        kept) and the states of the original model.
    residualized : int
        Number of balanced states residualized (``minimal_stable_order - stable_order``).
    negligible : int
        Number of stable states whose Hankel singular values lie at the rounding level
        (at most ``1e3 n eps sigma_1``); they are removed before the residualization, as in
        the balancing-free square-root method (Varga 1991), and change ``G(0)`` by at most
        ``2 x`` their sum.
    steady_state_difference : float
        Measured largest absolute entry of ``G(0) - G_r(0)`` (``G(1) - G_r(1)`` in discrete
        time), computed in floating point on the stable parts: zero in exact arithmetic,
        rounding level in practice.
    residual_condition : float
        2-norm condition number of ``A_22`` (``I - A_22``) of the residualized block; 1.0
        when nothing was residualized.
    decoupling_norm : float
        As in :class:`plantcore.ReducedModel`: the norm of the Sylvester solution that split
        the stable from the unstable part (0 without an unstable part).
    removed_unstable_modes : tuple
        Always empty: the unstable part is kept unreduced and boundary modes are refused.
    """

    model: StateSpaceModel
    hankel_singular_values: np.ndarray = field(repr=False)
    error_bound: float
    order: int
    stable_order: int
    unstable_order: int
    original_order: int
    residualized: int
    negligible: int
    steady_state_difference: float
    residual_condition: float
    decoupling_norm: float
    removed_unstable_modes: tuple = ()


@dataclass(frozen=True)
class EliminatedStates:
    """A model with the states a user named eliminated, and what was removed.

    Attributes
    ----------
    model : StateSpaceModel
        The reduced model in the original coordinates of the kept states (their names
        kept), same inputs, outputs and time domain.
    method : str
        ``"residualize"`` or ``"truncate"``.
    removed_states : tuple of str
        The eliminated states, in the model's state order.
    kept_states : tuple of str
        The remaining states, in the model's state order.
    residual_condition : float or None
        For residualization, the 2-norm condition number of ``A_22`` (continuous) or
        ``I - A_22`` (discrete) restricted to the removed states; large values mean the
        removed states nearly have an eigenvalue at ``s = 0`` (``z = 1``) of their own.
        ``None`` for truncation.
    keeps_steady_state_gain : bool
        True for residualization (``G(0)`` or ``G(1)`` is kept exactly), False for truncation
        (which keeps the high-frequency behaviour ``D`` and the first Markov parameter
        restricted to the kept states, and no steady-state guarantee).
    peak_error : float
        The measured error: the peak gain of the difference ``G - G_r``, computed by
        :func:`plantcore.reduction.norms.peak_gain` on the difference realization (the two
        models in parallel, the reduced one with its output sign flipped).  A gain the
        error attains (or approaches, at infinite frequency), so a lower bound on the error
        norm, within ``peak_error_bound``.  For stable ``G`` and ``G_r`` it is the
        H-infinity norm of the error, which bounds the output error for every input:
        ``||y - y_r||_2 <= peak_error_bound ||u||_2`` (energy norms, zero initial state).
        Otherwise the L-infinity norm over the frequency axis (unit circle), which bounds
        no time response; ``inf`` when the difference has a pole on the axis (circle).
    peak_error_bound : float
        The verified upper bound of the error norm (``PeakGain.upper_bound``): the error's
        norm lies in ``[peak_error, peak_error_bound]``.
    peak_error_frequency : float
        Where the error peaks (rad/s, or rad/sample in discrete time; ``inf`` for the
        limit at infinite frequency).
    relative_peak_error : float
        ``peak_error`` divided by the peak gain of the original model (``nan`` when that is
        zero or infinite).
    """

    model: StateSpaceModel
    method: str
    removed_states: tuple
    kept_states: tuple
    residual_condition: float | None
    keeps_steady_state_gain: bool
    peak_error: float = math.nan
    peak_error_bound: float = math.nan
    peak_error_frequency: float = math.nan
    relative_peak_error: float = math.nan


def _residualize(A, B, C, D, keep, drop, discrete: bool, what: str):
    """Residualize the states ``drop`` (index arrays); returns ``(Ar, Br, Cr, Dr, cond)``."""
    A11, A12 = A[np.ix_(keep, keep)], A[np.ix_(keep, drop)]
    A21, A22 = A[np.ix_(drop, keep)], A[np.ix_(drop, drop)]
    B1, B2 = B[keep, :], B[drop, :]
    C1, C2 = C[:, keep], C[:, drop]
    if len(drop) == 0:
        return A11, B1, C1, D.copy(), 1.0
    M = np.eye(len(drop)) - A22 if discrete else A22
    sign = 1.0 if discrete else -1.0
    s = scipy.linalg.svdvals(M)
    cond = math.inf if s[-1] == 0.0 else float(s[0] / s[-1])
    if not cond < _SINGULAR_CONDITION:
        where = "z = 1" if discrete else "s = 0"
        matrix = "I - A_22" if discrete else "A_22"
        raise ValueError(
            f"cannot residualize {what}: {matrix} restricted to them is singular (condition "
            f"number {cond:.3g}); they have an eigenvalue at {where} of their own, so they "
            "have no steady state. Truncate them instead, or choose other states.")
    X = scipy.linalg.solve(M, np.hstack([A21, B2]))
    XA, XB = X[:, :len(keep)], X[:, len(keep):]
    Ar = A11 + sign * (A12 @ XA)
    Br = B1 + sign * (A12 @ XB)
    Cr = C1 + sign * (C2 @ XA)
    Dr = D + sign * (C2 @ XB)
    return Ar, Br, Cr, Dr, cond


def _steady_state(A, B, C, D, discrete: bool) -> np.ndarray:
    if A.shape[0] == 0:
        return D.copy()
    if discrete:
        return D + C @ scipy.linalg.solve(np.eye(A.shape[0]) - A, B)
    return D - C @ scipy.linalg.solve(A, B)


@threads_by_size()
def balanced_residualization(model, *, order=None, max_error=None) -> ResidualizedModel:
    r"""Reduce a model by singular perturbation of a balanced realization (keeps ``G(0)``).

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Continuous or discrete time; no mode on the stability boundary.
    order : int, optional
        Number of states of the reduced model, counting the unstable states (all kept).
        Same admissible range as :func:`plantcore.balanced_truncation`: at least the number
        of unstable modes, at most that plus the number of Hankel singular values above the
        rounding level, and not through a repeated Hankel singular value.
    max_error : float, optional
        Choose the smallest order whose error bound does not exceed this value.  ``order``
        and ``max_error`` are mutually exclusive; with neither, only the states at the
        rounding level are removed (the result is then a balanced minimal realization).

    Returns
    -------
    ResidualizedModel

    Raises
    ------
    ValueError
        For conflicting or invalid options, an inadmissible order, a ``max_error`` no order
        can certify, or a mode on the stability boundary.

    Notes
    -----
    The order is chosen, and refused, by the rules of :func:`plantcore.balanced_truncation`,
    which this function calls (twice when it reduces: once for the order, once for the
    balanced realization of every state above the rounding level), so both reductions
    always agree on the admissible orders and the Hankel singular values.

    1. Additive split ``G = G_s + G_u`` into strictly stable and unstable parts (the split of
       :func:`plantcore.balanced_truncation`); ``G_u`` is kept unreduced.
    2. Square-root balancing of ``G_s`` (Laub, Heath, Paige and Ward 1987) restricted to
       the ``r_max`` Hankel singular values above the rounding level:
       with the Gramian factors ``P = R_c^T R_c``, ``Q = R_o^T R_o`` and
       ``R_o R_c^T = U Σ V^T``, ``T = R_c^T V Σ^{-1/2}`` and ``W = R_o^T U Σ^{-1/2}`` give the
       balanced minimal realization ``(W^T A_s T, W^T B_s, C_s T)`` with both Gramians
       ``Σ`` (the states at the rounding level are dropped first, as in the balancing-free
       square-root method of Varga 1991, so no division by a rounding-level value occurs).
    3. The balanced states ``r+1 .. r_max`` are residualized (formulas in the module
       docstring): ``A_22`` is stable (a diagonal block of a balanced stable realization
       with distinct Hankel singular values is stable; Pernebo and Silverman 1982), so
       ``A_22`` (continuous) and ``I - A_22`` (discrete) are nonsingular.
    4. Error bound ``||G - G_r||_∞ <= 2 Σ_{distinct discarded} σ_i`` (Liu and Anderson 1989,
       continuous time; Al-Saggaf and Franklin 1988, discrete time).  The steady-state gain
       is kept exactly; balanced truncation instead is exact at infinite frequency.  Where
       the low-frequency behaviour matters (a set-point, a steady-state error) this is the
       reduction to choose; its error tends to be largest at high frequency.

    References
    ----------
    .. [1] Y. Liu and B. D. O. Anderson, "Singular perturbation approximation of balanced
       systems", International Journal of Control 50(4), 1379-1405, 1989.
    .. [2] K. V. Fernando and H. Nicholson, "Singular perturbational model reduction of
       balanced systems", IEEE Trans. Automatic Control 27(2), 466-468, 1982 (from memory).
    .. [3] U. M. Al-Saggaf and G. F. Franklin, "Model reduction via balanced realizations:
       an extension and frequency weighting techniques", IEEE Trans. Automatic Control
       33(7), 687-692, 1988 (discrete time; from memory).
    .. [4] A. Varga, "Balancing free square-root algorithm for computing singular
       perturbation approximations", Proc. 30th IEEE Conference on Decision and Control,
       1062-1065, 1991 (from memory).
    .. [5] A. J. Laub, M. T. Heath, C. C. Paige and R. C. Ward, "Computation of system
       balancing transformations and other applications of simultaneous diagonalization
       algorithms", IEEE Trans. Automatic Control 32(2), 115-122, 1987.
    .. [6] L. Pernebo and L. M. Silverman, "Model reduction via balanced state space
       representations", IEEE Trans. Automatic Control 27(2), 382-387, 1982.

    Examples
    --------
    Residualizing every state of ``1/(s + 1)`` leaves the constant ``G(0) = 1``; the bound
    ``2 sigma_1 = 1`` is reached at infinite frequency:

    >>> import numpy as np
    >>> from plantcore.reduction.singular_perturbation import balanced_residualization
    >>> red = balanced_residualization(([[-1.0]], [[1.0]], [[1.0]]), order=0)
    >>> bool(np.isclose(red.model.D[0, 0], 1.0)), bool(np.isclose(red.error_bound, 1.0))
    (True, True)
    """
    model = as_model(model)
    chosen = balanced_truncation(model, order=order, max_error=max_error)
    full = chosen if order is None and max_error is None else balanced_truncation(model)
    hsv = chosen.hankel_singular_values
    r, r_max, nu = chosen.stable_order, full.stable_order, full.unstable_order
    discrete = model.is_discrete
    bal = full.model
    keep = np.concatenate([np.arange(r), np.arange(r_max, r_max + nu)]).astype(int)
    drop = np.arange(r, r_max)
    Ar, Br, Cr, Dr, cond = _residualize(bal.A, bal.B, bal.C, bal.D, keep, drop, discrete,
                                        "the balanced states with small Hankel singular values")
    difference = 0.0
    if model.n:
        before = _steady_state(model.A, model.B, model.C, model.D, discrete)
        after = _steady_state(Ar, Br, Cr, Dr, discrete)
        difference = float(np.max(np.abs(before - after))) if before.size else 0.0
    name = f"{model.name} (balanced residualization)" if model.name else None
    reduced = StateSpaceModel(Ar, Br, Cr, Dr, model.dt,
                              states=balanced_state_names(model.states, r, nu),
                              inputs=model.inputs, outputs=model.outputs, name=name)
    return ResidualizedModel(reduced, hsv, chosen.error_bound, r + nu, r, nu, model.n,
                             r_max - r, hsv.size - r_max, difference, cond,
                             chosen.decoupling_norm)


def _truncate(A, B, C, D, keep, drop, discrete, what):
    return A[np.ix_(keep, keep)], B[keep, :], C[:, keep], D.copy(), None


_ELIMINATION_METHODS = {"residualize": _residualize, "truncate": _truncate}


@threads_by_size()
def eliminate_states(model, states, *, method="residualize") -> EliminatedStates:
    r"""Eliminate the states a user names, by residualization or by truncation.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Continuous or discrete time; need not be stable.
    states : sequence of str
        Names of the states to eliminate (``model.states``), each at most once.
    method : {"residualize", "truncate"}
        ``"residualize"`` (default): the named states are assumed to settle instantly
        (continuous: ``dx_2/dt = 0``; discrete: ``x_2`` at its fixed point) and are solved
        for; the steady-state gain is kept exactly.  ``"truncate"``: their rows and columns
        are deleted (``x_2 = 0``); ``D`` is kept.

    Returns
    -------
    EliminatedStates

    Raises
    ------
    ValueError
        An unknown method (the message lists the choices), a name the model does not have
        or given twice, or residualization of states whose own block ``A_22``
        (``I - A_22``) is singular to working precision (condition number above
        ``1 / (1e3 eps)``): they have no steady state.

    Notes
    -----
    Works in the model's own coordinates, so the states keep their physical meaning (a
    fast actuator or sensor state, a stiff spring).  No a-priori bound applies in these
    coordinates (the balanced bound, twice the sum of the discarded Hankel singular
    values, holds only for balanced states, see :func:`balanced_residualization`); the
    result is good when the eliminated states are much faster than the kept ones (the
    classical singular perturbation argument, Kokotović, O'Reilly and Khalil 1986).  So the
    error is measured after the fact instead: ``peak_error`` is the peak gain of
    ``G - G_r`` by :func:`plantcore.reduction.norms.peak_gain` on the difference
    realization, the same measure as :func:`plantcore.reduction.truncation_error`, with its
    verified upper bound ``peak_error_bound``.  For stable models this is the worst-case
    gain from the input to the output error over all frequencies.  Residualization makes
    the error vanish at ``s = 0`` (``z = 1``) and truncation at infinite frequency, so the
    peak tends to lie at the other end.

    References
    ----------
    .. [1] P. V. Kokotović, J. O'Reilly and H. K. Khalil, *Singular Perturbation Methods in
       Control: Analysis and Design*, Academic Press, 1986 (from memory).
    .. [2] Y. Liu and B. D. O. Anderson, "Singular perturbation approximation of balanced
       systems", International Journal of Control 50(4), 1379-1405, 1989.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> plant = pc.StateSpaceModel([[-1.0, 1.0], [0.0, -50.0]], [[0.0], [50.0]], [[1.0, 0.0]],
    ...                            states=["temperature", "heater"])
    >>> from plantcore.reduction.singular_perturbation import eliminate_states
    >>> cut = eliminate_states(plant, ["heater"])
    >>> cut.kept_states, cut.removed_states
    (('temperature',), ('heater',))
    >>> bool(np.allclose(cut.model.transfer_at(0.0), plant.transfer_at(0.0)))
    True
    >>> bool(cut.peak_error <= cut.peak_error_bound)   # the error norm lies between them
    True
    """
    if not isinstance(method, str) or method not in _ELIMINATION_METHODS:
        raise ValueError(f"unknown method {method!r}; choose one of "
                         f"{', '.join(repr(k) for k in _ELIMINATION_METHODS)}.")
    model = as_model(model)
    if isinstance(states, str):
        states = [states]
    names = list(states)
    index = {name: i for i, name in enumerate(model.states)}
    seen = set()
    for name in names:
        if not isinstance(name, str):
            raise TypeError(f"states to eliminate are given by name; got {name!r} "
                             f"({type(name).__name__}).")
        if name not in index:
            shown = ", ".join(model.states[:12]) + (", ..." if model.n > 12 else "")
            raise ValueError(f"the model has no state named {name!r}; its states are {shown}.")
        if name in seen:
            raise ValueError(f"the state {name!r} is named twice; name each state once.")
        seen.add(name)
    drop = np.array(sorted(index[name] for name in names), dtype=int)
    dropped = set(drop.tolist())
    keep = np.array([i for i in range(model.n) if i not in dropped], dtype=int)
    removed = tuple(model.states[i] for i in drop)
    kept = tuple(model.states[i] for i in keep)
    what = "the states " + ", ".join(removed)
    Ar, Br, Cr, Dr, cond = _ELIMINATION_METHODS[method](model.A, model.B, model.C, model.D,
                                                         keep, drop, model.is_discrete, what)
    name = f"{model.name} ({len(removed)} states {method}d)" if model.name else None
    reduced = StateSpaceModel(Ar, Br, Cr, Dr, model.dt, states=list(kept) or None,
                              inputs=model.inputs, outputs=model.outputs, name=name)
    error = truncation_error(model, reduced)
    scale = peak_gain(model).value
    relative = error.value / scale if 0.0 < scale < math.inf else math.nan
    return EliminatedStates(reduced, method, removed, kept, cond, method == "residualize",
                            float(error.value), float(error.upper_bound),
                            float(error.frequency), float(relative))
