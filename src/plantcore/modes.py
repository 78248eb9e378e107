"""Mode-by-mode diagnosis: stability, PBH controllability and observability, Kalman part.

For every eigenvalue ``λ`` of ``A`` (with multiplicity) this module reports whether the mode
is stable, whether the inputs can move it and the outputs can see it, how narrowly it passes
those tests, and which of the four Kalman parts it belongs to.  It also estimates the
distance of the whole model to the nearest uncontrollable and unobservable models.

The Popov-Belevitch-Hautus (PBH) tests say that ``λ`` is a controllable eigenvalue exactly
when ``[A - λI, B]`` has full row rank, and an observable one exactly when ``[A - λI; C]``
has full column rank.  The smallest singular value of these matrices is the size of the
smallest perturbation ``[ΔA, ΔB]`` (or ``[ΔA; ΔC]``) that makes ``λ`` an uncontrollable
(unobservable) eigenvalue, so it is a natural *margin* for the test.

Conventions used throughout
---------------------------
* **Scale.**  Margins and distances are measured on the equilibrated model with inputs and
  outputs rescaled by powers of two, exactly as the rank decisions of
  :mod:`plantcore.rank` are, and are divided by the same model scale
  ``max(||A||_F, column norms of B, row norms of C)``.  A margin of ``1e-6`` therefore means
  that a relative change of about one part in a million of the model data would make the
  test fail.
* **Stability boundary.**  With ``||A_e||_F`` the Frobenius norm of the equilibrated state
  matrix, a continuous-time mode is *stable* when ``Re λ < -δ`` and a discrete-time mode
  when ``|λ| < 1 - δ``, with ``δ = 1e-12 ||A_e||_F`` (continuous) or
  ``δ = 1e-12 max(1, ||A_e||_F)`` (discrete).  Modes within ``δ`` of the boundary are
  *marginal* and count as **not stable** (integrators, undamped oscillators, rigid-body
  modes): stabilizability and detectability must then hold for them too.  The factor
  ``1e-12`` lies well above the eigenvalue error of a model that went through a similarity
  of condition number up to about 1e3 (``~1e3 eps ||A||``) and well below any damping an
  engineer would call real.
* **Repeated and defective eigenvalues.**  A defective eigenvalue of multiplicity ``k`` is
  computed with an error of order ``eps^(1/k) ||A||``.  Within each Kalman block,
  eigenvalues closer than ``eps^(1/3) ||A_e||_F`` (about ``6e-6`` relative) are gathered
  into one cluster and every member is reported at the cluster mean, which is accurate to
  ``O(eps ||A||)`` (it is the trace of the restriction to the cluster's invariant subspace
  divided by its dimension).  This catches Jordan blocks of size up to 3; genuinely
  distinct eigenvalues closer than that are reported at their mean.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

from .kalman import PART_NAMES, _complement, _prepare, kalman_decomposition

__all__ = [
    "Mode",
    "DistanceEstimate",
    "classify_modes",
    "distance_to_uncontrollability",
    "distance_to_unobservability",
    "NARROW_MARGIN",
    "BOUNDARY_TOLERANCE",
]

NARROW_MARGIN = 1e-4
"""A mode that passes a PBH test with a relative margin below this is flagged ``narrow``.

A margin below ``1e-4`` means that changing the model data by about 0.01 % of its scale
could make the mode exactly uncontrollable (or unobservable): a near pole-zero
cancellation.  Plant data that come from identification or linearization are rarely
known better than that, so such a mode is, for practical purposes, on the edge.  The value
sits far above the rank tolerance's fragile zone (``100 x 5e-11``), so a *narrow* mode is
a modelling question, not a rounding question.
"""

BOUNDARY_TOLERANCE = 1e-12
"""Relative distance to the stability boundary under which a mode counts as marginal."""

_EPS = np.finfo(float).eps
_CLUSTER_FACTOR = _EPS ** (1.0 / 3.0)


@dataclass(frozen=True)
class Mode:
    """One eigenvalue of ``A`` and what the inputs and outputs can do with it.

    Attributes
    ----------
    value : complex
        The eigenvalue (``s``-plane in continuous time, ``z``-plane in discrete time).
        Members of a cluster of (numerically) repeated eigenvalues carry the cluster mean.
    stable : bool
        ``Re λ < -δ`` (continuous) or ``|λ| < 1 - δ`` (discrete); marginal modes are not
        stable.  See the module notes for ``δ``.
    marginal : bool
        True when the mode lies on the stability boundary within ``δ``.
    controllable : bool
        True when the mode lies in a controllable Kalman part (1 or 2).
    observable : bool
        True when the mode lies in an observable Kalman part (1 or 3).
    part : str
        The Kalman part, one of :data:`plantcore.kalman.PART_NAMES`.
    controllability_margin : float
        Smallest singular value of ``[A - λI, B]`` relative to the model's scale.  For a
        controllable mode it is computed on the controllable subsystem (``A`` restricted to
        the controllable subspace, in an orthonormal basis), which equals the whole model
        when it is controllable and is unaffected by an uncontrollable mode that happens to
        share the value ``λ``; for an uncontrollable mode it is computed on the whole model
        and is near the rounding level.  ``inf`` for a model without states.
    observability_margin : float
        Smallest singular value of ``[A - λI; C]`` relative to the model's scale; the dual
        of ``controllability_margin`` (observable modes: on the observable quotient system).
    narrow : bool
        True when the mode passes the controllability or the observability test with a
        margin below ``narrow_margin`` (default :data:`NARROW_MARGIN`): a near pole-zero
        cancellation.
    """

    value: complex
    stable: bool
    marginal: bool
    controllable: bool
    observable: bool
    part: str
    controllability_margin: float
    observability_margin: float
    narrow: bool

    def to_dict(self) -> dict:
        """JSON-safe dictionary (complex value as ``[re, im]``, ``inf`` as ``None``)."""
        def safe(x):
            return float(x) if math.isfinite(x) else None

        return {
            "value": [float(self.value.real), float(self.value.imag)],
            "stable": bool(self.stable),
            "marginal": bool(self.marginal),
            "controllable": bool(self.controllable),
            "observable": bool(self.observable),
            "part": self.part,
            "controllability_margin": safe(self.controllability_margin),
            "observability_margin": safe(self.observability_margin),
            "narrow": bool(self.narrow),
        }


@dataclass(frozen=True)
class DistanceEstimate:
    """An estimate of the distance to the nearest uncontrollable (or unobservable) model.

    Attributes
    ----------
    value : float
        ``min`` over the points tried of the smallest singular value of ``[A - λI, B]``
        (or ``[A - λI; C]``), relative to the model's scale.  It is attained at ``at``, so it
        is an **upper bound** on the true distance (a local search can miss the global
        minimum, never undershoot it).  ``inf`` for a model without states.
    at : complex or None
        The point ``λ`` where ``value`` was found (None for a model without states).
    kind : str
        ``"uncontrollability"`` or ``"unobservability"``.
    method : str
        How the estimate was obtained, in one sentence.
    """

    value: float
    at: complex | None
    kind: str
    method: str

    def to_dict(self) -> dict:
        return {
            "value": float(self.value) if math.isfinite(self.value) else None,
            "at": None if self.at is None else [float(self.at.real), float(self.at.imag)],
            "kind": self.kind,
            "method": self.method,
            "is_upper_bound": True,
        }


# --- stability ---------------------------------------------------------------------------

def _boundary_delta(norm_A: float, discrete: bool) -> float:
    return BOUNDARY_TOLERANCE * (max(1.0, norm_A) if discrete else norm_A)


def _stability(value: complex, delta: float, discrete: bool) -> tuple[bool, bool]:
    """(stable, marginal) for one eigenvalue."""
    if discrete:
        r = abs(value)
        return r < 1.0 - delta, abs(r - 1.0) <= delta
    return value.real < -delta, abs(value.real) <= delta


def _cluster_means(values, tol: float) -> np.ndarray:
    """Replace members of each cluster of close eigenvalues by the cluster mean.

    Greedy: the first unassigned value and every unassigned value within ``tol`` of it form
    a cluster (diameter at most ``2 tol``).  Conjugate symmetry is preserved because a
    cluster around a real-axis value is symmetric and clusters of conjugates mirror each
    other.
    """
    values = np.asarray(values, dtype=complex)
    out = values.copy()
    free = np.ones(values.size, dtype=bool)
    for i in range(values.size):
        if not free[i]:
            continue
        members = np.flatnonzero(free & (np.abs(values - values[i]) <= tol))
        free[members] = False
        if members.size > 1:
            # LAPACK returns exact conjugate pairs for a real matrix, so the mean of a
            # cluster that holds both members of each pair is exactly real.
            out[members] = values[members].mean()
    return out


def _clustered_eigenvalues(A_block: np.ndarray, tol: float) -> np.ndarray:
    if A_block.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    return _cluster_means(scipy.linalg.eigvals(A_block), tol)


def _stability_data(p) -> tuple[float, np.ndarray]:
    """Boundary tolerance and clustered eigenvalues of a prepared (equilibrated) model.

    Internal; shared with :mod:`plantcore.balanced` so that the two modules agree on which
    modes are stable, unstable or on the boundary.
    """
    nA = float(np.linalg.norm(p.A))
    delta = _boundary_delta(nA, p.model.is_discrete)
    values = _clustered_eigenvalues(p.A, _CLUSTER_FACTOR * nA)
    return delta, values


# --- PBH margins -------------------------------------------------------------------------

def _smin_rows(A, M, lam) -> float:
    """Smallest singular value of ``[A - λI, M]`` (n rows)."""
    n = A.shape[0]
    lam = complex(lam)
    if lam.imag == 0.0:      # real arithmetic is exact here and several times faster
        X = np.hstack([A - lam.real * np.eye(n), M])
    else:
        X = np.hstack([A - lam * np.eye(n), M]).astype(complex)
    s = scipy.linalg.svdvals(X)
    return float(s[n - 1]) if s.size >= n else 0.0


def _smin_cols(A, M, lam) -> float:
    """Smallest singular value of ``[A - λI; M]`` (n columns)."""
    return _smin_rows(A.T, M.T, lam)


def _sort_key(value: complex, discrete: bool):
    growth = abs(value) if discrete else value.real
    return (-growth, -value.imag)


def _mode_table(kd, p, narrow_margin: float) -> list[Mode]:
    """The per-mode classification from a decomposition and its prepared model (internal)."""
    n = p.model.n
    if n == 0:
        return []
    discrete = p.model.is_discrete
    nA = float(np.linalg.norm(p.A))
    delta = _boundary_delta(nA, discrete)
    cluster_tol = _CLUSTER_FACTOR * nA
    scale = float(p.scale)
    sizes = tuple(kd.sizes)
    n1, n2, n3, n4 = sizes
    T_e = kd.T / p.s[:, None]           # bases in equilibrated coordinates
    # Controllable subsystem: orthonormal basis [T1, T2] of the controllable subspace.
    V_R = T_e[:, :n1 + n2]
    A_R = V_R.T @ p.A @ V_R
    B_R = V_R.T @ p.B_dec
    # Observable quotient: orthonormal basis of the complement of N = span[T2, T4].
    N = np.hstack([T_e[:, n1:n1 + n2], T_e[:, n1 + n2 + n3:]])
    U_O = _complement(N, n) if N.shape[1] else np.eye(n)
    A_O = U_O.T @ p.A @ U_O
    C_O = p.C_dec @ U_O
    cuts = np.cumsum((0,) + sizes)
    modes: list[Mode] = []
    Az = kd.model.A
    for i, name in enumerate(PART_NAMES):
        sl = slice(cuts[i], cuts[i + 1])
        values = _clustered_eigenvalues(Az[sl, sl], cluster_tol)
        controllable = i in (0, 1)
        observable = i in (0, 2)
        part_modes = []
        cache: dict = {}
        for lam in values:
            lam = complex(lam)
            if lam not in cache:
                if controllable:
                    cm = _smin_rows(A_R, B_R, lam) / scale
                else:
                    cm = _smin_rows(p.A, p.B_dec, lam) / scale
                if observable:
                    om = _smin_cols(A_O, C_O, lam) / scale
                else:
                    om = _smin_cols(p.A, p.C_dec, lam) / scale
                cm, om = float(cm), float(om)
                cache[lam] = (cm, om)
            cm, om = cache[lam]
            stable, marginal = _stability(lam, delta, discrete)
            narrow = (controllable and cm < narrow_margin) or (observable and om < narrow_margin)
            part_modes.append(Mode(lam, stable, marginal, controllable, observable, name,
                                   cm, om, bool(narrow)))
        part_modes.sort(key=lambda m: _sort_key(m.value, discrete))
        modes.extend(part_modes)
    return modes


def classify_modes(model, tol=None, *, narrow_margin: float = NARROW_MARGIN) -> list[Mode]:
    """Classify every eigenvalue of ``A`` by stability, PBH tests and Kalman part.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance of the Kalman decomposition (see :mod:`plantcore.rank`).
    narrow_margin : float, optional
        Margin under which a mode that passes a test is flagged ``narrow``; default
        :data:`NARROW_MARGIN` (``1e-4``), whose reasoning is documented there.

    Returns
    -------
    list of Mode
        One entry per eigenvalue, with multiplicity (``n`` entries), grouped by Kalman part
        in the order of :data:`plantcore.kalman.PART_NAMES`; within a part the least stable
        mode comes first.

    Notes
    -----
    The controllable/observable verdict of each mode is **the Kalman part it belongs to**,
    so the table always agrees with :func:`plantcore.kalman_decomposition`: the eigenvalues
    of the four diagonal blocks ``A11``, ``A22``, ``A33``, ``A44`` of the decomposed model
    are exactly the modes of the four parts.  The rank decisions behind the parts are made
    by orthogonal staircase reductions, which remain rank-based and reliable for repeated
    and defective eigenvalues (unlike eigenvector-based tests).

    The PBH margins (Popov 1966; Belevitch 1968; Hautus 1969) quantify each verdict:
    the smallest singular value of ``[A - λI, B]`` is the norm of the smallest perturbation
    of ``[A, B]`` that makes ``λ`` uncontrollable (Eising 1984).  It is evaluated at the
    mode's computed eigenvalue (for clusters, the cluster mean), on the equilibrated,
    input-scaled model and relative to its scale (see the module notes).

    References
    ----------
    .. [1] M. L. J. Hautus, "Controllability and observability conditions of linear
       autonomous systems", Proc. Koninklijke Nederlandse Akademie van Wetenschappen,
       Ser. A, 72, 443-448, 1969.
    .. [2] V. M. Popov, *Hiperstabilitatea sistemelor automate*, Editura Academiei, 1966.
    .. [3] R. Eising, "Between controllable and uncontrollable", Systems & Control Letters
       4(5), 263-264, 1984.
    .. [4] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, 2.0]); B = np.array([[1.0], [0.0]]); C = np.array([[1.0, 1.0]])
    >>> modes = pc.classify_modes((A, B, C))
    >>> [(m.value.real, m.stable, m.controllable, m.part) for m in modes]
    [(-1.0, True, True, 'controllable_observable'), (2.0, False, False, 'uncontrollable_observable')]
    """
    kd = kalman_decomposition(model, tol)
    p = _prepare(model, tol)
    _check_narrow(narrow_margin)
    return _mode_table(kd, p, narrow_margin)


def _check_narrow(narrow_margin) -> None:
    if isinstance(narrow_margin, bool) or not isinstance(narrow_margin, (int, float)) \
            or not math.isfinite(narrow_margin) or narrow_margin < 0:
        raise ValueError(f"narrow_margin must be a non-negative number, got {narrow_margin!r}.")


# --- distances (Eising 1984) -------------------------------------------------------------

_MAX_STARTS = 3
_MAX_EVALUATIONS = 60
_ZERO_LEVEL = 1e3 * _EPS
_ADJECTIVE = {"uncontrollability": "uncontrollable", "unobservability": "unobservable"}


def _distance(A, M, scale, values, kind: str, known=None) -> DistanceEstimate:
    """Estimate ``min_λ sigma_min([A - λI, M]) / scale`` by local searches from eigenvalues.

    ``known`` optionally gives ``(value, λ)`` pairs already evaluated exactly (the mode
    table's margins), which then replace the evaluations at the eigenvalues.
    """
    n = A.shape[0]
    if n == 0:
        return DistanceEstimate(math.inf, None, kind, "a model without states has no modes to lose.")
    scale = float(scale)

    def f(x):
        return _smin_rows(A, M, complex(x[0], x[1])) / scale

    def upper(lam):
        lam = complex(lam)
        return lam.conjugate() if lam.imag < 0 else lam   # the margin is conjugate-symmetric

    if known is None:
        starts = []
        for lam in values:
            lam = upper(lam)
            if all(abs(lam - s) > 1e-12 * max(1.0, abs(lam)) for s in starts):
                starts.append(lam)
        scored = [(f((s.real, s.imag)), s) for s in starts]
    else:
        scored = [(float(v), upper(lam)) for v, lam in known]
    scored.sort(key=lambda t: t[0])
    best_value, best_at = scored[0]
    if best_value <= _ZERO_LEVEL:
        method = (f"smallest singular value evaluated at the eigenvalues; it is at the rounding "
                  f"level at {_short(best_at)}, so the model is numerically {_ADJECTIVE[kind]} "
                  "there and no search was needed")
        return DistanceEstimate(float(best_value), best_at, kind, method)
    tried = scored[:_MAX_STARTS]
    nA = max(float(np.linalg.norm(A)), 1e-300)
    for value0, lam in tried:
        step = 0.05 * max(abs(lam), 0.1 * nA / max(1, n))
        x0 = np.array([lam.real, lam.imag])
        simplex = np.array([x0, x0 + [step, 0.0], x0 + [0.0, step]])
        res = scipy.optimize.minimize(
            f, x0, method="Nelder-Mead",
            options=dict(initial_simplex=simplex, maxfev=_MAX_EVALUATIONS,
                         xatol=1e-8 * max(abs(lam), nA), fatol=1e-12 * value0))
        if res.fun < best_value:
            best_value, best_at = float(res.fun), complex(res.x[0], res.x[1])
    method = (f"smallest singular value evaluated at each of the {len(scored)} eigenvalue(s), "
              f"then refined by a Nelder-Mead search in the complex plane from the "
              f"{len(tried)} lowest; a local search, hence an upper bound on the true distance")
    return DistanceEstimate(float(best_value), best_at, kind, method)


def _short(lam: complex) -> str:
    lam = complex(lam)
    if lam.imag == 0:
        return f"lambda = {lam.real:.4g}"
    return f"lambda = {lam.real:.4g} {'+' if lam.imag > 0 else '-'} {abs(lam.imag):.4g}j"


def _distances(p, modes=None) -> tuple[DistanceEstimate, DistanceEstimate]:
    """Both distance estimates for a prepared model (internal).

    ``modes`` (the mode table of the same model) lets the evaluations at the eigenvalues be
    reused: a margin equals the distance function at its eigenvalue exactly when it was
    computed on the whole model, which is the case for every mode when the model is
    controllable (the controllable subspace is the whole space, with an orthonormal basis),
    and for the uncontrollable modes otherwise (dually for observability).
    """
    n = p.model.n
    if n == 0:
        return (_distance(p.A, p.B_dec, p.scale, [], "uncontrollability"),
                _distance(p.A, p.C_dec.T, p.scale, [], "unobservability"))
    known_c = known_o = None
    if modes is not None and len(modes) == n:
        unc = [m for m in modes if not m.controllable]
        known_c = [(m.controllability_margin, m.value) for m in (unc or modes)]
        uno = [m for m in modes if not m.observable]
        known_o = [(m.observability_margin, m.value) for m in (uno or modes)]
        values = None
    else:
        nA = float(np.linalg.norm(p.A))
        values = _clustered_eigenvalues(p.A, _CLUSTER_FACTOR * nA)
    return (_distance(p.A, p.B_dec, p.scale, values, "uncontrollability", known_c),
            _distance(p.A.T, p.C_dec.T, p.scale, values, "unobservability", known_o))


def distance_to_uncontrollability(model) -> DistanceEstimate:
    """Estimate how far the model is from the nearest uncontrollable model.

    The distance (Eising 1984) is

    .. math::

        d_c = \\min_{\\lambda \\in \\mathbb{C}} \\sigma_{\\min}([A - \\lambda I,\\; B]),

    the norm of the smallest perturbation ``[ΔA, ΔB]`` that makes the pair uncontrollable.
    It is measured on the equilibrated, input-scaled model relative to its scale, like
    every margin in plantcore (see :mod:`plantcore.modes`).

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])

    Returns
    -------
    DistanceEstimate
        ``value`` is an **estimate and an upper bound**: the function is evaluated at every
        distinct eigenvalue of ``A`` (where it is small when a mode is nearly
        uncontrollable), and a Nelder-Mead search in the complex plane (Nelder and Mead
        1965) is started from the six lowest of them; the least value seen is returned with
        the point where it was reached.  Methods with a guaranteed global minimum exist
        (Gu 2000) but cost ``O(n^4)`` or more.

    References
    ----------
    .. [1] R. Eising, "Between controllable and uncontrollable", Systems & Control Letters
       4(5), 263-264, 1984.
    .. [2] J. A. Nelder and R. Mead, "A simplex method for function minimization", The
       Computer Journal 7(4), 308-313, 1965.
    .. [3] M. Gu, "New methods for estimating the distance to uncontrollability", SIAM J.
       Matrix Analysis and Applications 21(3), 989-1003, 2000.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> d = pc.modes.distance_to_uncontrollability(([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [0.0]], [[1.0, 1.0]]))
    >>> d.value < 1e-15
    True
    """
    p = _prepare(model, None)
    return _distances(p)[0]


def distance_to_unobservability(model) -> DistanceEstimate:
    """Estimate how far the model is from the nearest unobservable model.

    The dual of :func:`distance_to_uncontrollability`:
    ``min over λ of sigma_min([A - λI; C])``, relative to the model's scale, found the same
    way and likewise an estimate and an upper bound.

    Examples
    --------
    >>> import plantcore as pc
    >>> d = pc.modes.distance_to_unobservability(([[-1.0]], [[1.0]], [[1.0]]))
    >>> 0.0 < d.value <= 1.0
    True
    """
    p = _prepare(model, None)
    return _distances(p)[1]
