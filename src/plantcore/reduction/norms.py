"""System norms: the peak gain (L-infinity / H-infinity norm) and the H2 norm.

The peak gain of a model with transfer matrix ``G`` is

.. math::

    \\|G\\|_\\infty = \\sup_{\\omega} \\sigma_{\\max}(G(j\\omega)) \\quad\\text{(continuous)},
    \\qquad
    \\|G\\|_\\infty = \\max_{\\theta\\in[0,\\pi]} \\sigma_{\\max}(G(e^{j\\theta}))
    \\quad\\text{(discrete)},

the largest gain over the boundary of the stability region.  It is the L-infinity norm of
the transfer matrix for any model without poles on that boundary, and the H-infinity norm
when the model is also stable.  The H2 norm is the root of the energy of the impulse
response, computed from a Gramian.

The module is about 1,000 lines: the two norms share the equilibrated model, the Schur-form
machinery, the boundary-pole test and the stability test, and read best together.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
import scipy.optimize

from plantcore.core.equilibration import equilibrate
from plantcore.core.errors import AccuracyWarning
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import any_fragile
from plantcore.core.safe_norms import frobenius
from plantcore.reduction.power_of_two_scaling import model_scaling
from plantcore.structure.modes import schur_eigenvalue_condition
from plantcore.structure.pbh_measures import threads_by_size

__all__ = ["PeakGain", "h2_norm", "peak_gain"]

_EPS = np.finfo(float).eps
_UNIT_ROUNDOFF = _EPS / 2

#: A pole counts as lying on the imaginary axis (unit circle) when its distance to it is at
#: most this factor times ``eps * ||A_e||_F`` (``A_e`` the equilibrated state matrix; for the
#: unit circle ``max(1, ||A_e||_F)``).  See :func:`peak_gain`, Notes.
BOUNDARY_FACTOR = 1000.0

#: An eigenvalue ``lambda`` of the Hamiltonian matrix (or pencil; in discrete time that of
#: the Cayley transform) is a *candidate* crossing frequency when
#: ``|Re lambda| <= AXIS_TOLERANCE * |lambda|``, plus a rounding floor.  Generous on
#: purpose: a spurious candidate costs one evaluation, a missed one could stop too early.
AXIS_TOLERANCE = 1e-6

#: Eigenvalues within this distance of the points where crossing frequencies meet their
#: mirror images (``s = 0``, relative to the matrix's scale; in discrete time ``s = 0`` of the
#: Cayley transform, i.e. ``z = 1`` or ``z = -1``) also
#: give candidates, because there a perturbed pair may leave the boundary along the real
#: axis (a cluster's eigenvalues move by about the cluster's size).
CLUSTER_RADIUS = 1e-2

_MAX_ITERATIONS = 60
_MAX_POLE_FREQUENCIES = 64
#: Points of the logarithmic grid added to the pole frequencies before the first test.
_GRID_POINTS = 16
#: Sampled local maxima refined before the first level-set test.
_REFINED_PEAKS = 3
#: Relative gain differences up to this are rounding: a frequency is replaced by another
#: only for a larger gain than that (8 eps).
_FLAT = 8 * np.finfo(float).eps


@dataclass(frozen=True)
class PeakGain:
    """The peak gain of a model's frequency response and where it occurs.

    Attributes
    ----------
    value : float
        The peak gain: ``sigma_max(G)`` at :attr:`frequency`, a gain actually attained (a
        lower bound on the norm), within :attr:`relative_accuracy` of the true supremum.
        ``inf`` when a pole lies on the boundary (see :attr:`boundary_pole`).
    frequency : float
        Where the peak occurs: rad/s in continuous time (``inf`` when the supremum is
        approached at infinite frequency, i.e. it is the gain of ``D``), rad/sample in
        ``[0, pi]`` in discrete time.  For an infinite value, the frequency of the boundary
        pole.
    upper_bound : float
        A level the gain does not exceed (``value <= norm <= upper_bound``), as verified by
        the last Hamiltonian test: ``(1 + rel_tol) * value + rounding_bound``; ``inf`` for
        a boundary pole, ``nan`` when the iteration stopped without verification.
    relative_accuracy : float
        ``upper_bound / value - 1``: the relative accuracy reached, ``rel_tol`` plus the
        relative rounding bound (above ``rel_tol`` when the evaluation of the frequency
        response near the peak is ill-conditioned: lightly damped poles with
        ill-conditioned eigenvectors, slow poles of a sampled model in companion form).
        ``0.0`` for static gains and exact cases, ``nan`` when not verified.
    iterations : int
        Number of Hamiltonian eigenvalue problems solved (the crossing tests).
    boundary_pole : bool
        True when the value is infinite because a pole of the transfer function lies on the
        imaginary axis (continuous) or the unit circle (discrete) within the tolerance
        described in :func:`peak_gain`.
    is_discrete : bool
        True when :attr:`frequency` is in rad/sample.
    message : str
        One plain sentence on how the value was obtained.
    decisions : tuple of RankDecision
        Rank decisions of the minimal realization used to remove hidden (uncontrollable or
        unobservable) boundary modes; empty when none was needed.
    fragile : bool
        True when any of those decisions lies within a factor 100 of its tolerance.
    evaluations : int
        Number of frequency-response evaluations (triangular solves on the Schur form).
    rounding_bound : float
        First-order bound (absolute) on the rounding in the computed gain at
        :attr:`frequency` (:meth:`_FrequencyResponse.rounding_bound`): the true gain of the
        stored model there may differ from :attr:`value` by this much, so it is added to
        the level of the last crossing test and to :attr:`upper_bound`.
    """

    value: float
    frequency: float
    upper_bound: float
    relative_accuracy: float
    iterations: int
    boundary_pole: bool
    is_discrete: bool
    message: str
    decisions: tuple = field(default=(), repr=False)
    fragile: bool = False
    evaluations: int = 0
    rounding_bound: float = 0.0

    @property
    def frequency_unit(self) -> str:
        """``"rad/sample"`` in discrete time, ``"rad/s"`` in continuous time."""
        return "rad/sample" if self.is_discrete else "rad/s"


# --- helpers ----------------------------------------------------------------------------------

def _validate_rel_tol(rel_tol) -> float:
    if isinstance(rel_tol, bool):   # one error type for every bad rel_tol
        raise ValueError(f"rel_tol must be a number in (0, 0.1], got {rel_tol!r}.")  # noqa: TRY004
    try:
        value = float(rel_tol)
    except (TypeError, ValueError):
        raise ValueError(f"rel_tol must be a number in (0, 0.1], got {rel_tol!r}.") from None
    if not math.isfinite(value) or not (0.0 < value <= 0.1):
        raise ValueError(f"rel_tol must be a number in (0, 0.1], got {rel_tol!r}.")
    if value < 1e-14:
        raise ValueError(
            f"rel_tol {rel_tol!r} is below what double precision can verify; use 1e-14 or more.")
    return value


def _equilibrated(model: StateSpaceModel):
    """The model's matrices after an exact power-of-two state scaling (same transfer matrix)."""
    eq = equilibrate(model.A, model.B, model.C)
    A, B, C = eq.apply(model.A, model.B, model.C)
    return A, B, C, np.asarray(model.D, dtype=float)


def _boundary_poles(A: np.ndarray, discrete: bool, pole_scale: float = 0.0,
                    poles=None) -> np.ndarray:
    """Eigenvalues of ``A`` (or the given ``poles`` of ``A``) on the boundary of the
    stability region, within tolerance."""
    if A.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    lam = np.linalg.eigvals(A) if poles is None else poles
    scale = max(frobenius(A), pole_scale)
    if discrete:
        tol = BOUNDARY_FACTOR * _EPS * max(1.0, scale)
        return lam[np.abs(np.abs(lam) - 1.0) <= tol]
    tol = BOUNDARY_FACTOR * _EPS * scale
    return lam[np.abs(lam.real) <= tol]


#: Poles nearer to the boundary than ``eps^(1/3) ||A_e||_F`` (``max(1, ||A_e||_F)`` for the
#: unit circle) are checked against their own accuracy by :func:`_poles_within_accuracy`:
#: the reach of a computed triple eigenvalue (``eps^(1/k)`` for a defective eigenvalue of
#: multiplicity ``k``).
_ACCURACY_REACH = _EPS ** (1.0 / 3.0)
#: Most poles checked against their accuracy (each costs two triangular solves).
_ACCURACY_CHECKS = 64


def _poles_within_accuracy(response: _FrequencyResponse, discrete: bool,
                           pole_scale: float = 0.0) -> np.ndarray:
    """Poles whose distance to the boundary is below what their computed value can resolve.

    A pole of condition number ``kappa`` (``||x|| ||y|| / |y^H x|`` for its right and left
    eigenvectors) is computed by a backward-stable eigenvalue routine to within about
    ``eps kappa ||A||`` (J. H. Wilkinson, *The Algebraic Eigenvalue Problem*, 1965,
    chapter 2).  A pole is taken as lying on the boundary when its distance to it is at most
    ``BOUNDARY_FACTOR * eps * kappa * ||A_e||_F``.  For a simple, well-conditioned pole this
    is the plain boundary test; for a defective one it is what matters: the double
    integrator of a rigid body, in any coordinates other than its Jordan form, is computed
    as a pair about ``sqrt(eps) ||A||`` away from 0 (a finite "peak" of ``1e14`` or more),
    while its condition number ``~ 1 / sqrt(eps)`` widens the test to cover that distance.
    ``kappa`` is read from the complex Schur form already held by ``response``
    (:func:`plantcore.structure.modes.schur_eigenvalue_condition`, two triangular solves per pole) for at most
    ``_ACCURACY_CHECKS`` poles within ``_ACCURACY_REACH`` of the boundary.
    """
    if response.n == 0:
        return np.zeros(0, dtype=complex)
    lam = response.poles
    A = response.data[0]
    scale = max(frobenius(A), pole_scale)
    if discrete:
        scale = max(1.0, scale)
        distance = np.abs(np.abs(lam) - 1.0)
    else:
        distance = np.abs(lam.real)
    near = np.flatnonzero(distance <= _ACCURACY_REACH * scale)
    near = near[np.argsort(distance[near], kind="stable")][:_ACCURACY_CHECKS]
    tol = BOUNDARY_FACTOR * _EPS * scale
    found = [k for k in near
             if distance[k] <= tol * schur_eigenvalue_condition(response.T, int(k))]
    return lam[np.array(found, dtype=int)]


def _pole_frequency(lam: complex, discrete: bool) -> float:
    return float(abs(np.angle(lam))) if discrete else float(abs(lam.imag))


class _FrequencyResponse:
    """Fast evaluation of ``G`` and of ``sigma_max(G)`` from one complex Schur form.

    ``A = Z T Z^H`` with ``T`` upper triangular and ``Z`` unitary (the real Schur form of
    LAPACK, made complex by ``scipy.linalg.rsf2csf``), so that
    ``G(s) = (C Z) (s I - T)^{-1} (Z^H B) + D`` and each evaluation is one triangular solve
    with ``m`` right-hand sides, ``O(n^2 m)`` instead of the ``O(n^3)`` of a dense solve
    (A. J. Laub, "Efficient multivariable frequency response computations", IEEE Trans.
    Automatic Control 26(2), 407-408, 1981, does the same with the Hessenberg form; the
    triangular form also gives the eigenvalues, which the peak gain needs anyway).  The
    shift is written into the diagonal of ``T`` in place and the saved diagonal is put back,
    so no ``n x n`` array is copied per frequency.  A triangular solve is backward stable
    (N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM, 2002,
    Theorem 8.5).
    """

    def __init__(self, A, B, C, D, discrete: bool):
        self.n = A.shape[0]
        self.discrete = discrete
        self.D = np.asarray(D, dtype=float)
        self.sd = float(np.linalg.norm(self.D, 2)) if self.D.size else 0.0
        self.empty = self.D.size == 0
        self.evaluations = 0
        if self.n:
            T, Z = scipy.linalg.schur(A, output="real")
            T, Z = scipy.linalg.rsf2csf(T, Z)
            self.T = np.asfortranarray(T)
            self.diagonal = np.diag(T).copy()
            self.poles = self.diagonal.copy()
            self.B = Z.conj().T @ B
            self.C = C @ Z
            self._index = np.diag_indices(self.n)
            self.schur_residual = _schur_residual(A, T, Z)
            self.Z = Z
            self.data = (A, B, C)
            self._abs = None          # |T| off the diagonal and |A|, |B|, |C|, made on demand
        else:
            self.poles = np.zeros(0, dtype=complex)
            self.schur_residual = 0.0

    def _point(self, w: float) -> complex:
        return complex(np.exp(1j * w)) if self.discrete else 1j * w

    def _solve(self, point: complex, rhs):
        """``(point I - T)^{-1} rhs``, or None when the shifted matrix is singular."""
        T = self.T
        T[self._index] = self.diagonal - point
        try:
            with np.errstate(all="ignore"):
                X = scipy.linalg.solve_triangular(T, rhs, check_finite=False)
        except (np.linalg.LinAlgError, ValueError):   # an exactly zero diagonal: a pole
            X = None
        finally:
            T[self._index] = self.diagonal
        if X is None or not np.all(np.isfinite(X)):
            return None
        return -X

    def response(self, w: float):
        """``G`` at ``w`` (rad/s, ``inf`` allowed, or rad/sample); None at a pole."""
        if math.isinf(w) or self.n == 0:
            return self.D.astype(complex)
        self.evaluations += 1
        X = self._solve(self._point(w), self.B)
        if X is None:
            return None
        G = self.C @ X + self.D
        return G if np.all(np.isfinite(G)) else None

    def sigma_max(self, freqs) -> np.ndarray:
        """Largest singular value at each frequency (``inf`` at a pole)."""
        freqs = np.asarray(freqs, dtype=float).ravel()
        out = np.empty(freqs.size)
        if self.empty:
            out[:] = 0.0
            return out
        for i, w in enumerate(freqs):
            G = self.response(float(w))
            out[i] = math.inf if G is None else float(np.linalg.norm(G, 2))
        return out

    def rounding_bound(self, w: float) -> float:
        """A first-order bound on the rounding in the computed ``sigma_max(G)`` at ``w``.

        The computed ``G`` is the exact response of ``(A + dA_1)`` solved with
        ``(pI - T + dT)``: ``||dA_1|| <= rho``, the measured residual ``||A Z - Z T||_F`` of
        the Schur form (twice the estimate of :func:`_schur_residual`), and
        ``|dT| <= gamma_n |pI - T|`` (Higham 2002, Theorem 8.5); the product ``C X + D``
        adds ``gamma_(n+1) (|C| |X| + |D|)`` (Higham 2002, section 3.5).  The constants
        ``gamma_n`` are taken in their probabilistic form :func:`_probabilistic_gamma`
        (``lambda sqrt(n) u`` instead of the worst case ``n u``), which holds with
        overwhelming probability for rounding errors that are independent and of mean zero
        and is far closer to the errors observed.  With
        ``X = (pI - T)^{-1} Z^H B`` and ``Y = C Z (pI - T)^{-1}`` the change of ``G`` is at
        most ``||Y|| rho ||X|| + gamma_n || |Y| |pI - T| |X| || + gamma_(n+1) || |C Z| |X| + |D| ||``,
        and ``sigma_max`` moves by no more than the spectral norm of the change.  ``inf``
        at a pole and 0 for a static gain.
        """
        evaluated = self.response_with_rounding(w)
        return math.inf if evaluated is None else evaluated[1]

    def response_with_rounding(self, w: float, *, data: bool = False):
        """``(G, bound)`` at ``w``: the response and the bound of :meth:`rounding_bound`;
        None at a pole.

        With ``data=True`` the bound also covers a relative rounding ``u`` of every stored
        entry of ``A, B, C, D`` (the first-order change ``Y dA X + dC X + Y dB + dD`` in the
        original coordinates, the componentwise condition of the response), as when the
        model was itself computed in floating point from another one.
        """
        return self.responses_with_rounding([w], data=data)[0]

    def _abs_parts(self):
        if self._abs is None:
            A0, B0, C0 = self.data
            self._abs = (np.abs(np.triu(self.T, 1)), np.abs(A0), np.abs(B0), np.abs(C0),
                         np.abs(self.C), np.abs(self.D), np.ascontiguousarray(self.Z.conj().T))
        return self._abs

    def responses_with_rounding(self, freqs, *, data: bool = False) -> list:
        """:meth:`response_with_rounding` at many frequencies: the triangular solves one by
        one, the products with the ``n x n`` matrices (``|T|``, ``Z``, ``|A|``) batched over
        the frequencies, so that each of those matrices is read once per batch."""
        freqs = [float(w) for w in freqs]
        out = [None] * len(freqs)
        static = (self.D.astype(complex),
                  _UNIT_ROUNDOFF * float(np.linalg.norm(np.abs(self.D), 2)) if self.D.size else 0.0)
        points, Xs, Ys, where = [], [], [], []
        for i, w in enumerate(freqs):
            if self.n == 0 or math.isinf(w):
                out[i] = static
                continue
            self.evaluations += 1
            point = self._point(w)
            X = self._solve(point, self.B)
            if X is None:
                continue
            T = self.T
            T[self._index] = self.diagonal - point
            try:
                with np.errstate(all="ignore"):
                    W = scipy.linalg.solve_triangular(T, self.C.T, trans="T", check_finite=False)
            except (np.linalg.LinAlgError, ValueError):
                W = None
            finally:
                T[self._index] = self.diagonal
            if W is None or not np.all(np.isfinite(W)):
                continue
            points.append(point)
            Xs.append(X)
            Ys.append(-W.T)
            where.append(i)
        if not where:
            return out
        T_off, absA, absB, absC, absCZ, absD, Zh = self._abs_parts()
        n, m = self.B.shape
        p = self.C.shape[0]
        k = len(where)
        X = np.stack(Xs)                                  # (k, n, m)
        Y = np.stack(Ys)                                  # (k, p, n)
        absX = np.abs(X)
        g_n = _probabilistic_gamma(self.n)
        with np.errstate(all="ignore"):
            G = self.C[None] @ X + self.D[None]
            flatX = absX.transpose(1, 0, 2).reshape(n, k * m)
            shifted = (T_off @ flatX).reshape(n, k, m).transpose(1, 0, 2)
            shifted += np.abs(self.diagonal[None, :] - np.asarray(points)[:, None])[:, :, None] * absX
            solve = np.abs(Y) @ shifted                   # (k, p, m)
            product = absCZ[None] @ absX + absD[None]
            if data:
                Xo = np.abs((self.Z @ X.transpose(1, 0, 2).reshape(n, k * m))
                            .reshape(n, k, m).transpose(1, 0, 2))
                Yo = np.abs((Y.reshape(k * p, n) @ Zh).reshape(k, p, n))
                AX = (absA @ Xo.transpose(1, 0, 2).reshape(n, k * m)).reshape(n, k, m)
                change = Yo @ AX.transpose(1, 0, 2) + absC[None] @ Xo + Yo @ absB[None] + absD[None]
            for j, i in enumerate(where):
                bound = (float(np.linalg.norm(Y[j], 2)) * self.schur_residual
                         * float(np.linalg.norm(X[j], 2))
                         + g_n * float(np.linalg.norm(solve[j], 2))
                         + 1.01 * g_n * float(np.linalg.norm(product[j], 2)))
                if data:
                    bound += _UNIT_ROUNDOFF * float(np.linalg.norm(change[j], 2))
                if np.all(np.isfinite(G[j])) and math.isfinite(bound):
                    out[i] = (G[j], bound)
        return out

    def gain_and_slope(self, w: float):
        """``sigma_max(G)`` at ``w`` and its derivative with respect to ``w``.

        For a simple largest singular value with vectors ``u, v``,
        ``d sigma / d w = Re(u^H G'(w) v)``, where ``G'(w) = -j C (s I - A)^{-2} B`` at
        ``s = j w`` and ``G'(theta) = -j z C (z I - A)^{-2} B`` at ``z = exp(j theta)``.
        Returns ``(inf, nan)`` at a pole.
        """
        self.evaluations += 1
        point = self._point(w)
        X = self._solve(point, self.B)
        if X is None:
            return math.inf, math.nan
        G = self.C @ X + self.D
        U, s, Vh = np.linalg.svd(G)
        X2 = self._solve(point, X)
        if X2 is None:
            return float(s[0]), math.nan
        dG = -1j * (point if self.discrete else 1.0) * (self.C @ X2)
        slope = float(np.real(U[:, 0].conj() @ dG @ Vh[0].conj()))
        return float(s[0]), slope


#: The ``lambda`` of the probabilistic rounding-error constant ``lambda sqrt(n) u``: the
#: bound then fails with probability at most about ``2 n exp(-lambda^2 / 2)`` per inner
#: product of length ``n`` (Higham and Mary 2019, Theorem 2.4), ``2e-9 n`` for 7.
ROUNDING_LAMBDA = 7.0


def _probabilistic_gamma(n: int) -> float:
    """``lambda sqrt(n) u`` for complex arithmetic (four real roundings per operation).

    N. J. Higham and T. Mary, "A new approach to probabilistic rounding error analysis",
    SIAM J. Scientific Computing 41(5), A2815-A2835, 2019: for rounding errors that are
    independent random variables of mean zero, ``gamma_n = n u`` may be replaced by
    ``lambda sqrt(n) u`` with a probability of failure that falls like ``exp(-lambda^2/2)``.
    """
    return 4.0 * ROUNDING_LAMBDA * math.sqrt(max(n, 1)) * _UNIT_ROUNDOFF


_SHARED: dict = {}
_SHARED_SIZE = 4


def shared_response(A, B, C, D, discrete: bool) -> _FrequencyResponse:
    """The :class:`_FrequencyResponse` of ``(A, B, C, D)``, computed once for a few recent
    models (keyed by a digest of the arrays), so that the peak gain of a model and the
    certificate that compares it with another share one Schur form."""
    import hashlib

    digest = hashlib.blake2b(digest_size=16)
    for M in (A, B, C, D):
        M = np.ascontiguousarray(M, dtype=float)
        digest.update(repr(M.shape).encode())
        digest.update(M.tobytes())
    key = (digest.hexdigest(), bool(discrete))
    response = _SHARED.get(key)
    if response is None:
        response = _FrequencyResponse(A, B, C, D, discrete)
        while len(_SHARED) >= _SHARED_SIZE:
            _SHARED.pop(next(iter(_SHARED)))
        _SHARED[key] = response
    return response


def _schur_residual(A, T, Z, probes: int = 4) -> float:
    """Twice an estimate of ``||A Z - Z T||_F`` from ``probes`` random vectors.

    ``E ||R v||^2 = ||R||_F^2`` for ``v`` with independent standard normal entries (a
    Hutchinson-type estimate), so the measured residual of the computed Schur form costs
    ``O(n^2)`` per probe instead of the ``O(n^3)`` of forming ``R``; the factor 2 covers the
    spread of the estimate.  The seed is fixed, so the answer is reproducible.
    """
    n = A.shape[0]
    V = np.random.default_rng(20261203).standard_normal((n, probes))
    with np.errstate(all="ignore"):
        R = A @ (Z @ V) - Z @ (T @ V)
        estimate = float(np.linalg.norm(R) / math.sqrt(probes))
    floor = _UNIT_ROUNDOFF * frobenius(A)     # the rounding of A itself
    return 2.0 * max(estimate, floor) if math.isfinite(estimate) else math.inf


def _local_maximum(response: _FrequencyResponse, lo: float, w0: float, hi: float,
                   g0: float, flat: float = 0.0):
    """Refine a sampled maximum ``g0`` at ``w0`` inside ``[lo, hi]``; returns (gain, w).

    A safeguarded secant iteration (regula falsi, Illinois variant) on the derivative of
    ``sigma_max`` when it changes sign over the bracket, else Brent's minimization of
    ``-sigma_max`` (scipy.optimize.minimize_scalar, R. P. Brent, *Algorithms for
    Minimization without Derivatives*, 1973); finished by two secant steps on the
    derivative, so that the frequency of a simple peak is found to about ``1e-10``
    relative rather than the ``sqrt(eps)`` that gain values alone allow.  The result is
    never below ``g0``.  A gain counts as larger only by more than ``flat`` (absolute, the
    rounding of the evaluation) or ``8 eps`` relative, so that a flat maximum keeps its
    frequency instead of wandering with the rounding noise.
    """
    best_g, best_w = g0, w0
    flat = max(flat, _FLAT * abs(g0))
    if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
        return best_g, best_w

    gains = {}

    def consider(w, g):
        # a move is taken only for a gain larger by more than rounding, so that a flat
        # maximum (at w = 0, say) keeps its frequency instead of wandering by noise
        nonlocal best_g, best_w
        gains[w] = g
        if math.isfinite(g) and g > best_g + flat:
            best_g, best_w = g, w

    def settle(w):
        # the stationary point found from the derivative is the frequency, when its gain
        # is the best up to rounding
        nonlocal best_g, best_w
        g = gains.get(w, -math.inf)
        flatter = abs(slopes.get(w, math.inf)) < abs(slopes.get(best_w, math.inf))
        if math.isfinite(g) and g >= best_g - flat and flatter:
            best_g, best_w = max(best_g, g), w

    slopes = {}

    def slope_at(w):
        g, d = response.gain_and_slope(w)
        consider(w, g)
        slopes[w] = abs(d) if math.isfinite(d) else math.inf
        return d

    a, b = lo, hi
    da, db = slope_at(a), slope_at(b)
    scale = max(abs(lo), abs(hi))
    if math.isfinite(da) and math.isfinite(db) and da > 0 > db:
        side = 0
        for _ in range(60):
            c = (a * db - b * da) / (db - da)
            if not (a < c < b):
                c = 0.5 * (a + b)
            dc = slope_at(c)
            if not math.isfinite(dc) or dc == 0.0:
                break
            if dc > 0:
                a, da = c, dc
                if side == 1:
                    db *= 0.5
                side = 1
            else:
                b, db = c, dc
                if side == -1:
                    da *= 0.5
                side = -1
            if b - a <= 1e-13 * max(scale, 1e-300):
                break
        settle(c)
        return best_g, best_w
    result = scipy.optimize.minimize_scalar(
        lambda w: -response.sigma_max([w])[0], bounds=(lo, hi), method="bounded",
        options={"xatol": 1e-10 * max(scale, 1e-300), "maxiter": 200})
    consider(float(result.x), -float(result.fun))
    # polish: secant steps on the derivative from the best point
    w1 = best_w
    h = 1e-7 * max(abs(w1), 1e-300) if w1 != 0 else 1e-7 * (hi - lo)
    d1 = slope_at(w1)
    for _ in range(3):
        w2 = min(max(w1 + h, lo), hi)
        d2 = slope_at(w2)
        if not (math.isfinite(d1) and math.isfinite(d2)) or d2 == d1:
            break
        w3 = w1 - d1 * (w2 - w1) / (d2 - d1)
        if not (lo <= w3 <= hi) or abs(w3 - w1) > 1e-3 * (hi - lo) + abs(h) * 10:
            break
        d3 = slope_at(w3)
        w1, d1, h = w3, d3, max(abs(w3 - w1), 1e-15 * max(abs(w3), 1e-300))
        settle(w3)
    return best_g, best_w


def _hamiltonian_eigenvalues(A, B, C, D, gamma: float):
    """Eigenvalues of the Hamiltonian matrix of level ``gamma`` and its scale.

    ``j w`` is an eigenvalue exactly when ``gamma`` is a singular value of ``G(j w)``
    (Boyd, Balakrishnan and Kabamba 1989).  With the extended pencil's algebraic
    variables ``u, y`` eliminated through ``K = [[D, -gamma I], [-gamma I, D^T]]``,
    ``H = diag(A, -A^T) - [[B, 0], [0, -C^T]] K^{-1} [[C, 0], [0, B^T]]``, a standard
    eigenvalue problem of order ``2n``.  ``K`` is well conditioned when ``gamma`` is well
    above ``||D||`` (``cond K = (gamma + ||D||) / (gamma - ||D||)`` for square ``D``); when
    it is not (the peak is at or near infinite frequency), the extended pencil is used
    instead, compressed orthogonally and solved by the QZ algorithm, which never inverts
    ``K`` (Benner, Sima and Voigt 2012).
    """
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    sd = float(np.linalg.norm(D, 2)) if D.size else 0.0
    if sd <= 0.5 * gamma:
        K = np.block([[D, -gamma * np.eye(p)], [-gamma * np.eye(m), D.T]])
        left = np.block([[B, np.zeros((n, p))], [np.zeros((n, m)), -C.T]])
        right = np.block([[C, np.zeros((p, n))], [np.zeros((m, n)), B.T]])
        H = scipy.linalg.block_diag(A, -A.T) - left @ np.linalg.solve(K, right)
        with np.errstate(all="ignore"):
            lam = scipy.linalg.eigvals(H, overwrite_a=True, check_finite=False)
        return lam, max(float(np.linalg.norm(H)), 1e-300)
    Z = np.zeros
    Ip, Im, In = np.eye(p), np.eye(m), np.eye(n)
    M = np.block([
        [A, Z((n, n)), B, Z((n, p))],
        [Z((n, n)), -A.T, Z((n, m)), -C.T],
        [C, Z((p, n)), D, -gamma * Ip],
        [Z((m, n)), B.T, -gamma * Im, D.T],
    ])
    N = np.block([[In, Z((n, n))], [Z((n, n)), In], [Z((m + p, 2 * n))]])
    Q, _ = scipy.linalg.qr(M[:, 2 * n:])
    Q2 = Q[:, m + p:]
    Mc = Q2.T @ M[:, :2 * n]
    Nc = Q2.T @ N
    alpha, beta = scipy.linalg.eigvals(Mc, Nc, homogeneous_eigvals=True)
    scale = max(np.linalg.norm(Mc), 1e-300) / max(np.linalg.norm(Nc), 1e-300)
    finite = np.abs(beta) > _EPS * np.abs(alpha)
    return alpha[finite] / beta[finite], scale


def _axis_crossings(lam, scale: float) -> np.ndarray:
    """Candidate frequencies (rad/s) from Hamiltonian eigenvalues: those near the axis, and
    those near ``s = 0``, where crossings at ``+-j d`` may show as a real pair ``+-d``."""
    floor = 100.0 * _EPS * scale
    near = np.abs(lam.real) <= AXIS_TOLERANCE * np.abs(lam) + floor
    mag = np.abs(lam)
    return np.unique(np.concatenate([np.abs(lam[near].imag), mag[mag <= CLUSTER_RADIUS * scale]]))


class _CrossingTest:
    """The level-set test: the frequencies where some singular value of ``G`` equals ``gamma``.

    Continuous time: eigenvalues of the Hamiltonian matrix of the model itself.  Discrete
    time: the model is first mapped to continuous time by the Cayley (bilinear)
    transformation ``z = sigma (1 + s) / (1 - s)``, which takes the unit circle to the
    imaginary axis (``z = exp(j theta)`` at ``s = j tan(theta / 2)`` for ``sigma = 1``) and
    keeps every singular value of the frequency response; the Hamiltonian test then runs in
    the variable ``s``, which is well conditioned near ``z = 1`` (slow poles, small sample
    times), where the eigenvalues of a symplectic pencil in ``z`` crowd together at 1 and
    lose the digits that tell them apart.  The sign ``sigma`` is chosen so that
    ``I + sigma A`` is inverted far from its nearest singular point: ``sigma = -1`` when a
    pole lies nearer to ``z = -1`` than to ``z = 1``, which moves the well-conditioned end to
    ``z = -1``.  Frequencies are mapped back by ``theta = 2 atan(w)`` (``pi - 2 atan(w)``).
    Only the crossing test uses the transformed model; every gain is evaluated on the
    original one.
    """

    def __init__(self, A, B, C, D, discrete: bool, poles):
        self.discrete = discrete
        self.sign = 1.0
        if discrete and A.shape[0]:
            to_minus = float(np.min(np.abs(poles + 1.0)))
            to_plus = float(np.min(np.abs(poles - 1.0)))
            self.sign = 1.0 if to_minus >= to_plus else -1.0
            n = A.shape[0]
            Ap, Bp = self.sign * A, self.sign * B
            lu = scipy.linalg.lu_factor(np.eye(n) + Ap, check_finite=False)
            Ac = scipy.linalg.lu_solve(lu, Ap - np.eye(n), check_finite=False)
            MB = scipy.linalg.lu_solve(lu, Bp, check_finite=False)
            CM = scipy.linalg.lu_solve(lu, C.T, trans=1, check_finite=False).T
            A, B, C, D = Ac, math.sqrt(2.0) * MB, math.sqrt(2.0) * CM, D - C @ MB
        self.A, self.B, self.C, self.D = A, B, C, D

    def frequencies(self, gamma: float) -> np.ndarray:
        lam, scale = _hamiltonian_eigenvalues(self.A, self.B, self.C, self.D, gamma)
        w = _axis_crossings(lam, scale)
        if not self.discrete:
            return w
        theta = 2.0 * np.arctan(w)
        if self.sign < 0:
            theta = math.pi - theta
        return np.unique(np.clip(theta, 0.0, math.pi))


def _initial_frequencies(poles, discrete: bool) -> np.ndarray:
    """Zero, the Nyquist frequency or infinity, the frequencies of the poles, and a short
    logarithmic grid over the range of the pole magnitudes."""
    lam = poles
    if discrete:
        if lam.size > _MAX_POLE_FREQUENCIES:   # the poles nearest the unit circle
            lam = lam[np.argsort(np.abs(np.abs(lam) - 1.0), kind="stable")[:_MAX_POLE_FREQUENCIES]]
        nonzero = lam[np.abs(lam) > 0]
        with np.errstate(all="ignore"):
            logs = np.log(nonzero.astype(complex))
        pole_w = np.concatenate([np.abs(logs.imag), np.abs(logs)])
        pole_w = pole_w[np.isfinite(pole_w) & (pole_w <= math.pi)]
        low = max(float(pole_w[pole_w > 0].min()) / 10.0, 1e-12) if np.any(pole_w > 0) else 1e-3
        grid = np.geomspace(min(low, 1e-2), math.pi, _GRID_POINTS)
        return np.unique(np.concatenate([[0.0, math.pi], pole_w, grid]))
    # Bruinsma and Steinbuch test the pole frequencies |Im(lambda)| (and the natural
    # frequency |lambda| for real or lightly damped poles); both are cheap and harmless.
    # For large models only the least damped poles are used: they carry the peaks.
    mags = np.abs(lam)
    positive = mags[mags > 0]
    if lam.size > _MAX_POLE_FREQUENCIES:
        damping = np.abs(lam.real) / np.maximum(np.abs(lam), 1e-300)
        lam = lam[np.argsort(damping, kind="stable")[:_MAX_POLE_FREQUENCIES]]
    pole_w = np.concatenate([np.abs(lam.imag), np.abs(lam)]) if lam.size else np.zeros(0)
    grid = (np.geomspace(float(positive.min()) / 10.0, float(positive.max()) * 10.0, _GRID_POINTS)
            if positive.size else np.zeros(0))
    return np.unique(np.concatenate([[0.0, math.inf], pole_w, grid]))


def _local_maxima(freqs, vals, count: int):
    """Indices of up to ``count`` largest sampled local maxima (finite frequencies)."""
    k = vals.size
    left = np.concatenate([[-math.inf], vals[:-1]])
    right = np.concatenate([vals[1:], [-math.inf]])
    peaks = np.flatnonzero((vals >= left) & (vals >= right) & np.isfinite(freqs))
    return peaks[np.argsort(-vals[peaks], kind="stable")][:count] if k else peaks


def _refine_samples(response, freqs, vals, count: int, discrete: bool):
    """Refine the ``count`` best sampled local maxima; returns the best (gain, frequency)."""
    k = int(np.argmax(vals))
    best_g, best_w = float(vals[k]), float(freqs[k])
    flat = response.rounding_bound(best_w) if math.isfinite(best_w) else 0.0
    flat = max(flat if math.isfinite(flat) else 0.0, _FLAT * best_g)
    for i in _local_maxima(freqs, vals, count):
        if vals[i] < best_g * (1.0 - 1e-3) and i != k:
            continue         # a lower local maximum: refining it cannot win
        lo = float(freqs[i - 1]) if i > 0 else float(freqs[i])
        hi = float(freqs[i + 1]) if i + 1 < freqs.size else float(freqs[i])
        if math.isinf(hi):
            hi = 10.0 * float(freqs[i]) if freqs[i] > 0 else 1.0
        g, w = _local_maximum(response, lo, float(freqs[i]), hi, float(vals[i]), flat)
        if g > best_g + flat or (i == k and g >= best_g):
            best_g, best_w = g, w
    if discrete:
        best_w = min(max(best_w, 0.0), math.pi)
    return best_g, best_w


def _iterate(A, B, C, D, discrete: bool, rel_tol: float, response=None):
    """The level-set iteration; returns (value, frequency, upper, iterations, message,
    evaluations, rounding bound at the peak)."""
    response = response or _FrequencyResponse(A, B, C, D, discrete)
    start = response.evaluations      # the response may be shared with earlier calls
    freqs = _initial_frequencies(response.poles, discrete)
    vals = response.sigma_max(freqs)
    k = int(np.argmax(vals))
    if math.isinf(vals[k]):
        return (float(vals[k]), float(freqs[k]), math.inf, 0, "unbounded", response.evaluations - start,
                math.inf)
    if vals[k] == 0.0:
        # Zero at 0, infinity and the pole frequencies; try a grid of 2n + 2 distinct
        # frequencies: a nonzero proper rational G of degree n cannot vanish at all of them.
        lam = response.poles
        top = max(1.0, float(np.max(np.abs(lam)))) if lam.size else 1.0
        grid = (np.linspace(0.05, 3.0, 2 * A.shape[0] + 2) if discrete
                else np.geomspace(1e-3 * top, 1e3 * top, 2 * A.shape[0] + 2))
        vals = response.sigma_max(grid)
        k = int(np.argmax(vals))
        if vals[k] == 0.0:
            return (0.0, 0.0, 0.0, 0, "The transfer matrix is zero at every frequency tested.",
                    response.evaluations - start, 0.0)
        freqs = grid
    g_low, w_low = _refine_samples(response, freqs, vals, _REFINED_PEAKS, discrete)
    test = _CrossingTest(A, B, C, D, discrete, response.poles)
    for it in range(1, _MAX_ITERATIONS + 1):
        # The level: the asked relative accuracy above the lower bound, plus the rounding
        # that the computed gains near the peak may carry (the true gain there may exceed
        # the computed one by that much).
        rounding = response.rounding_bound(w_low)
        gamma = (1.0 + rel_tol) * g_low + rounding
        cand = test.frequencies(gamma)
        if cand.size == 0:
            return (g_low, w_low, gamma, it,
                    "Converged: no frequency has a gain above the upper bound.",
                    response.evaluations - start, rounding)
        edges = np.concatenate([[0.0], cand, [math.pi if discrete else math.inf]])
        mids = 0.5 * (edges[:-1] + edges[1:])
        if not discrete:
            mids[-1] = 2.0 * cand[-1] + 1.0
        pts = np.unique(np.concatenate([cand, mids]))
        vals = response.sigma_max(pts)
        k = int(np.argmax(vals))
        if not vals[k] > gamma:
            return (g_low, w_low, gamma, it,
                    ("Converged: no gain above the upper bound was found at the candidate "
                     "crossing frequencies."), response.evaluations - start, rounding)
        g, w = _refine_samples(response, pts, vals, 1, discrete)
        if g > g_low + rounding:
            g_low, w_low = g, w
    warnings.warn(
        f"the peak-gain iteration did not verify an upper bound within {_MAX_ITERATIONS} "
        "iterations; the value is a gain attained, possibly below the peak.",
        AccuracyWarning, stacklevel=3)
    return (g_low, w_low, math.nan, _MAX_ITERATIONS,
            "Stopped at the iteration limit without verifying an upper bound.",
            response.evaluations - start, math.nan)


# --- public functions -------------------------------------------------------------------------

@threads_by_size()
def peak_gain(model, *, rel_tol: float = 1e-10) -> PeakGain:
    """The peak gain of the frequency response (L-infinity norm) and where it occurs.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        ``A`` (n, n), ``B`` (n, m), ``C`` (p, n), ``D`` (p, m); continuous or discrete time.
    rel_tol : float, optional
        Relative accuracy asked for, default ``1e-10``: the true norm lies in
        ``[value, upper_bound]`` with ``upper_bound = value * (1 + rel_tol)`` plus the
        first-order rounding bound of the frequency response at the peak
        (:attr:`PeakGain.rounding_bound`; the accuracy the evaluation can reach).

    Returns
    -------
    PeakGain
        ``value`` and ``frequency`` (rad/s, or rad/sample in discrete time), the verified
        ``upper_bound``, the ``relative_accuracy`` reached and a flag ``boundary_pole``.

    Notes
    -----
    *What is computed.*  The supremum over the imaginary axis (or the maximum over the unit
    circle) of the largest singular value of the transfer matrix.  This is the L-infinity
    norm for any model without poles on that boundary (stable or not); it is the
    H-infinity norm only when the model is stable.

    *Algorithm.*  The level-set (Hamiltonian) method of Boyd, Balakrishnan and Kabamba and
    of Bruinsma and Steinbuch [1]_ [2]_: ``gamma`` is a singular value of ``G(j w)`` exactly
    when ``j w`` is an eigenvalue of a Hamiltonian matrix built from ``(A, B, C, D, gamma)``.
    The structure is exploited so that the ``O(n^3)`` work is one Schur form of ``A`` and,
    on most models, one Hamiltonian eigenvalue problem:

    1. *One Schur form.*  ``A = Z T Z^H`` (complex triangular ``T``) gives the poles, and
       every frequency-response evaluation is one triangular solve, ``O(n^2 m)``.
    2. *Samples.*  The gain at zero, at infinity (or the Nyquist frequency), at the damped
       and natural frequencies of the least damped poles (the initial points of [2]_) and
       on a short logarithmic grid.
    3. *Local maximization.*  The three largest sampled local maxima are refined by a
       safeguarded secant iteration on the derivative of ``sigma_max`` (computed from a
       second triangular solve, ``d sigma / d w = Re(u^H G'(w) v)``), or Brent's method
       where the derivative does not bracket a root.  A simple peak is then known to
       rounding accuracy in value and to about ``1e-10`` relative in frequency, so the
       Hamiltonian test that follows usually has nothing left to find.
    4. *Crossing test, only where it decides.*  With
       ``gamma = (1 + rel_tol) * lower + rounding`` (``rounding`` the first-order bound on
       the rounding of the computed gain at the peak, see :attr:`PeakGain.rounding_bound`),
       the eigenvalues of the Hamiltonian matrix on (or within ``AXIS_TOLERANCE`` of) the
       imaginary axis give the frequencies where some singular value equals ``gamma``.
    5. *Stopping rule.*  If no candidate frequency is found, or if the gain at every
       candidate and at every midpoint between neighbouring candidates is at most
       ``gamma``, no frequency has a gain above ``gamma``: ``gamma`` is the verified upper
       bound and the iteration stops.  Otherwise the largest gain found is refined locally
       (step 3) between its neighbouring candidates and the test is repeated (the midpoint
       update of [2]_, quadratically convergent); at most ``_MAX_ITERATIONS`` tests.

    The Hamiltonian matrix is
    ``diag(A, -A^T) - [[B, 0], [0, -C^T]] K^{-1} [[C, 0], [0, B^T]]`` with
    ``K = [[D, -gamma I], [-gamma I, D^T]]`` (the algebraic part of the extended pencil
    eliminated), used when ``||D|| <= gamma / 2`` so that ``K`` is well conditioned;
    otherwise (the peak at or near infinite frequency) the extended pencil of order
    ``2n + m + p`` is compressed orthogonally and solved by the QZ algorithm, which never
    inverts ``K``, as in the structured approach of Benner, Sima and Voigt [4]_.

    *Discrete time.*  The crossing test runs on the Cayley (bilinear) transform of the model,
    ``z = sigma (1 + s) / (1 - s)`` with ``sigma = +-1`` chosen so that the poles are far
    from the point the map sends to infinity (``sigma = -1`` when a pole is nearer to
    ``z = -1`` than to ``z = 1``); its frequency response on the imaginary axis is the
    discrete one on the unit circle (``theta = 2 atan(w)``, or ``pi - 2 atan(w)``), see
    :class:`_CrossingTest` and [3]_.  The variable ``s`` is well conditioned near
    ``z = 1``, where slow poles of models sampled fast crowd and the eigenvalues of a
    symplectic pencil in ``z`` lose the digits that separate them (the cause of a
    "verified" bound below the true peak for a resonance sampled at ``1e-4`` s).  Gains are
    always evaluated on the original discrete model.  Before anything else the state
    coordinates are equilibrated by an exact power-of-two scaling, which changes no
    transfer-matrix value.

    *Tolerances.*  A pole counts as lying on the boundary when its real part (continuous)
    or its distance from the unit circle (discrete) is at most
    ``BOUNDARY_FACTOR * eps * ||A_e||_F = 1000 eps ||A_e||_F`` (for the unit circle
    ``1000 eps max(1, ||A_e||_F)``): a backward-stable eigenvalue routine moves an
    eigenvalue of condition number up to ``1e3`` by about that much, so nearer poles cannot
    be told from boundary poles.  Such poles are first checked for being hidden
    (uncontrollable or unobservable, hence absent from the transfer matrix) by a minimal
    realization; the value is infinite only when a boundary pole remains.  Hamiltonian
    eigenvalues are accepted as crossing candidates generously (``AXIS_TOLERANCE = 1e-6``
    relative): an extra candidate only costs one evaluation, while a missed one could end
    the iteration early.

    A pole nearer to the boundary than ``eps^(1/3) ||A_e||_F`` is also tested against the
    accuracy of its own computed value, ``1000 eps kappa ||A_e||_F`` with ``kappa`` its
    eigenvalue condition number (:func:`_poles_within_accuracy`): a defective eigenvalue,
    say a rigid body's double integrator in rotated coordinates, is computed only to about
    ``sqrt(eps)`` but has ``kappa`` about ``1 / sqrt(eps)``, so it counts as a boundary pole
    (value ``inf``, with the reason in :attr:`PeakGain.message`) when the minimal
    realization keeps it, and is removed (finite value) when it is hidden.

    Models whose norms lie outside ``2^-100 .. 2^100`` (entries near ``1e+-155`` square to
    beyond the double range) are rescaled exactly by powers of two in their time, input and
    output units first, and the value and frequency are multiplied back exactly
    (:mod:`plantcore.reduction.power_of_two_scaling`).

    *How it can fail.*  A pole whose distance from the axis lies just above the accuracy
    test (a nearly defective, well-separated pair) gives a huge finite value rather than
    ``inf``; a simple pole of very large condition number within its accuracy of the axis
    counts as a boundary pole.  The rounding bound is first order and uses probabilistic
    constants (Higham and Mary [5]_); for ill-conditioned ``j w I - A`` (lightly damped poles
    with ill-conditioned eigenvectors) it can exceed ``rel_tol`` by orders of magnitude and
    then dominates :attr:`PeakGain.relative_accuracy`: the interval is honest but wide.
    When a model has poles near both ``z = 1`` and ``z = -1`` the Cayley transform is well
    conditioned at one end only.  A peak that exceeds the level by less than the accuracy
    of the Hamiltonian eigenvalues, away from the peak already found, can be missed; the
    generous ``AXIS_TOLERANCE`` makes that a matter of eigenvalue errors above ``1e-6``
    relative.

    References
    ----------
    .. [1] S. Boyd and V. Balakrishnan, "A regularity result for the singular values of a
       transfer matrix and a quadratically convergent algorithm for computing its
       L-infinity norm", Systems & Control Letters 15(1), 1-7, 1990.
       S. Boyd, V. Balakrishnan and P. Kabamba, "A bisection method for computing the
       H-infinity norm of a transfer matrix and related problems", Mathematics of Control,
       Signals and Systems 2, 207-219, 1989.
    .. [2] N. A. Bruinsma and M. Steinbuch, "A fast algorithm to compute the H-infinity norm
       of a transfer function matrix", Systems & Control Letters 14(4), 287-293, 1990.
    .. [3] D. Hinrichsen and A. J. Pritchard, *Mathematical Systems Theory I*, Springer,
       2005, section 5.3 (the discrete-time counterpart; the bilinear transformation
       between the unit circle and the imaginary axis).
    .. [4] P. Benner, V. Sima and M. Voigt, "L-infinity-norm computation for continuous-time
       descriptor systems using structured matrix pencils", IEEE Trans. Automatic Control
       57(1), 233-238, 2012.
    .. [5] N. J. Higham and T. Mary, "A new approach to probabilistic rounding error
       analysis", SIAM J. Scientific Computing 41(5), A2815-A2835, 2019.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> wn, zeta = 2.0, 0.1                       # resonance wn^2 / (s^2 + 2 zeta wn s + wn^2)
    >>> g = pc.from_transfer_function([wn**2], [1.0, 2 * zeta * wn, wn**2])
    >>> pk = pc.peak_gain(g)
    >>> bool(np.isclose(pk.value, 1 / (2 * zeta * np.sqrt(1 - zeta**2)), rtol=1e-9))
    True
    >>> bool(np.isclose(pk.frequency, wn * np.sqrt(1 - 2 * zeta**2), rtol=1e-8))
    True
    >>> pc.peak_gain(pc.from_transfer_function([1.0], [1.0, 0.0])).boundary_pole  # 1/s
    True
    """
    return _peak_gain(as_model(model), _validate_rel_tol(rel_tol), 0.0)


def _peak_gain(model: StateSpaceModel, rel_tol: float, pole_scale: float) -> PeakGain:
    """:func:`peak_gain` with the boundary tolerance judged against
    ``max(||A_e||_F, pole_scale)``.  A model derived from larger ones (the minimal
    realization of a difference, say) passes the scale of its origin, since a pole of
    size ``1e-26`` left by rounding in a one-state model says nothing on its own.

    A model whose norms lie outside ``2^-100 .. 2^100`` is first rescaled exactly by powers
    of two (time, input and output units; :mod:`plantcore.reduction.power_of_two_scaling`)
    and the gains and frequencies are multiplied back exactly."""
    scaling = model_scaling(model)
    if scaling.is_identity:
        return _peak_gain_of(model, rel_tol, pole_scale)
    result = _peak_gain_of(scaling.apply(model), rel_tol,
                           math.ldexp(pole_scale, -scaling.time) if pole_scale else 0.0)
    frequency = result.frequency if model.is_discrete else scaling.restore_frequency(result.frequency)
    return dataclasses.replace(
        result, value=scaling.restore_gain(result.value), frequency=frequency,
        upper_bound=scaling.restore_gain(result.upper_bound),
        rounding_bound=scaling.restore_gain(result.rounding_bound))


def _peak_gain_of(model: StateSpaceModel, rel_tol: float, pole_scale: float) -> PeakGain:
    """:func:`_peak_gain` on a model of moderate scale."""
    discrete = model.is_discrete
    decisions: tuple = ()
    if model.n_inputs == 0 or model.n_outputs == 0:
        return PeakGain(0.0, 0.0, 0.0, 0.0, 0, False, discrete,
                        "The model has no inputs or no outputs; its gain is zero.")
    A, B, C, D = _equilibrated(model)
    response = shared_response(A, B, C, D, discrete)
    on_boundary = _boundary_poles(A, discrete, pole_scale, response.poles)
    if not on_boundary.size:
        on_boundary = _poles_within_accuracy(response, discrete, pole_scale)
    if on_boundary.size:
        from plantcore.structure.minimal import minimal_realization

        mr = minimal_realization(model)
        decisions = tuple(mr.decisions)
        pole_scale = max(pole_scale, frobenius(A))   # judge against the origin
        model = mr.model
        A, B, C, D = _equilibrated(model)
        response = _FrequencyResponse(A, B, C, D, discrete)
        on_boundary = _boundary_poles(A, discrete, pole_scale, response.poles)
        how = ""
        if not on_boundary.size:
            on_boundary = _poles_within_accuracy(response, discrete, pole_scale)
            how = (" (within the accuracy of its computed value, which its eigenvalue condition "
                   "number widens: a repeated pole such as a rigid body's double integrator)")
        if on_boundary.size:
            lam = on_boundary[np.argmin(np.abs(on_boundary))] if not discrete else on_boundary[0]
            # a repeated pole is computed as a cluster (a double integrator as +-1e-8 j):
            # its frequency is that of the cluster's mean, which is accurate
            reach = _ACCURACY_REACH * max(frobenius(A), pole_scale, 1.0 if discrete else 0.0)
            cluster = response.poles[np.abs(response.poles - lam) <= reach]
            w = _pole_frequency(complex(cluster.mean()) if cluster.size else lam, discrete)
            unit = "rad/sample" if discrete else "rad/s"
            where = "unit circle" if discrete else "imaginary axis"
            return PeakGain(math.inf, w, math.inf, 0.0, 0, True, discrete,
                            f"A pole of the transfer function lies on the {where} at "
                            f"{w:.6g} {unit}{how}; the gain is unbounded there.",
                            decisions, any_fragile(decisions))
    if model.n == 0:
        value = float(np.linalg.norm(D, 2))
        return PeakGain(value, 0.0, value, 0.0, 0, False, discrete,
                        "The model is a static gain; its peak gain is the norm of D.",
                        decisions, any_fragile(decisions))
    value, w, upper, iterations, message, evaluations, rounding = _iterate(
        A, B, C, D, discrete, rel_tol, response)
    if math.isinf(value):   # a frequency response evaluation hit a pole exactly
        return PeakGain(math.inf, w, math.inf, 0.0, iterations, True, discrete,
                        "The frequency response is numerically unbounded at "
                        f"{w:.6g} {'rad/sample' if discrete else 'rad/s'}: a pole lies on "
                        "or extremely near the boundary.", decisions, any_fragile(decisions))
    if value == 0.0:
        accuracy = 0.0
    elif math.isfinite(upper):
        accuracy = upper / value - 1.0
    else:
        accuracy = math.nan
    if value > 0 and rounding > rel_tol * value:
        message += (f" The rounding of the frequency response near the peak (bound "
                    f"{rounding / value:.1e} relative) exceeds the accuracy asked for and is "
                    "included in the upper bound.")
    return PeakGain(value, w, upper, accuracy, iterations, False, discrete, message,
                    decisions, any_fragile(decisions), evaluations, rounding)


@threads_by_size()
def h2_norm(model) -> float:
    """The H2 norm: the root of the energy of the impulse response.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        ``A`` (n, n), ``B`` (n, m), ``C`` (p, n), ``D`` (p, m).

    Returns
    -------
    float
        Continuous time: :math:`\\sqrt{\\operatorname{tr}(C P C^T)}` with
        :math:`A P + P A^T + B B^T = 0`; ``inf`` when ``D != 0`` (the impulse response then
        has an impulse) or the transfer matrix is unstable.  Discrete time:
        :math:`\\sqrt{\\operatorname{tr}(D D^T) + \\operatorname{tr}(C P C^T)}` with
        :math:`A P A^T - P + B B^T = 0` (the sum of squares of all impulse-response
        coefficients ``D, CB, CAB, ...``, no sample-time factor); ``inf`` when unstable.

    Notes
    -----
    The Gramian is the controllability Gramian when there are no more inputs than outputs
    and the observability Gramian ``Q`` (with ``tr(B^T Q B)``) otherwise, whichever has the
    smaller right-hand side.  One real Schur form ``A = Z T Z^T`` of the exactly
    equilibrated model (an exact power-of-two state scaling) serves both the stability test
    (the eigenvalues are read from the diagonal blocks of ``T``) and the Bartels-Stewart
    solution [1]_ of the Lyapunov equation in Schur coordinates (LAPACK ``dtrsyl``), so
    no ``O(n^3)`` work is repeated.  In discrete time the Stein equation is solved through
    the Cayley transform of the model, whose continuous Gramian equals the discrete one
    (see :class:`_SchurGramian`).  The Gramian is symmetrized; a small negative trace from
    rounding is clipped to zero.  (A Cholesky-factor solver, Hammarling's method, would
    guarantee a semidefinite Gramian; the residual check below guards the simpler route.)
    Stability uses the boundary tolerance of :func:`peak_gain`; when an unstable or
    boundary mode is found the model is first reduced to a minimal realization, since a
    hidden unstable mode does not enter the transfer matrix.  The formulas are those of
    Zhou, Doyle and Glover [2]_, section 4.3.  An :class:`AccuracyWarning` is emitted when
    the Lyapunov residual is large.  A model far from unit scale (norms outside
    ``2^-100 .. 2^100``) is first rescaled exactly by powers of two and the norm multiplied
    back (``b c sqrt(a)``, :mod:`plantcore.reduction.power_of_two_scaling`), so a model with
    entries near ``1e155`` gets its finite norm (about ``1e232``) rather than ``inf``.

    References
    ----------
    .. [1] R. H. Bartels and G. W. Stewart, "Solution of the matrix equation AX + XB = C",
       Communications of the ACM 15(9), 820-826, 1972.
    .. [2] K. Zhou, J. C. Doyle and K. Glover, *Robust and Optimal Control*, Prentice Hall,
       1996, section 4.3.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> a = 3.0                                   # 1/(s + a): H2 norm 1/sqrt(2a)
    >>> bool(np.isclose(pc.h2_norm(([[-a]], [[1.0]], [[1.0]])), 1 / np.sqrt(2 * a)))
    True
    """
    model = as_model(model)
    discrete = model.is_discrete
    if model.n_inputs == 0 or model.n_outputs == 0:
        return 0.0
    if not discrete and np.any(model.D != 0):
        return math.inf
    # far from unit scale, the norm of an exactly rescaled model is multiplied back exactly
    scaling = model_scaling(model)
    if not scaling.is_identity:
        return scaling.restore_h2(_h2_norm_of(scaling.apply(model)))
    return _h2_norm_of(model)


def _h2_norm_of(model: StateSpaceModel) -> float:
    """:func:`h2_norm` of a model of moderate scale (continuous time: ``D = 0``)."""
    discrete = model.is_discrete
    A, B, C, D = _equilibrated(model)
    gramian = _SchurGramian(A, B, C, discrete)
    if not gramian.stable():
        from plantcore.structure.minimal import minimal_realization

        origin_scale = frobenius(A)
        model = minimal_realization(model).model
        A, B, C, D = _equilibrated(model)
        gramian = _SchurGramian(A, B, C, discrete)
        if not gramian.stable(origin_scale):
            return math.inf
    d_part = frobenius(D) if discrete else 0.0
    return math.hypot(d_part, gramian.output_energy_root())


#: Blocks of at most this order are solved by LAPACK's ``dtrsyl`` directly.
_SYLVESTER_LEAF = 64


def _split(T) -> int:
    """A split point near the middle that does not cut a 2 x 2 diagonal block."""
    k = T.shape[0] // 2
    if T[k, k - 1] != 0.0:
        k += 1
    return k


def _sylvester_quasi_triangular(T1, T2, C):
    """``X`` with ``T1 X + X T2^T = C`` (``T1``, ``T2`` upper quasi-triangular); returns
    (X, info), info nonzero when LAPACK perturbed a near-singular leaf.

    The recursive blocked Bartels-Stewart method of Jonsson and Kagstrom (I. Jonsson and
    B. Kagstrom, "Recursive blocked algorithms for solving triangular systems - Part I:
    one-sided and coupled Sylvester-type matrix equations", ACM Trans. Mathematical
    Software 28(4), 392-415, 2002): the larger matrix is split, one half solved, the
    coupling moved to the right-hand side by a matrix product (level-3 BLAS), the other
    half solved; leaves of order ``_SYLVESTER_LEAF`` go to ``dtrsyl``.
    """
    a, b = T1.shape[0], T2.shape[0]
    if a == 0 or b == 0:
        return np.zeros((a, b)), 0
    if max(a, b) <= _SYLVESTER_LEAF:
        X, scale, info = scipy.linalg.lapack.dtrsyl(T1, T2, C, trana="N", tranb="T", isgn=1)
        return X / scale, info
    if a >= b:
        k = _split(T1)
        X2, i2 = _sylvester_quasi_triangular(T1[k:, k:], T2, C[k:])
        X1, i1 = _sylvester_quasi_triangular(T1[:k, :k], T2, C[:k] - T1[:k, k:] @ X2)
        return np.vstack([X1, X2]), i1 or i2
    k = _split(T2)
    Xb, ib = _sylvester_quasi_triangular(T1, T2[k:, k:], C[:, k:])
    Xa, ia = _sylvester_quasi_triangular(T1, T2[:k, :k], C[:, :k] - Xb @ T2[:k, k:].T)
    return np.hstack([Xa, Xb]), ia or ib


def _lyapunov_quasi_triangular(T, R):
    """Symmetric ``X`` with ``T X + X T^T = R`` (``T`` upper quasi-triangular, ``R``
    symmetric), by the same recursive blocking (Jonsson and Kagstrom 2002, Part II treats
    the Lyapunov case): ``X22`` first, then the Sylvester equation for ``X12``, then ``X11``
    with both couplings on the right-hand side.  Returns (X, info)."""
    n = T.shape[0]
    if n <= _SYLVESTER_LEAF:
        X, scale, info = scipy.linalg.lapack.dtrsyl(T, T, R, trana="N", tranb="T", isgn=1)
        return X / scale, info
    k = _split(T)
    T11, T12, T22 = T[:k, :k], T[:k, k:], T[k:, k:]
    X22, i22 = _lyapunov_quasi_triangular(T22, R[k:, k:])
    X12, i12 = _sylvester_quasi_triangular(T11, T22, R[:k, k:] - T12 @ X22)
    coupling = T12 @ X12.T
    X11, i11 = _lyapunov_quasi_triangular(T11, R[:k, :k] - coupling - coupling.T)
    X = np.block([[X11, X12], [X12.T, X22]])
    return X, i11 or i12 or i22


def _quasi_triangular_eigenvalues(T) -> np.ndarray:
    """The eigenvalues of a real quasi-triangular (real Schur) matrix, from its 1 x 1 and
    2 x 2 diagonal blocks, in ``O(n)``."""
    n = T.shape[0]
    lam = np.diag(T).astype(complex)
    if n < 2:
        return lam
    sub = np.diag(T, -1)
    for i in np.flatnonzero(sub != 0):
        a, b, c, d = T[i, i], T[i, i + 1], T[i + 1, i], T[i + 1, i + 1]
        mean, half = 0.5 * (a + d), 0.5 * (a - d)
        root = np.sqrt(complex(half * half + b * c))
        lam[i], lam[i + 1] = mean + root, mean - root
    return lam


class _SchurGramian:
    """One real Schur form of the state matrix, used for the stability test and for the
    Lyapunov equation of the H2 norm (Bartels and Stewart 1972).

    Continuous time: ``A = Z T Z^T``; the Gramian equation becomes
    ``T X + X T^T + (Z^T B)(Z^T B)^T = 0``, solved by LAPACK's ``dtrsyl`` on the
    quasi-triangular ``T``, and the eigenvalues are read from the diagonal blocks of ``T``:
    one ``O(n^3)`` factorization in all.  Discrete time: the Stein equation
    ``A P A^T - P + B B^T = 0`` has the same solution as the continuous equation of the
    Cayley transform ``A_c = (I + s A)^{-1} (s A - I)``, ``B_c = sqrt(2) (I + s A)^{-1} s B``
    (``s = +-1``, the sign whose ``I + s A`` is better conditioned by LAPACK's condition
    estimate), so the same route applies; the poles are mapped back by
    ``z = s (1 + lambda) / (1 - lambda)``.
    """

    def __init__(self, A, B, C, discrete: bool):
        self.n = A.shape[0]
        self.discrete = discrete
        self.A, self.B, self.C = A, B, C
        if self.n == 0:
            self.poles = np.zeros(0, dtype=complex)
            return
        Ac, Bc, Cc = A, B, C
        if discrete:
            best = None
            for sign in (1.0, -1.0):
                M = np.eye(self.n) + sign * A
                lu, piv, info = scipy.linalg.lapack.dgetrf(M)
                rcond = (scipy.linalg.lapack.dgecon(lu, float(np.linalg.norm(M, 1)), norm="1")[0]
                         if info == 0 else 0.0)
                if best is None or rcond > best[0]:
                    best = (rcond, sign, lu, piv)
            _, sign, lu, piv = best
            self.sign = sign
            Ac = scipy.linalg.lu_solve((lu, piv), sign * A - np.eye(self.n), check_finite=False)
            Bc = math.sqrt(2.0) * scipy.linalg.lu_solve((lu, piv), sign * B, check_finite=False)
            Cc = math.sqrt(2.0) * scipy.linalg.lu_solve((lu, piv), C.T, trans=1,
                                                        check_finite=False).T
        T, Z = scipy.linalg.schur(Ac, output="real")
        self.T, self.Z, self.Bc, self.Cc = T, Z, Bc, Cc
        lam = _quasi_triangular_eigenvalues(T)
        if discrete:
            with np.errstate(all="ignore"):
                lam = self.sign * (1.0 + lam) / (1.0 - lam)
        self.poles = lam

    def stable(self, pole_scale: float = 0.0) -> bool:
        """All poles inside the stability region, by the boundary tolerance of peak_gain."""
        if self.n == 0:
            return True
        lam = self.poles
        scale = max(frobenius(self.A), pole_scale)
        if self.discrete:
            return bool(np.all(np.abs(lam) < 1.0 - BOUNDARY_FACTOR * _EPS * max(1.0, scale)))
        return bool(np.all(lam.real < -BOUNDARY_FACTOR * _EPS * scale))

    def output_energy_root(self) -> float:
        """``sqrt(tr(C P C^T))`` (or ``sqrt(tr(B^T Q B))``), the Gramian part of the norm."""
        if self.n == 0:
            return 0.0
        B, C = self.B, self.C
        # B and C enter linearly: normalise them so that the Gramian is computed on data of
        # unit size and the magnitudes are put back outside the square root (no overflow or
        # underflow for entries near 1e+-150).
        b_size, c_size = frobenius(B), frobenius(C)
        if b_size == 0.0 or c_size == 0.0:
            return 0.0
        T, Z = self.T, self.Z
        use_controllability = B.shape[1] <= C.shape[0]
        if use_controllability:
            F = Z.T @ (self.Bc / b_size)            # the right-hand side's factor
            Out = C / c_size
        else:
            F = Z.T @ (self.Cc.T / c_size)
            Out = B.T / b_size
        R = F @ F.T
        if use_controllability:
            X, info = _lyapunov_quasi_triangular(T, -R)
        else:
            # T^T Y + Y T = -R is the same equation for S = J T^T J (upper quasi-triangular,
            # J the reversal) and J Y J
            Xr, info = _lyapunov_quasi_triangular(np.ascontiguousarray(T.T[::-1, ::-1]),
                                                  -R[::-1, ::-1])
            X = Xr[::-1, ::-1]
        X = 0.5 * (X + X.T)
        opT = T if use_controllability else T.T
        residual = frobenius(opT @ X + X @ opT.T + R)
        size = 2 * frobenius(T) * frobenius(X) + frobenius(R)
        if info != 0 or (size > 0 and residual > 1e-8 * size):
            warnings.warn(
                f"the Lyapunov equation for the H2 norm was solved with relative residual "
                f"{residual / size:.1e}; the value may be inaccurate.",
                AccuracyWarning, stacklevel=3)
        OutZ = Out @ Z
        energy = float(np.sum((OutZ @ X) * OutZ))
        return b_size * c_size * math.sqrt(max(energy, 0.0))
