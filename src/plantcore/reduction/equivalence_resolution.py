"""What floating point can resolve when two transfer matrices are compared, frequency by frequency.

The equivalence certificate (:mod:`plantcore.reduction.equivalence`) compares two models by
the difference of their frequency responses.  A difference is only meaningful when it is
larger than the rounding that computing it, and storing the two models, can cause.  This
module evaluates both transfer matrices at a set of frequencies, measures
``sigma_max(G_a - G_b)`` there (the difference in block form: each model evaluated in its
own coordinates, no realization of ``a - b`` formed) and computes, at the same frequency, a
first-order bound on the rounding in that difference: the *attainable accuracy*.

The bound (see :func:`response_with_rounding_bound`) is computed from the very LU
factorization used to evaluate the response, so it is measured for these two models, not
guessed from a fixed tolerance.  Two models that share their state matrix and their input
(or output) matrix bit for bit have their difference computed directly from one solve,
with a bound for that computation (:func:`difference_with_rounding_bound`).
"""

from __future__ import annotations

import contextlib
import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

from plantcore.reduction.norms import shared_response

__all__ = ["FrequencyCheck", "ResolutionVerdict", "ResponseEvaluator", "compare_responses",
           "compare_shared_responses", "difference_with_rounding_bound",
           "examined_frequencies", "refine_largest_difference", "resolution_verdict",
           "response_with_rounding_bound", "shared_matrices"]

_UNIT_ROUNDOFF = np.finfo(float).eps / 2

#: Complex arithmetic rounds a little more than real arithmetic (a complex product is within
#: ``sqrt(2) gamma_2`` of the exact one, a quotient within ``sqrt(2) gamma_4``; Higham 2002,
#: Lemma 3.5): the real-arithmetic constants ``gamma_k`` are taken as ``gamma_(4k)``.
COMPLEX_FACTOR = 4

#: Frequencies on the logarithmic (continuous) or uniform plus logarithmic (discrete) grid,
#: before the pole frequencies and the caller's frequencies are added.
GRID_POINTS = 96

#: Largest number of pole frequencies added to the grid (the largest and smallest first).
MAX_POLE_FREQUENCIES = 64


def _gamma(k: int) -> float:
    """``gamma_k = k u / (1 - k u)`` for complex arithmetic (Higham 2002, section 3.1)."""
    ku = COMPLEX_FACTOR * k * _UNIT_ROUNDOFF
    return ku / (1.0 - ku) if ku < 0.5 else math.inf


@dataclass(frozen=True)
class FrequencyCheck:
    """The measured difference of two transfer matrices at one frequency.

    Attributes
    ----------
    frequency : float
        rad/s (``inf`` for infinite frequency), or rad/sample in ``[0, pi]``.
    difference : float
        ``sigma_max(G_a - G_b)`` as computed, both responses evaluated at this frequency.
    attainable : float
        First-order bound on the rounding in :attr:`difference` (absolute, same units):
        the sum of the bounds of :func:`response_with_rounding_bound` for the two models.
        A difference at or below it cannot be told from rounding.
    gain : float
        ``sigma_max(G_a)`` at this frequency, as computed (the first model's gain).
    """

    frequency: float
    difference: float
    attainable: float
    gain: float = math.inf


def response_with_rounding_bound(A, B, C, D, point):
    """``G = C (point I - A)^{-1} B + D`` and a componentwise first-order bound on its rounding.

    Parameters
    ----------
    A : (n, n) ndarray
    B : (n, m) ndarray
    C : (p, n) ndarray
    D : (p, m) ndarray
        Real matrices (equilibrated by an exact power-of-two state scaling, say).
    point : complex
        ``s = j w`` in continuous time, ``z = exp(j theta)`` in discrete time.

    Returns
    -------
    (G, E) : ((p, m) complex ndarray, (p, m) ndarray) or None
        The computed response and a nonnegative matrix with ``|G_computed - G_exact| <= E``
        entrywise to first order, so that ``sigma_max`` of the error is at most
        ``||E||_2``.  None when ``point I - A`` is singular in floating point (a pole) or the
        result is not finite.

    Notes
    -----
    With ``M = point I - A = P L U`` (LU with partial pivoting), ``X = M^{-1} B`` and
    ``Y = C M^{-1}``, the bound adds three first-order terms:

    1. *The solve.*  The computed ``X`` satisfies ``(M + dM) X = B`` with
       ``|dM| <= gamma_3n P |L| |U|`` (Higham [1]_, Theorem 9.4), so the error of
       ``C X`` is ``C M^{-1} dM X`` and is at most ``gamma_3n |Y P| |L| |U| |X|``.
    2. *The product.*  ``|fl(C X + D) - (C X + D)| <= gamma_(n+1) (|C| |X| + |D|)``
       (Higham [1]_, section 3.5).
    3. *The data.*  The stored entries of ``A, B, C, D`` are themselves rounded, by a relative
       ``u`` each; the first-order change of ``G`` is
       ``Y dA X + dC X + Y dB + dD`` (the derivative of ``C (sI - A)^{-1} B + D``), at most
       ``u (|Y| |A| |X| + |C| |X| + |Y| |B| + |D|)``: the componentwise condition of the
       transfer matrix at ``point`` (in the spirit of Skeel's condition number, Higham [1]_,
       section 7.2).

    Term 1 is the dominant one near poles and for stiff models: ``|Y| |L| |U| |X|`` grows
    like ``||C M^{-1}|| ||M|| ||M^{-1} B||``, the condition of the evaluation.  The constants
    ``gamma_k`` are those of complex arithmetic (:data:`COMPLEX_FACTOR`).  Second-order terms
    are neglected; they matter only when the bound approaches ``|G|`` itself.

    References
    ----------
    .. [1] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM,
       2002 (Lemma 3.5, section 3.5, section 7.2, Theorem 9.4).
    """
    evaluated = _evaluate(A, B, C, D, point)
    return None if evaluated is None else evaluated[:2]


@contextlib.contextmanager
def _quiet():
    """No warnings and no floating-point error reports (near-singular solves at poles)."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        yield


def _factored(A, point):
    """The packed LU factorization (scipy's ``lu_factor``) of ``point I - A``, or None when
    it is singular or not finite in floating point (a pole)."""
    M = complex(point) * np.eye(A.shape[0]) - A
    with _quiet():
        lu, piv = scipy.linalg.lu_factor(M, check_finite=False)
    if not np.all(np.isfinite(lu)) or np.any(np.diag(lu) == 0):
        return None
    return lu, piv


def _evaluate(A, B, C, D, point):
    """:func:`response_with_rounding_bound` and the size ``|C| |X| + |D|`` of what it computed."""
    n = A.shape[0]
    Dc = np.asarray(D, dtype=float)
    if n == 0:
        return Dc.astype(complex), _UNIT_ROUNDOFF * np.abs(Dc), np.abs(Dc)
    factored = _factored(A, point)
    if factored is None:
        return None
    lu, piv = factored
    with _quiet():
        X = scipy.linalg.lu_solve((lu, piv), B.astype(complex), check_finite=False)
        Y = scipy.linalg.lu_solve((lu, piv), C.T.astype(complex), trans=1, check_finite=False).T
        G = C @ X + Dc
        if not (np.all(np.isfinite(G)) and np.all(np.isfinite(Y))):
            return None
        absX, absY = np.abs(X), np.abs(Y)
        absC, absD = np.abs(C), np.abs(Dc)
        solve = _solve_term(lu, piv, absY, absX)
        product = absC @ absX + absD
        data = absY @ (np.abs(A) @ absX) + absC @ absX + absY @ np.abs(B) + absD
        E = _gamma(3 * n) * solve + _gamma(n + 1) * product + _UNIT_ROUNDOFF * data
        if not np.all(np.isfinite(E)):
            return None
    return G, E, product


def shared_matrices(first, second) -> str | None:
    """Which matrices two ``(A, B, C, D)`` models share bit for bit, as far as
    :func:`difference_with_rounding_bound` can use it: ``"input"`` when ``A`` and ``B`` are
    identical (only the outputs ``C``, ``D`` may differ), ``"output"`` when ``A`` and ``C``
    are (only ``B``, ``D`` may differ), else None.  Both models up to ``DENSE_LIMIT``
    states."""
    A, B, C, _ = first
    A2, B2, C2, _ = second
    if A.shape != A2.shape or A.shape[0] > DENSE_LIMIT or not np.array_equal(A, A2):
        return None
    if B.shape == B2.shape and np.array_equal(B, B2):
        return "input"
    if C.shape == C2.shape and np.array_equal(C, C2):
        return "output"
    return None


def difference_with_rounding_bound(first, second, shared: str, point):
    """``G_a - G_b`` evaluated directly for two models that share ``A`` and ``B``
    (``shared="input"``) or ``A`` and ``C`` (``"output"``), with a first-order bound on its
    rounding, and ``G_a``.

    Returns ``(G_a, difference, bound)`` (the bound a nonnegative ``(p, m)`` matrix, entrywise
    to first order, like :func:`response_with_rounding_bound`), or None at a pole.

    Notes
    -----
    With ``A`` and ``B`` shared, ``G_a - G_b = (C_a - C_b) X + (D_a - D_b)`` with the one
    solve ``X = (point I - A)^{-1} B``: computed so, the rounding of ``X`` enters only
    through ``C_a - C_b``, where adding the two models' bounds of
    :func:`response_with_rounding_bound` would count it twice at the size of ``G`` itself.
    The same three terms, for this computation (Higham [1]_): the solve's backward error
    ``|dM| <= gamma_3n P |L| |U|`` (Theorem 9.4) propagated through
    ``Y_d = (C_a - C_b) M^{-1}``, ``gamma_3n |Y_d P| |L| |U| |X|``; the product and the two
    subtractions, ``gamma_(n+1) (|C_d| |X| + |D_d|) + u (|C_d| |X| + |D_d|)``; and the data: a
    relative rounding ``u`` of the shared ``A`` and ``B`` (one stored matrix, the same
    perturbation in both models), ``u (|Y_d| |A| |X| + |Y_d| |B|)``, and of each model's own
    ``C`` and ``D``, independently, ``u ((|C_a| + |C_b|) |X| + |D_a| + |D_b|)``.  This keeps
    the rounding in how one model was made from the other (``C`` scaled, say) at its full
    size, and the shared factor at the size of the difference.  ``"output"`` is the dual,
    with ``Y = C (point I - A)^{-1}`` shared and ``G_a - G_b = Y (B_a - B_b) + D_a - D_b``.

    References
    ----------
    .. [1] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM,
       2002 (section 3.5, Theorem 9.4).
    """
    A = first[0]
    n = A.shape[0]
    Ba, Ca, Da = (np.asarray(x, dtype=float) for x in first[1:])
    Bb, Cb, Db = (np.asarray(x, dtype=float) for x in second[1:])
    Dd = Da - Db
    absDd = np.abs(Dd)
    own_D = np.abs(Da) + np.abs(Db)
    if n == 0:
        return (Da.astype(complex), Dd.astype(complex),
                _UNIT_ROUNDOFF * (absDd + own_D))
    output = shared == "output"
    factored = _factored(A, point)
    if factored is None:
        return None
    lu, piv = factored
    with _quiet():
        if output:
            Bd = Ba - Bb
            Y = scipy.linalg.lu_solve((lu, piv), Ca.T.astype(complex), trans=1,
                                      check_finite=False).T          # shared
            Xd = scipy.linalg.lu_solve((lu, piv), Bd.astype(complex), check_finite=False)
            diff = Y @ Bd + Dd
            Ga = Y @ Ba + Da
            absY, absXd, absBd = np.abs(Y), np.abs(Xd), np.abs(Bd)
            left, right = absY, absXd                  # the rounding of Y reaches Bd only
            product = absY @ absBd + absDd
            data = (absY @ (np.abs(A) @ absXd) + np.abs(Ca) @ absXd
                    + absY @ (np.abs(Ba) + np.abs(Bb)) + own_D)
        else:
            Cd = Ca - Cb
            X = scipy.linalg.lu_solve((lu, piv), Ba.astype(complex), check_finite=False)
            Yd = scipy.linalg.lu_solve((lu, piv), Cd.T.astype(complex), trans=1,
                                       check_finite=False).T
            diff = Cd @ X + Dd
            Ga = Ca @ X + Da
            absX, absYd, absCd = np.abs(X), np.abs(Yd), np.abs(Cd)
            left, right = absYd, absX
            product = absCd @ absX + absDd
            data = (absYd @ (np.abs(A) @ absX) + absYd @ np.abs(Ba)
                    + (np.abs(Ca) + np.abs(Cb)) @ absX + own_D)
        if not (np.all(np.isfinite(diff)) and np.all(np.isfinite(Ga))):
            return None
        solve = _solve_term(lu, piv, left, right)
        E = (_gamma(3 * n) * solve + (_gamma(n + 1) + _UNIT_ROUNDOFF) * product
             + _UNIT_ROUNDOFF * data)
        if not np.all(np.isfinite(E)):
            return None
    return Ga, diff, E


def compare_shared_responses(first, second, shared: str, frequencies,
                             discrete: bool) -> tuple:
    """:func:`compare_responses` for two models that share matrices (:func:`shared_matrices`):
    at each frequency the difference computed directly, with the bound of
    :func:`difference_with_rounding_bound`."""
    checks = []
    for w in frequencies:
        w = float(w)
        if math.isinf(w):
            Da, Db = (np.asarray(m[3], dtype=float) for m in (first, second))
            Ga, diff = Da.astype(complex), (Da - Db).astype(complex)
            E = _UNIT_ROUNDOFF * (np.abs(Da - Db) + np.abs(Da) + np.abs(Db))
        else:
            point = np.exp(1j * w) if discrete else 1j * w
            evaluated = difference_with_rounding_bound(first, second, shared, point)
            if evaluated is None:
                continue
            Ga, diff, E = evaluated
        with np.errstate(all="ignore"):
            value = float(np.linalg.norm(diff, 2)) if diff.size else 0.0
            gain = float(np.linalg.norm(Ga, 2)) if Ga.size else 0.0
        bound = _norm2(E) + _UNIT_ROUNDOFF * value
        if math.isfinite(value) and math.isfinite(bound):
            checks.append(FrequencyCheck(w, value, bound, gain))
    return tuple(checks)


def _solve_term(lu, piv, left, right):
    """``|Y P| |L| |U| |X|`` from a packed LU factorization ``M = P L U`` (scipy's
    ``lu_factor``) and the absolute values ``left = |Y|``, ``right = |X|``: the factor of
    ``gamma_3n`` in the solve's part of the rounding bound (Higham 2002, Theorem 9.4)."""
    n = lu.shape[0]
    perm = np.arange(n)
    for i, k in enumerate(piv):          # M[perm] = L U
        perm[i], perm[k] = perm[k], perm[i]
    absL = np.abs(np.tril(lu, -1)) + np.eye(n)
    absU = np.abs(np.triu(lu))
    return left[:, perm] @ (absL @ (absU @ right))


def _norm2(E) -> float:
    if E.size == 0:
        return 0.0
    with np.errstate(all="ignore"):
        return float(np.linalg.norm(E, 2))


#: Models of up to this many states are evaluated by a dense LU factorization at each
#: frequency, with the componentwise bound of :func:`response_with_rounding_bound`; larger
#: ones on one Schur form shared with the peak gain
#: (:meth:`plantcore.reduction.norms._FrequencyResponse.response_with_rounding`, ``O(n^2 (m +
#: p))`` per frequency instead of ``O(n^3)``), whose bound adds the measured residual of the
#: Schur form (normwise) to the triangular solve's and the data's (componentwise).
DENSE_LIMIT = 150


class ResponseEvaluator:
    """``G`` and a first-order bound (spectral norm) on its rounding, at one frequency.

    ``model`` is an ``(A, B, C, D)`` tuple of real arrays (equilibrated).  Calling the
    evaluator with a frequency (rad/s, ``inf`` allowed, or rad/sample) returns
    ``(G, bound)``, or None at a pole.  :attr:`poles` are the eigenvalues of ``A``.
    """

    def __init__(self, model, discrete: bool):
        self.model = model
        self.discrete = discrete
        A = model[0]
        self.dense = A.shape[0] <= DENSE_LIMIT
        self._schur = None if self.dense else shared_response(*model, discrete)

    @property
    def poles(self) -> np.ndarray:
        if self._schur is not None:
            return self._schur.poles
        A = self.model[0]
        if A.shape[0] == 0:
            return np.zeros(0, dtype=complex)
        with np.errstate(all="ignore"):
            return np.linalg.eigvals(A)

    def defective(self) -> np.ndarray:
        """:func:`defective_poles` for dense models; for large ones, where eigenvectors are
        not computed, the poles that the Schur form shows in tight clusters (a numerically
        defective eigenvalue of multiplicity k splits into k computed values about
        ``eps^(1/k) ||A||`` apart): those within ``1e3 sqrt(eps) ||A||`` of another."""
        A = self.model[0]
        if self._schur is None:
            return defective_poles(A)
        lam = self.poles
        if lam.size < 2:
            return np.zeros(0, dtype=complex)
        radius = 1e3 * math.sqrt(np.finfo(float).eps) * float(np.linalg.norm(A))
        order = np.argsort(lam.real, kind="stable")
        close = np.zeros(lam.size, dtype=bool)
        sorted_lam = lam[order]
        for shift in range(1, min(lam.size, 64)):
            d = np.abs(sorted_lam[shift:] - sorted_lam[:-shift])
            near = d <= radius
            close[order[shift:][near]] = True
            close[order[:-shift][near]] = True
            if np.all(np.abs(sorted_lam[shift:].real - sorted_lam[:-shift].real) > radius):
                break
        return lam[close]

    def batch(self, freqs) -> list:
        """``self(w)`` for every frequency, the Schur-form products batched."""
        if self._schur is not None:
            return self._schur.responses_with_rounding(freqs, data=True)
        return [self(float(w)) for w in freqs]

    def __call__(self, w: float):
        D = self.model[3]
        if math.isinf(w):
            return D.astype(complex), _norm2(_UNIT_ROUNDOFF * np.abs(D))
        if self._schur is not None:
            return self._schur.response_with_rounding(w, data=True)
        point = np.exp(1j * w) if self.discrete else 1j * w
        evaluated = _evaluate(*self.model, point)
        if evaluated is None:
            return None
        return evaluated[0], _norm2(evaluated[1])


def _check(first, second, w: float):
    """One :class:`FrequencyCheck` at ``w`` from two evaluators, or None."""
    ra = first(w)
    rb = second(w) if ra is not None else None
    return _paired(w, ra, rb)


def _paired(w: float, ra, rb):
    """The :class:`FrequencyCheck` from two evaluated ``(G, bound)`` pairs, or None."""
    if ra is None or rb is None:
        return None
    (Ga, Ea), (Gb, Eb) = ra, rb
    with np.errstate(all="ignore"):
        diff = Ga - Gb
        value = float(np.linalg.norm(diff, 2)) if diff.size else 0.0
        gain = float(np.linalg.norm(Ga, 2)) if Ga.size else 0.0
    # the two bounds, and the subtraction's own rounding
    bound = Ea + Eb + _UNIT_ROUNDOFF * value
    if math.isfinite(value) and math.isfinite(bound):
        return FrequencyCheck(w, value, bound, gain)
    return None


def compare_responses(first, second, frequencies, discrete: bool) -> tuple:
    """One :class:`FrequencyCheck` per frequency where both responses are defined.

    ``first`` and ``second`` are ``(A, B, C, D)`` tuples of real arrays with the same
    numbers of inputs and outputs, or :class:`ResponseEvaluator` objects.  A frequency at
    which either model has a pole (in floating point) is left out.  At infinite frequency
    (continuous time) the responses are the feedthrough matrices.
    """
    if not isinstance(first, ResponseEvaluator):
        first = ResponseEvaluator(first, discrete)
    if not isinstance(second, ResponseEvaluator):
        second = ResponseEvaluator(second, discrete)
    frequencies = [float(w) for w in frequencies]
    checks = []
    for start in range(0, len(frequencies), _BATCH):
        chunk = frequencies[start:start + _BATCH]
        pairs = zip(chunk, first.batch(chunk), second.batch(chunk))
        checks.extend(_paired(w, ra, rb) for w, ra, rb in pairs)
    return tuple(c for c in checks if c is not None)


#: Frequencies evaluated together (the batch of :meth:`ResponseEvaluator.batch`).
_BATCH = 32


def refine_largest_difference(first, second, checks, discrete: bool):
    """The largest measured difference, refined by a local maximization between its
    neighbouring frequencies (Brent's method, scipy.optimize.minimize_scalar); returns the
    best :class:`FrequencyCheck` found (one of ``checks`` when nothing larger turned up).

    This locates the peak of the difference without any realization of ``a - b`` and
    without a level-set test on ``n_a + n_b`` states: a local, not a global, search."""
    finite = sorted((c for c in checks if math.isfinite(c.frequency)), key=lambda c: c.frequency)
    if len(finite) < 3:
        return max(checks, key=lambda c: c.difference) if checks else None
    k = max(range(len(finite)), key=lambda i: finite[i].difference)
    best = finite[k]
    lo = finite[max(k - 1, 0)].frequency
    hi = finite[min(k + 1, len(finite) - 1)].frequency
    if not hi > lo:
        return best
    found = {}

    def negative_difference(w):
        c = _check(first, second, float(w))
        if c is None:
            return 0.0
        found[float(w)] = c
        return -c.difference

    scipy.optimize.minimize_scalar(negative_difference, bounds=(lo, hi), method="bounded",
                                   options={"xatol": 1e-9 * max(abs(hi), 1e-300), "maxiter": 40})
    for c in found.values():
        if c.difference > best.difference:
            best = c
    return best


def _pole_frequencies(poles, discrete: bool) -> np.ndarray:
    """Natural frequencies and damped frequencies of the poles, nonzero and finite."""
    if poles.size == 0:
        return np.zeros(0)
    with np.errstate(all="ignore"):
        if discrete:
            nonzero = poles[poles != 0]
            logs = np.log(nonzero.astype(complex))
            values = np.concatenate([np.abs(logs.imag), np.abs(logs)])
        else:
            values = np.concatenate([np.abs(poles.imag), np.abs(poles)])
    values = values[np.isfinite(values) & (values > 0)]
    return np.unique(values)


def examined_frequencies(poles, discrete: bool, extra=(), scale: float = 0.0,
                         defective=()) -> np.ndarray:
    """The frequencies at which a certificate compares two responses.

    Continuous time: zero, infinity, a logarithmic grid of :data:`GRID_POINTS` points from a
    hundredth of the smallest to a hundred times the largest pole magnitude, the damped and
    natural frequencies of the poles, and ``extra`` (the peak frequencies found by the
    caller).  Discrete time: a uniform grid on ``[0, pi]``, a logarithmic grid towards 0
    (slow poles near ``z = 1``), the pole angles and ``|log z|``, and ``extra``.

    Near a numerically defective pole (``defective``: eigenvalue condition number above
    :data:`DEFECTIVE_CONDITION`, a double integrator in rotated coordinates, say, whose
    computed eigenvalues split by about ``sqrt(eps) scale``) the computed responses are
    dominated, to second order, by that split, which the first-order rounding bound does
    not cover: frequencies whose point lies within ``1000 sqrt(eps) scale`` of such a pole
    are left out (``scale`` the norm of the state matrices), and in continuous time a
    second logarithmic grid of ``GRID_POINTS / 2`` points from ten times that radius to a
    hundred times ``scale`` is added, so that frequencies remain where a cluster of
    integrators computed at ``1e-9`` would otherwise have set the whole grid.
    """
    poles = np.asarray(poles, dtype=complex).ravel()
    defective = np.asarray(defective, dtype=complex).ravel()
    pole_freqs = _pole_frequencies(poles, discrete)
    if discrete:
        pole_freqs = pole_freqs[pole_freqs <= math.pi]
    if pole_freqs.size > MAX_POLE_FREQUENCIES:
        index = np.unique(np.linspace(0, pole_freqs.size - 1, MAX_POLE_FREQUENCIES).astype(int))
        pole_freqs = pole_freqs[index]
    if discrete:
        low = max(float(pole_freqs.min()) / 100.0, 1e-12) if pole_freqs.size else 1e-6
        low = min(low, 1e-2)
        grid = np.concatenate([np.linspace(0.0, math.pi, GRID_POINTS // 2),
                               np.geomspace(low, math.pi, GRID_POINTS // 2)])
    else:
        if pole_freqs.size:
            low, high = float(pole_freqs.min()) / 100.0, float(pole_freqs.max()) * 100.0
        else:
            low, high = 1e-3, 1e3
        low, high = max(low, 1e-300), min(high, 1e300)
        grid = np.concatenate([[0.0, math.inf], np.geomspace(low, high, GRID_POINTS)])
    extra = np.asarray([w for w in extra if w is not None and not math.isnan(w)], dtype=float)
    if discrete:
        extra = np.clip(extra, 0.0, math.pi)
    values = np.concatenate([grid, pole_freqs, extra])
    if defective.size:
        radius = 1e3 * math.sqrt(np.finfo(float).eps) * max(scale, 1.0 if discrete else 0.0)
        if not discrete and radius > 0:
            # The poles of a numerically defective cluster (a double integrator) are computed
            # about sqrt(eps) scale apart, so the grid spanned by them may lie wholly inside
            # the radius left out below: a second grid from just outside it to a hundred
            # times the norm of the state matrices keeps frequencies where both responses
            # are evaluated accurately.
            top = max(float(grid[-1]), 100.0 * max(scale, radius))
            values = np.concatenate([values, np.geomspace(10.0 * radius, top,
                                                          GRID_POINTS // 2)])
    values = np.unique(values[~np.isnan(values)])
    if defective.size:
        with np.errstate(all="ignore"):
            points = np.exp(1j * values) if discrete else 1j * values
            points = np.where(np.isinf(values), np.inf, points)
            near = np.min(np.abs(points[:, None] - defective[None, :]), axis=1) <= radius
        values = values[~near]
    return values


#: An eigenvalue whose condition number ``||x|| ||y|| / |y^H x|`` (right and left
#: eigenvectors) exceeds this counts as numerically defective for
#: :func:`examined_frequencies`.
DEFECTIVE_CONDITION = 1e6


def defective_poles(A) -> np.ndarray:
    """The eigenvalues of ``A`` whose condition number exceeds :data:`DEFECTIVE_CONDITION`
    (J. H. Wilkinson, *The Algebraic Eigenvalue Problem*, 1965, chapter 2: the first-order
    sensitivity of a simple eigenvalue); all of them when the eigenvector matrix is
    singular."""
    if A.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        values, vectors = np.linalg.eig(A)
        try:
            left = np.linalg.inv(vectors)
        except np.linalg.LinAlgError:
            return values
        condition = np.linalg.norm(left, axis=1) * np.linalg.norm(vectors, axis=0)
    return values[~(condition <= DEFECTIVE_CONDITION)]


#: A difference counts as *resolved* (told apart from rounding) at a frequency when it
#: exceeds the attainable accuracy there by this factor.  The bound is a first-order worst
#: case; the margin covers its neglected second-order terms and rounding in the way one of
#: the models was made from the other that the bound does not see (a similarity transform
#: computed in floating point, say).
RESOLUTION_MARGIN = 100.0


@dataclass(frozen=True)
class ResolutionVerdict:
    """How the measured differences compare with the tolerance and the attainable accuracy.

    Attributes
    ----------
    verdict : str
        ``"equivalent"``, ``"not equivalent"`` or ``"undecided"``.
    basis : str
        ``"tolerance"`` (every difference within the tolerance), ``"attainable accuracy"``
        (some above the tolerance, none above the attainable accuracy), ``"resolved"`` (a
        difference above both the tolerance and ``RESOLUTION_MARGIN`` times the attainable
        accuracy) or ``"unresolved"`` (above the tolerance and the attainable accuracy, but
        within the margin), or ``"no frequency"`` when no frequency could be examined.
    check : FrequencyCheck or None
        The frequency that decided: the resolved difference largest against its threshold,
        the unresolved one largest against its attainable accuracy, or, for an equivalent
        verdict, the largest attainable accuracy among the differences above the tolerance
        (``"attainable accuracy"``) or the largest difference (``"tolerance"``).
    """

    verdict: str
    basis: str
    check: FrequencyCheck | None


#: "Equivalent to the attainable accuracy X" is said only for X at most this, relative to
#: the reference gain (unless the gain of ``a`` is nowhere above its attainable accuracy:
#: ``a`` is zero up to rounding and only absolute comparisons mean anything).  Beyond it
#: the responses are not known to two digits and the neglected second-order terms of the
#: bound are no longer small: undecided.
ATTAINABLE_LIMIT = 1e-2


def resolution_verdict(checks, threshold: float, margin: float = RESOLUTION_MARGIN,
                       limit: float = math.inf):
    """Decide from :class:`FrequencyCheck` records against an absolute tolerance ``threshold``.

    Not equivalent only where a difference is *resolved*: above ``threshold`` and above
    ``margin`` times the attainable accuracy at the same frequency.  Equivalent when every
    difference is at most ``threshold``, or at most the attainable accuracy where that is
    at most ``limit`` (absolute; the caller passes ``ATTAINABLE_LIMIT`` times the reference
    gain).  Otherwise undecided.  ``threshold`` and ``limit`` may also be functions of a
    :class:`FrequencyCheck` giving its own absolute value (a multiple of the gain of ``a``
    there, when the peak gain of ``a`` is infinite).
    """
    if not checks:
        return ResolutionVerdict("undecided", "no frequency", None)
    tau = threshold if callable(threshold) else (lambda c: threshold)
    cap = limit if callable(limit) else (lambda c: limit)
    resolved = [c for c in checks
                if c.difference > tau(c) and c.difference > margin * c.attainable]
    if resolved:
        worst = max(resolved,
                    key=lambda c: c.difference / max(tau(c), margin * c.attainable, 1e-300))
        return ResolutionVerdict("not equivalent", "resolved", worst)
    unresolved = [c for c in checks if c.difference > tau(c)
                  and (c.difference > c.attainable or c.attainable > cap(c))]
    if unresolved:
        worst = max(unresolved, key=lambda c: c.difference / max(c.attainable, 1e-300))
        return ResolutionVerdict("undecided", "unresolved", worst)
    above = [c for c in checks if c.difference > tau(c)]
    if above:
        return ResolutionVerdict("equivalent", "attainable accuracy",
                                 max(above, key=lambda c: c.attainable))
    return ResolutionVerdict("equivalent", "tolerance", max(checks, key=lambda c: c.difference))
