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

The module is a little over 600 lines: the two norms share the equilibrated model, the
boundary-pole test and the stability test, and read best together.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.errors import AccuracyWarning
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import any_fragile
from plantcore.core.equilibration import equilibrate

__all__ = ["PeakGain", "peak_gain", "h2_norm"]

_EPS = np.finfo(float).eps

#: A pole counts as lying on the imaginary axis (unit circle) when its distance to it is at
#: most this factor times ``eps * ||A_e||_F`` (``A_e`` the equilibrated state matrix; for the
#: unit circle ``max(1, ||A_e||_F)``).  See :func:`peak_gain`, Notes.
BOUNDARY_FACTOR = 1000.0

#: An eigenvalue ``lambda`` of the Hamiltonian (symplectic) pencil is a *candidate* crossing
#: frequency when ``|Re lambda| <= AXIS_TOLERANCE * |lambda|`` (continuous) or
#: ``||lambda| - 1| <= AXIS_TOLERANCE`` (discrete), plus a rounding floor.  Generous on
#: purpose: a spurious candidate costs one evaluation, a missed one could stop too early.
AXIS_TOLERANCE = 1e-6

#: Eigenvalues within this distance of the points where crossing frequencies meet their
#: mirror images (``s = 0``, relative to the pencil's scale; ``z = 1`` and ``z = -1``) also
#: give candidates, because there a perturbed pair may leave the boundary along the real
#: axis (a cluster's eigenvalues move by about the cluster's size).
CLUSTER_RADIUS = 1e-2

_MAX_ITERATIONS = 60
_MAX_POLE_FREQUENCIES = 64


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
        the last Hamiltonian (or symplectic pencil) test; ``inf`` for a boundary pole, ``nan``
        when the iteration stopped without verification.
    relative_accuracy : float
        ``upper_bound / value - 1``: the relative accuracy reached (at most ``rel_tol``).
        ``0.0`` for static gains and exact cases, ``nan`` when not verified.
    iterations : int
        Number of Hamiltonian (symplectic pencil) eigenvalue problems solved.
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

    @property
    def frequency_unit(self) -> str:
        """``"rad/sample"`` in discrete time, ``"rad/s"`` in continuous time."""
        return "rad/sample" if self.is_discrete else "rad/s"


# --- helpers ----------------------------------------------------------------------------------

def _validate_rel_tol(rel_tol) -> float:
    if isinstance(rel_tol, bool):
        raise ValueError(f"rel_tol must be a number in (0, 0.1], got {rel_tol!r}.")
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


def _boundary_poles(A: np.ndarray, discrete: bool, pole_scale: float = 0.0) -> np.ndarray:
    """Eigenvalues of ``A`` on the boundary of the stability region, within tolerance."""
    if A.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    lam = np.linalg.eigvals(A)
    scale = max(np.linalg.norm(A), pole_scale)
    if discrete:
        tol = BOUNDARY_FACTOR * _EPS * max(1.0, scale)
        return lam[np.abs(np.abs(lam) - 1.0) <= tol]
    tol = BOUNDARY_FACTOR * _EPS * scale
    return lam[np.abs(lam.real) <= tol]


def _pole_frequency(lam: complex, discrete: bool) -> float:
    return float(abs(np.angle(lam))) if discrete else float(abs(lam.imag))


class _FrequencyResponse:
    """Fast evaluation of ``sigma_max(G)`` at many frequencies via the Hessenberg form.

    ``A = U H U^T`` with ``H`` upper Hessenberg (orthogonal ``U``), so that
    ``G(s) = (C U) (s I - H)^{-1} (U^T B) + D`` and each solve costs ``O(n^2)`` instead of
    ``O(n^3)`` (A. J. Laub, "Efficient multivariable frequency response computations",
    IEEE Trans. Automatic Control 26(2), 407-408, 1981).  The Hessenberg systems are solved
    by Gaussian elimination with partial pivoting between neighbouring rows, vectorized
    over the frequencies; its growth factor is at most ``n``, so the solve is backward
    stable in practice (Wilkinson).
    """

    def __init__(self, A, B, C, D, discrete: bool):
        self.n = A.shape[0]
        self.discrete = discrete
        self.D = D
        self.sd = float(np.linalg.norm(D, 2)) if D.size else 0.0
        if self.n:
            H, U = scipy.linalg.hessenberg(A, calc_q=True)
            self.H = np.triu(H, -1)
            self.B = U.T @ B
            self.C = C @ U
        self.empty = D.size == 0

    def _solve(self, pts):
        """Solve ``(pt I - H) X = B`` for each point; returns (k, n, m) (nan where singular)."""
        n = self.n
        k = pts.size
        M = -np.broadcast_to(self.H, (k, n, n)).astype(complex)
        idx = np.arange(n)
        M[:, idx, idx] += pts[:, None]
        R = np.broadcast_to(self.B, (k,) + self.B.shape).astype(complex)
        R = R.copy()
        rows = np.arange(k)
        with np.errstate(divide="ignore", invalid="ignore"):
            for j in range(n - 1):
                swap = np.abs(M[:, j + 1, j]) > np.abs(M[:, j, j])
                if np.any(swap):
                    s = rows[swap]
                    top = M[s, j, j:].copy()
                    M[s, j, j:] = M[s, j + 1, j:]
                    M[s, j + 1, j:] = top
                    rtop = R[s, j, :].copy()
                    R[s, j, :] = R[s, j + 1, :]
                    R[s, j + 1, :] = rtop
                mult = M[:, j + 1, j] / M[:, j, j]
                M[:, j + 1, j:] -= mult[:, None] * M[:, j, j:]
                R[:, j + 1, :] -= mult[:, None] * R[:, j, :]
            X = np.empty_like(R)
            for i in range(n - 1, -1, -1):
                acc = R[:, i, :] - np.einsum("kj,kjm->km", M[:, i, i + 1:], X[:, i + 1:, :])
                X[:, i, :] = acc / M[:, i, i][:, None]
        return X

    def sigma_max(self, freqs) -> np.ndarray:
        """Largest singular value at each frequency (rad/s, ``inf`` allowed; or rad/sample)."""
        freqs = np.asarray(freqs, dtype=float).ravel()
        out = np.empty(freqs.size)
        if self.empty:
            out[:] = 0.0
            return out
        finite = np.isfinite(freqs)
        out[~finite] = self.sd
        idx = np.flatnonzero(finite)
        if self.n == 0:
            out[idx] = self.sd
            return out
        chunk = max(1, int(2e6 // (self.n * self.n)))
        for start in range(0, idx.size, chunk):
            sel = idx[start:start + chunk]
            w = freqs[sel]
            pts = np.exp(1j * w) if self.discrete else 1j * w
            X = self._solve(pts)
            G = self.C[None, :, :] @ X + self.D[None, :, :]
            bad = ~np.all(np.isfinite(G), axis=(1, 2))
            G[bad] = 0.0
            vals = np.linalg.svd(G, compute_uv=False)[:, 0]
            vals[bad] = math.inf          # the frequency is a pole
            out[sel] = vals
        return out


def _pencil_crossings(A, B, C, D, gamma: float, discrete: bool) -> np.ndarray:
    """Frequencies where some singular value of ``G`` may equal ``gamma``.

    Eigenvalues of the Hamiltonian pencil (continuous) or symplectic pencil (discrete) of
    order ``2n``, obtained from the extended pencil of order ``2n + m + p`` by an orthogonal
    compression of the ``m + p`` algebraic columns, so that ``gamma**2 I - D^T D`` is never
    inverted.  Returns the sorted candidate frequencies in ``[0, inf)`` (rad/s) or
    ``[0, pi]`` (rad/sample).
    """
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    Z = np.zeros
    Ip, Im, In = np.eye(p), np.eye(m), np.eye(n)
    if discrete:
        # x[k+1] = A x + B u; adjoint q = A^T p + C^T y with p = z q (scaled by gamma).
        M = np.block([
            [A, Z((n, n)), B, Z((n, p))],
            [Z((n, n)), In, Z((n, m)), -C.T],
            [C, Z((p, n)), D, -gamma * Ip],
            [Z((m, n)), Z((m, n)), -gamma * Im, D.T],
        ])
        N = np.block([
            [In, Z((n, n))],
            [Z((n, n)), A.T],
            [Z((p, 2 * n))],
            [Z((m, n)), -B.T],
        ])
    else:
        M = np.block([
            [A, Z((n, n)), B, Z((n, p))],
            [Z((n, n)), -A.T, Z((n, m)), -C.T],
            [C, Z((p, n)), D, -gamma * Ip],
            [Z((m, n)), B.T, -gamma * Im, D.T],
        ])
        N = np.block([[In, Z((n, n))], [Z((n, n)), In], [Z((m + p, 2 * n))]])
    # Orthogonal compression: rows orthogonal to the algebraic columns [B 0; 0 -C^T; D -g; -g D^T].
    Q, _ = scipy.linalg.qr(M[:, 2 * n:])
    Q2 = Q[:, m + p:]
    Mc = Q2.T @ M[:, :2 * n]
    Nc = Q2.T @ N
    alpha, beta = scipy.linalg.eigvals(Mc, Nc, homogeneous_eigvals=True)
    scale = max(np.linalg.norm(Mc), 1e-300) / max(np.linalg.norm(Nc), 1e-300)
    floor = 100.0 * _EPS * scale
    aa, bb = np.abs(alpha), np.abs(beta)
    finite = bb > _EPS * aa
    lam = alpha[finite] / beta[finite]
    if discrete:
        near = np.abs(np.abs(lam) - 1.0) <= AXIS_TOLERANCE * np.maximum(np.abs(lam), 1.0)
        freqs = [np.abs(np.angle(lam[near]))]
        # Crossings at angles +-d around z = 1 or z = -1 form a cluster of the real pencil
        # whose eigenvalues, perturbed by rounding, may leave the circle as a real pair
        # (r, 1/r) at distance about d from the point; |z -+ 1| estimates the angle.
        d_plus, d_minus = np.abs(lam - 1.0), np.abs(lam + 1.0)
        freqs.append(d_plus[d_plus <= CLUSTER_RADIUS])
        freqs.append(math.pi - d_minus[d_minus <= CLUSTER_RADIUS])
    else:
        near = np.abs(lam.real) <= AXIS_TOLERANCE * np.abs(lam) + floor
        freqs = [np.abs(lam[near].imag)]
        # The same at s = 0: crossings at +-j d may appear as a real pair +-d.
        mag = np.abs(lam)
        freqs.append(mag[mag <= CLUSTER_RADIUS * scale])
    freqs = np.concatenate(freqs)
    if discrete:
        freqs = np.clip(freqs, 0.0, math.pi)
    return np.unique(freqs)


def _initial_frequencies(A, discrete: bool) -> np.ndarray:
    """Zero, the Nyquist frequency or infinity, and the frequencies of the poles."""
    lam = np.linalg.eigvals(A) if A.shape[0] else np.zeros(0, dtype=complex)
    if discrete:
        if lam.size > _MAX_POLE_FREQUENCIES:   # the poles nearest the unit circle
            lam = lam[np.argsort(np.abs(np.abs(lam) - 1.0), kind="stable")[:_MAX_POLE_FREQUENCIES]]
        pole_w = np.abs(np.angle(lam[np.abs(lam) > 0])) if lam.size else np.zeros(0)
        return np.unique(np.concatenate([[0.0, math.pi], pole_w]))
    # Bruinsma and Steinbuch test the pole frequencies |Im(lambda)| (and the natural
    # frequency |lambda| for real or lightly damped poles); both are cheap and harmless.
    # For large models only the least damped poles are used: they carry the peaks.
    if lam.size > _MAX_POLE_FREQUENCIES:
        damping = np.abs(lam.real) / np.maximum(np.abs(lam), 1e-300)
        lam = lam[np.argsort(damping, kind="stable")[:_MAX_POLE_FREQUENCIES]]
    pole_w = np.concatenate([np.abs(lam.imag), np.abs(lam)]) if lam.size else np.zeros(0)
    return np.unique(np.concatenate([[0.0, math.inf], pole_w]))


def _iterate(A, B, C, D, discrete: bool, rel_tol: float):
    """Bruinsma-Steinbuch iteration; returns (value, frequency, upper, iterations, message)."""
    response = _FrequencyResponse(A, B, C, D, discrete)
    freqs = _initial_frequencies(A, discrete)
    vals = response.sigma_max(freqs)
    k = int(np.argmax(vals))
    g_low, w_low = float(vals[k]), float(freqs[k])
    if math.isinf(g_low):
        return g_low, w_low, math.inf, 0, "unbounded"
    if g_low == 0.0:
        # Zero at 0, infinity and the pole frequencies; try a grid of 2n + 2 distinct
        # frequencies: a nonzero proper rational G of degree n cannot vanish at all of them.
        lam = np.linalg.eigvals(A)
        top = max(1.0, float(np.max(np.abs(lam)))) if lam.size else 1.0
        grid = (np.linspace(0.05, 3.0, 2 * A.shape[0] + 2) if discrete
                else np.geomspace(1e-3 * top, 1e3 * top, 2 * A.shape[0] + 2))
        vals = response.sigma_max(grid)
        k = int(np.argmax(vals))
        g_low, w_low = float(vals[k]), float(grid[k])
        if g_low == 0.0:
            return 0.0, 0.0, 0.0, 0, "The transfer matrix is zero at every frequency tested."
    for it in range(1, _MAX_ITERATIONS + 1):
        gamma = (1.0 + rel_tol) * g_low
        cand = _pencil_crossings(A, B, C, D, gamma, discrete)
        if cand.size == 0:
            return (g_low, w_low, gamma, it,
                    "Converged: no frequency has a gain above the upper bound.")
        pts = np.concatenate([cand, 0.5 * (cand[:-1] + cand[1:])])
        vals = response.sigma_max(pts)
        k = int(np.argmax(vals))
        if vals[k] > g_low:
            g_low, w_low = float(vals[k]), float(pts[k])
        if not vals[k] > gamma:
            return (g_low, w_low, gamma, it,
                    "Converged: no gain above the upper bound was found at the candidate "
                    "crossing frequencies.")
    warnings.warn(
        f"the peak-gain iteration did not verify an upper bound within {_MAX_ITERATIONS} "
        "iterations; the value is a gain attained, possibly below the peak.",
        AccuracyWarning, stacklevel=3)
    return (g_low, w_low, math.nan, _MAX_ITERATIONS,
            "Stopped at the iteration limit without verifying an upper bound.")


# --- public functions -------------------------------------------------------------------------

def peak_gain(model, *, rel_tol: float = 1e-10) -> PeakGain:
    """The peak gain of the frequency response (L-infinity norm) and where it occurs.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        ``A`` (n, n), ``B`` (n, m), ``C`` (p, n), ``D`` (p, m); continuous or discrete time.
    rel_tol : float, optional
        Relative accuracy asked for, default ``1e-10``: the true norm lies in
        ``[value, value * (1 + rel_tol)]`` (up to the rounding of the eigenvalue and
        frequency-response computations).

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
    Starting from the largest gain at zero frequency, at infinite frequency (``||D||``) and
    at the frequencies of the poles (the initial lower bound of [2]_), each step sets
    ``gamma = (1 + rel_tol) * lower``, finds the frequencies where some singular value equals
    ``gamma``, evaluates the gain at those frequencies and at the midpoints between
    neighbouring ones, and raises the lower bound to the largest gain found.  When no gain
    exceeds ``gamma`` the iteration stops: ``gamma`` is the upper bound.  The midpoint
    update converges quadratically [2]_.  In discrete time the symplectic pencil plays the
    part of the Hamiltonian matrix and its eigenvalues on the unit circle give the crossing
    angles [3]_; no bilinear transformation is used, so poles near ``z = -1`` need no care.

    Both pencils are formed in the extended form of order ``2n + m + p``, which contains
    ``gamma`` and ``D`` without inverting ``gamma**2 I - D^T D``, and the ``m + p``
    algebraic columns are removed by an orthogonal (QR) compression before the QZ
    algorithm, as in the structured approach of Benner, Sima and Voigt [4]_.  Before
    anything else the state coordinates are equilibrated by an exact power-of-two scaling,
    which changes no transfer-matrix value.

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

    *How it can fail.*  A pole at a distance from the axis between the boundary tolerance
    and the accuracy of its computed value (a defective eigenvalue, say a double integrator
    in rotated coordinates, is known only to about ``sqrt(eps)``) gives a huge finite value
    instead of ``inf``.  The stated accuracy assumes the frequency response is computed to
    full relative precision, which fails for ill-conditioned ``j w I - A``.

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
       2005, section 5.3 (the discrete-time counterpart with a symplectic pencil).
    .. [4] P. Benner, V. Sima and M. Voigt, "L-infinity-norm computation for continuous-time
       descriptor systems using structured matrix pencils", IEEE Trans. Automatic Control
       57(1), 233-238, 2012.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> wn, zeta = 2.0, 0.1                       # resonance wn^2 / (s^2 + 2 zeta wn s + wn^2)
    >>> g = pc.from_transfer_function([wn**2], [1.0, 2 * zeta * wn, wn**2])
    >>> pk = pc.peak_gain(g)
    >>> bool(np.isclose(pk.value, 1 / (2 * zeta * np.sqrt(1 - zeta**2)), rtol=1e-9))
    True
    >>> bool(np.isclose(pk.frequency, wn * np.sqrt(1 - 2 * zeta**2), rtol=1e-4))
    True
    >>> pc.peak_gain(pc.from_transfer_function([1.0], [1.0, 0.0])).boundary_pole  # 1/s
    True
    """
    return _peak_gain(as_model(model), _validate_rel_tol(rel_tol), 0.0)


def _peak_gain(model: StateSpaceModel, rel_tol: float, pole_scale: float) -> PeakGain:
    """:func:`peak_gain` with the boundary tolerance judged against
    ``max(||A_e||_F, pole_scale)``.  A model derived from larger ones (the minimal
    realization of a difference, say) passes the scale of its origin, since a pole of
    size ``1e-26`` left by rounding in a one-state model says nothing on its own."""
    discrete = model.is_discrete
    decisions: tuple = ()
    if model.n_inputs == 0 or model.n_outputs == 0:
        return PeakGain(0.0, 0.0, 0.0, 0.0, 0, False, discrete,
                        "The model has no inputs or no outputs; its gain is zero.")
    A, B, C, D = _equilibrated(model)
    on_boundary = _boundary_poles(A, discrete, pole_scale)
    if on_boundary.size:
        from plantcore.structure.minimal import minimal_realization

        mr = minimal_realization(model)
        decisions = tuple(mr.decisions)
        pole_scale = max(pole_scale, float(np.linalg.norm(A)))   # judge against the origin
        model = mr.model
        A, B, C, D = _equilibrated(model)
        on_boundary = _boundary_poles(A, discrete, pole_scale)
        if on_boundary.size:
            lam = on_boundary[np.argmin(np.abs(on_boundary))] if not discrete else on_boundary[0]
            w = _pole_frequency(lam, discrete)
            unit = "rad/sample" if discrete else "rad/s"
            where = "unit circle" if discrete else "imaginary axis"
            return PeakGain(math.inf, w, math.inf, 0.0, 0, True, discrete,
                            f"A pole of the transfer function lies on the {where} at "
                            f"{w:.6g} {unit}; the gain is unbounded there.",
                            decisions, any_fragile(decisions))
    if model.n == 0:
        value = float(np.linalg.norm(D, 2))
        return PeakGain(value, 0.0, value, 0.0, 0, False, discrete,
                        "The model is a static gain; its peak gain is the norm of D.",
                        decisions, any_fragile(decisions))
    value, w, upper, iterations, message = _iterate(A, B, C, D, discrete, rel_tol)
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
    return PeakGain(value, w, upper, accuracy, iterations, False, discrete, message,
                    decisions, any_fragile(decisions))


def _is_stable(A: np.ndarray, discrete: bool, pole_scale: float = 0.0) -> bool:
    if A.shape[0] == 0:
        return True
    lam = np.linalg.eigvals(A)
    scale = max(np.linalg.norm(A), pole_scale)
    if discrete:
        return bool(np.all(np.abs(lam) < 1.0 - BOUNDARY_FACTOR * _EPS * max(1.0, scale)))
    return bool(np.all(lam.real < -BOUNDARY_FACTOR * _EPS * scale))


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
    smaller right-hand side.  It is computed by the Bartels-Stewart method [1]_ (scipy's
    ``solve_continuous_lyapunov`` / ``solve_discrete_lyapunov``) on the exactly
    equilibrated model (an exact power-of-two state scaling) and symmetrized; a small
    negative trace from rounding is clipped to zero.  (A Cholesky-factor solver,
    Hammarling's method, would guarantee a semidefinite Gramian; the residual check below
    guards the simpler route.)  Stability uses the boundary tolerance of
    :func:`peak_gain`; when an unstable or boundary mode is found the model is first
    reduced to a minimal realization, since a hidden unstable mode does not enter the
    transfer matrix.  The formulas are those of Zhou, Doyle and Glover [2]_, section 4.3.
    An :class:`AccuracyWarning` is emitted when the Lyapunov residual is large.

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
    A, B, C, D = _equilibrated(model)
    if not _is_stable(A, discrete):
        from plantcore.structure.minimal import minimal_realization

        origin_scale = float(np.linalg.norm(A))
        model = minimal_realization(model).model
        A, B, C, D = _equilibrated(model)
        if not _is_stable(A, discrete, origin_scale):
            return math.inf
    d_part = float(np.linalg.norm(D)) if discrete else 0.0
    gram_part = 0.0
    if model.n:
        # B and C enter linearly: normalise them so that the Gramian is computed on data of
        # unit size and the magnitudes are put back outside the square root (no overflow or
        # underflow for entries near 1e+-150).
        b_size, c_size = float(np.linalg.norm(B)), float(np.linalg.norm(C))
        if b_size == 0.0 or c_size == 0.0:
            return d_part
        B, C = B / b_size, C / c_size
        use_controllability = B.shape[1] <= C.shape[0]
        if use_controllability:
            Aa, R, Out = A, B @ B.T, C
        else:
            Aa, R, Out = A.T, C.T @ C, B.T
        if discrete:
            P = scipy.linalg.solve_discrete_lyapunov(Aa, R)
            residual = np.linalg.norm(Aa @ P @ Aa.T - P + R)
            size = np.linalg.norm(Aa) ** 2 * np.linalg.norm(P) + np.linalg.norm(P) + np.linalg.norm(R)
        else:
            P = scipy.linalg.solve_continuous_lyapunov(Aa, -R)
            residual = np.linalg.norm(Aa @ P + P @ Aa.T + R)
            size = 2 * np.linalg.norm(Aa) * np.linalg.norm(P) + np.linalg.norm(R)
        P = 0.5 * (P + P.T)
        if size > 0 and residual > 1e-8 * size:
            warnings.warn(
                f"the Lyapunov equation for the H2 norm was solved with relative residual "
                f"{residual / size:.1e}; the value may be inaccurate.",
                AccuracyWarning, stacklevel=2)
        gram_part = b_size * c_size * math.sqrt(max(float(np.sum((Out @ P) * Out)), 0.0))
    return math.hypot(d_part, gram_part)
