"""Mode-by-mode diagnosis: stability, PBH controllability and observability, Kalman part.

For every eigenvalue ``λ`` of ``A`` (with multiplicity) this module reports whether the mode
is stable, whether the inputs can move it and the outputs can see it, how narrowly it passes
those tests, and which of the four Kalman parts it belongs to.  The distance of the whole
model to the nearest uncontrollable and unobservable models is estimated in
:mod:`plantcore.structure.distance`.

The Popov-Belevitch-Hautus (PBH) tests say that ``λ`` is a controllable eigenvalue exactly
when ``[A - λI, B]`` has full row rank, and an observable one exactly when ``[A - λI; C]``
has full column rank.  The smallest singular value of these matrices is the size of the
smallest perturbation ``[ΔA, ΔB]`` (or ``[ΔA; ΔC]``) that makes ``λ`` an uncontrollable
(unobservable) eigenvalue, so it is a natural *margin* for the test.

Conventions used throughout
---------------------------
* **Scale.**  Margins and distances are measured on the equilibrated model with inputs and
  outputs rescaled by powers of two, exactly as the rank decisions of
  :mod:`plantcore.core.rank` are, and are divided by the same model scale
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
  eigenvalues closer than ``eps^(1/3) ||A_e||_F`` (about ``6e-6`` relative) are candidates
  for one cluster; they are gathered only when each lies within the other's error disc
  (radius ``1e3 kappa eps ||A_e||_F``, ``kappa`` the eigenvalue condition number), the rule
  of the modal certificate (:func:`plantcore.structure.certificate._clusters`).  Every
  member of a cluster is reported at the cluster mean, which is accurate to
  ``O(eps ||A||)`` (it is the trace of the restriction to the cluster's invariant subspace
  divided by its dimension).  This catches Jordan blocks of size up to 3, while distinct,
  well-conditioned eigenvalues of a stiff model (``-1`` and ``-1e-3`` beside ``-1e6``) stay
  apart however close they are relative to ``||A||``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from plantcore.core.safe_norms import frobenius, frobenius_of_columns
from plantcore.structure.certificate import (
    _clusters,
    close_pairs,
    eigenvector_conditions,
    offset_mean,
    schur_eigenvalues,
)
from plantcore.structure.kalman import PART_NAMES, _complement, _prepare, kalman_decomposition
from plantcore.structure.pbh_measures import MARGIN_RESIDUAL, PBHMeasures, threads_for_size

__all__ = ["BOUNDARY_TOLERANCE", "NARROW_MARGIN", "Mode", "classify_modes"]


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
        The Kalman part, one of :data:`plantcore.structure.kalman.PART_NAMES`.
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


def _boundary_delta(norm_A: float, discrete: bool) -> float:
    return BOUNDARY_TOLERANCE * (max(1.0, norm_A) if discrete else norm_A)


def _stability(value: complex, delta: float, discrete: bool) -> tuple[bool, bool]:
    """(stable, marginal) for one eigenvalue."""
    if discrete:
        r = abs(value)
        return r < 1.0 - delta, abs(r - 1.0) <= delta
    return value.real < -delta, abs(value.real) <= delta


def _clustered_eigenvalues(A_block: np.ndarray, tol: float) -> np.ndarray:
    """Eigenvalues of ``A_block`` with the members of each cluster replaced by the cluster
    mean (module notes): ``tol`` is the widest cluster reach (``eps^(1/3) ||A||``), and
    candidates within it are joined only as the condition numbers allow."""
    if A_block.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    values = scipy.linalg.eigvals(A_block)
    candidates = _candidates(values, tol)
    if not candidates.any():
        return values
    values, VL, VR = scipy.linalg.eig(A_block, left=True, right=True)
    kappa = eigenvector_conditions(VL / frobenius_of_columns(VL), VR / frobenius_of_columns(VR))
    return _conditioned_means(values, kappa, _candidates(values, tol), tol)


def _candidates(values: np.ndarray, tol: float) -> np.ndarray:
    """Which of ``values`` have another value within ``tol`` (boolean mask)."""
    out = np.zeros(values.size, dtype=bool)
    out[close_pairs(values, tol).ravel()] = True
    return out


def _conditioned_means(values, kappa, candidates, tol: float) -> np.ndarray:
    """Cluster means by the certificate's rule, within the reach ``tol`` only."""
    base = tol / _CLUSTER_FACTOR
    radii = np.maximum(1e3 * _EPS, 1e3 * _EPS * np.where(candidates, kappa, 1.0)) * base
    radii = np.minimum(radii, tol / 2.0)
    labels = _clusters(np.asarray(values, dtype=complex), radii, base)
    out = np.asarray(values, dtype=complex).copy()
    for label in np.unique(labels):
        members = np.flatnonzero(labels == label)
        if members.size > 1:
            out[members] = offset_mean(out[members])
    return out


def _clustered_schur_eigenvalues(schur, tol: float) -> np.ndarray:
    """:func:`_clustered_eigenvalues` read from a real Schur form (by diagonal position):
    the condition numbers of the candidates come from the eigenvectors of the triangle,
    two triangular solves each (``O(n^2)``), so no second eigendecomposition is needed."""
    values = schur_eigenvalues(schur.T)
    candidates = _candidates(values, tol)
    if not candidates.any():
        return values
    real = not np.any(np.diag(schur.T, -1))
    T = schur.T if real else schur.complex[0]
    kappa = np.ones(values.size)
    for k in np.flatnonzero(candidates):
        kappa[k] = schur_eigenvalue_condition(T, k)
    return _conditioned_means(values, kappa, candidates, tol)


def schur_eigenvalue_condition(T: np.ndarray, k: int) -> float:
    """Condition number of the eigenvalue ``T[k, k]`` of the upper triangle ``T`` (real or
    complex).

    With ``lambda = T[k, k]`` the right eigenvector is ``(x, 1, 0)`` and the left one
    ``(0, 1, y)``, where ``(T_11 - lambda I) x = -t_12`` and
    ``(T_22 - lambda I)^H y = -conj(t_21)`` are triangular; since ``y^H x = 1`` the condition
    number ``||x|| ||y|| / |y^H x|`` is ``sqrt(1 + ||x||^2) sqrt(1 + ||y||^2)`` (J. H.
    Wilkinson, *The Algebraic Eigenvalue Problem*, 1965, chapter 2).  Vanishing pivots
    (other copies of the eigenvalue) are replaced by ``eps max|T|``, which makes the vectors
    large, as they are for a defective eigenvalue: the copies then link up.  Shared with
    the peak gain's boundary test (:mod:`plantcore.reduction.norms`).
    """
    n = T.shape[0]
    lam = T[k, k]
    floor = _EPS * (float(np.max(np.abs(T))) + 1e-300)
    dtype = complex if np.iscomplexobj(T) else float

    def solve(block, rhs, trans):
        M = np.array(block, dtype=dtype)
        pivots = np.diagonal(M) - lam
        M[np.diag_indices_from(M)] = np.where(np.abs(pivots) < floor, floor, pivots)
        with np.errstate(all="ignore"):
            z = scipy.linalg.solve_triangular(M, rhs, trans=trans, check_finite=False)
        return math.hypot(1.0, frobenius(z)) if np.all(np.isfinite(z)) else math.inf

    right = solve(T[:k, :k], -T[:k, k], "N") if k > 0 else 1.0
    left = solve(T[k + 1:, k + 1:], -np.conj(T[k, k + 1:]), "C") if k < n - 1 else 1.0
    return right * left


def _stability_data(p, schur=None) -> tuple[float, np.ndarray]:
    """Boundary tolerance and clustered eigenvalues of a prepared (equilibrated) model.

    Internal; shared with :mod:`plantcore.reduction.balanced` so that the two modules agree on which
    modes are stable, unstable or on the boundary.  With ``schur``, a real Schur form of
    ``p.A`` already computed, the eigenvalues are read from it (in the order of its diagonal
    positions) and the boundary test measures on it: no further ``O(n^3)`` work.
    """
    nA = frobenius(p.A)
    discrete = p.model.is_discrete
    delta = _boundary_delta(nA, discrete)
    if schur is None:
        values = _clustered_eigenvalues(p.A, _CLUSTER_FACTOR * nA)
        measures = None
    else:
        values = _clustered_schur_eigenvalues(schur, _CLUSTER_FACTOR * nA)
        measures = PBHMeasures(p.A, schur)
    return delta, _snap_to_boundary(p.A, values, delta, nA, discrete, measures)

_SNAP_RADIUS = 1e-3

"""Eigenvalues within this distance (relative to ||A||) of the stability boundary are
tested for being boundary eigenvalues perturbed by rounding (see _snap_to_boundary)."""


def _snap_to_boundary(A, values, delta: float, nA: float, discrete: bool,
                      measures: PBHMeasures | None = None) -> np.ndarray:
    """Move eigenvalues that are on the boundary up to a perturbation of size ``delta``.

    A defective eigenvalue of multiplicity k on the boundary is computed up to ``eps^(1/k)``
    away from it (a chain of four integrators in rotated coordinates comes back as four
    values about 1e-4 off zero), far beyond the boundary tolerance.  For each eigenvalue
    near the boundary, the nearest boundary point ``mu`` is an eigenvalue of a matrix within
    ``sigma_min(A - mu I)`` of ``A`` (the backward-error characterisation of
    pseudospectra; L. N. Trefethen and M. Embree, *Spectra and Pseudospectra*, 2005,
    ch. 2); when that is at most ``delta``, the eigenvalue is replaced by ``mu`` and so
    counts as marginal.  Simple, well-separated eigenvalues are never moved: for them
    ``sigma_min(A - mu I)`` is about their distance to the boundary.

    ``sigma_min(A - mu I)`` is the smallest singular value of the shifted triangular Schur
    factor ``T - mu I`` (``A = Q T Q^H``, ``Q`` unitary), found by Golub-Kahan (Lanczos)
    bidiagonalization of its inverse (G. H. Golub and W. Kahan, "Calculating the singular
    values and pseudo-inverse of a matrix", J. SIAM Numer. Anal. Ser. B 2(2), 205-224,
    1965): ``O(n^2)`` per eigenvalue after one Schur form, computed only when some
    eigenvalue needs the test (see :mod:`plantcore.structure.pbh_measures`).  ``measures``
    may hand in the Schur form of a matrix orthogonally similar to ``A``.
    """
    out = np.array(values, dtype=complex)
    all_values = np.asarray(values, dtype=complex)
    todo, points = [], []
    for i, v in enumerate(out):
        if discrete:
            r = abs(v)
            gap = abs(r - 1.0)
            mu = v / r if r > 0 else 1.0 + 0j
        else:
            gap = abs(v.real)
            mu = complex(0.0, v.imag)
        if gap <= delta or gap > _SNAP_RADIUS * max(nA, 1.0 if discrete else nA):
            continue
        # Another eigenvalue much closer to mu (a true boundary eigenvalue beside a slow
        # stable one) explains a small sigma_min(A - mu I) by itself: leave v alone.
        others = np.delete(all_values, i)
        if others.size and np.min(np.abs(others - mu)) < 0.1 * abs(v - mu):
            continue
        todo.append(i)
        points.append(mu)
    if todo:
        # sigma_min(A - mu I) = sigma_min(A - conj(mu) I) for real A: one evaluation per pair
        measures = PBHMeasures(A) if measures is None else measures
        keys = [_upper(mu) for mu in points]
        distinct = list(dict.fromkeys(keys))
        found = dict(zip(distinct, measures.smallest(np.zeros((A.shape[0], 0)), distinct, "c")))
        for i, mu, key in zip(todo, points, keys):
            if found[key] <= delta:
                out[i] = mu
    return out


def _upper(lam) -> complex:
    """The member of ``{λ, conj(λ)}`` with ``Im >= 0``.

    For real ``A`` and ``M``, ``[A - conj(λ) I, M]`` is the complex conjugate of
    ``[A - λI, M]`` and has the same singular values, so margins and distances only need
    the closed upper half-plane.
    """
    lam = complex(lam)
    return lam.conjugate() if lam.imag < 0 else lam


def _margins(measures: PBHMeasures, X, side: str, values, cache: dict) -> list[float]:
    """``sigma_min([A - λI, X])`` (side ``"c"``) or ``sigma_min([A - λI; X])`` (side
    ``"o"``) for each of ``values``, on the Schur form held by ``measures``; each distinct
    ``λ`` (up to conjugation) is evaluated once, and ``cache`` maps ``_upper(λ)`` to the
    value and is filled in."""
    keys = [_upper(lam) for lam in values]
    todo = list(dict.fromkeys(k for k in keys if k not in cache))
    for key, value in zip(todo, measures.smallest(X, todo, side, rtol=MARGIN_RESIDUAL)):
        cache[key] = float(value)
    return [cache[k] for k in keys]


def _orthonormal_pair(T, T_inv) -> bool:
    """True when ``T`` (n x n) is orthogonal with ``T_inv = T^T`` to ``1e2 n eps``, checked
    in ``O(n^2)`` (entrywise, and ``T^T T x = x`` for one random unit ``x``).  Then
    ``T_inv A T`` is an orthogonal similarity of ``A``: every shift ``A - mu I`` keeps its
    singular values up to that relative level."""
    n = T.shape[0]
    level = 1e2 * n * _EPS
    if T_inv.shape != (n, n) or np.max(np.abs(T_inv - T.T)) > level:
        return False
    x = np.random.default_rng(7).standard_normal(n)
    x /= np.linalg.norm(x)
    return bool(np.linalg.norm(T.T @ (T @ x) - x) <= level)


def _sort_key(value: complex, discrete: bool):
    growth = abs(value) if discrete else value.real
    return (-growth, -value.imag)


def _mode_table(kd, p, narrow_margin: float, whole: PBHMeasures | None = None) -> list[Mode]:
    """The per-mode classification from a decomposition and its prepared model (internal).

    ``whole`` may hand in the measures of ``p.A`` (and so its Schur form) that the caller
    shares with other sections (:func:`plantcore.analyze`)."""
    n = p.model.n
    if n == 0:
        return []
    discrete = p.model.is_discrete
    nA = frobenius(p.A)
    delta = _boundary_delta(nA, discrete)
    cluster_tol = _CLUSTER_FACTOR * nA
    scale = float(p.scale)
    sizes = tuple(kd.sizes)
    n1, n2, n3, _ = sizes
    T_e = kd.T / p.s[:, None]           # bases in equilibrated coordinates
    Ti_e = kd.T_inv * p.s[None, :]
    # Controllable subsystem: orthonormal basis [T1, T2] of the controllable subspace (the
    # model itself when it is controllable: an orthogonal change of basis leaves the
    # singular values of [A - λI, B] unchanged).  Each matrix whose margins are measured
    # gets one Schur form, computed on first use (see plantcore.structure.pbh_measures).
    whole = PBHMeasures(p.A) if whole is None else whole
    if n1 + n2 == n:
        on_R, B_R = whole, p.B_dec
    else:
        V_R = T_e[:, :n1 + n2]
        on_R, B_R = PBHMeasures(V_R.T @ p.A @ V_R), V_R.T @ p.B_dec
    # Observable quotient: orthonormal basis of the complement of N = span[T2, T4].
    N = np.hstack([T_e[:, n1:n1 + n2], T_e[:, n1 + n2 + n3:]])
    if N.shape[1]:
        U_O = _complement(N, n)
        on_O, C_O = PBHMeasures(U_O.T @ p.A @ U_O), p.C_dec @ U_O
    else:
        on_O, C_O = whole, p.C_dec
    cuts = np.cumsum((0,) + sizes)
    modes: list[Mode] = []
    Az = kd.model.A
    cache_R: dict = {}
    cache_c: dict = {}
    cache_O: dict = {}
    cache_o: dict = {}
    for i, name in enumerate(PART_NAMES):
        sl = slice(cuts[i], cuts[i + 1])
        T_part, Ti_part = T_e[:, sl], Ti_e[sl, :]
        if cuts[i + 1] - cuts[i] == n and _orthonormal_pair(T_part, Ti_part):
            # a part that is the whole model in orthonormal coordinates: its eigenvalues
            # and boundary test come from the model's own Schur form (no second one)
            values = _clustered_schur_eigenvalues(whole.schur, cluster_tol)
            values = _snap_to_boundary(p.A, values, delta, nA, discrete, whole)
        else:
            values = _clustered_eigenvalues(Az[sl, sl], cluster_tol)
            if values.size:
                # the part's block in equilibrated coordinates, for the boundary test
                block = (Ti_part @ p.A) @ T_part
                values = _snap_to_boundary(block, values, delta, nA, discrete)
        controllable = i in (0, 1)
        observable = i in (0, 2)
        # Controllable modes on the controllable subsystem, the others on the whole model
        # (dually for observability).
        if controllable:
            cms = _margins(on_R, B_R, "c", values, cache_R)
        else:
            cms = _margins(whole, p.B_dec, "c", values, cache_c)
        if observable:
            oms = _margins(on_O, C_O, "o", values, cache_O)
        else:
            oms = _margins(whole, p.C_dec, "o", values, cache_o)
        part_modes = []
        for lam, cm, om in zip(values, cms, oms):
            lam = complex(lam)
            cm, om = cm / scale, om / scale
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
        Relative rank tolerance of the Kalman decomposition (see :mod:`plantcore.core.rank`).
    narrow_margin : float, optional
        Margin under which a mode that passes a test is flagged ``narrow``; default
        :data:`NARROW_MARGIN` (``1e-4``), whose reasoning is documented there.

    Returns
    -------
    list of Mode
        One entry per eigenvalue, with multiplicity (``n`` entries), grouped by Kalman part
        in the order of :data:`plantcore.structure.kalman.PART_NAMES`; within a part the least stable
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
    input-scaled model and relative to its scale (see the module notes).  A conjugate pair
    shares one evaluation (for real data the singular values at ``λ`` and ``conj(λ)``
    coincide).  Each value is measured on one Schur form per matrix (the whole model, the
    controllable subsystem, the observable quotient): a triangular-pentagonal QR and a
    Golub-Kahan (Lanczos) iteration on the triangle's inverse, ``O(n^2 m)`` time and
    ``O(n^2)`` memory per eigenvalue, ``O(n^3)`` in all (see
    :mod:`plantcore.structure.pbh_measures`; an attained value, so an upper bound: the
    iteration stops at a relative Ritz residual of
    :data:`plantcore.structure.pbh_measures.MARGIN_RESIDUAL`, so the value exceeds the
    dense SVD's by at most about ``1e-6`` of itself (measured: ``3.5e-9`` at most on 40
    models), or lies at the rounding level ``~1e-15`` of the scale).

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
    _check_narrow(narrow_margin)
    p = _prepare(model, tol)
    with threads_for_size(p.model.n):
        kd = kalman_decomposition(model, tol)
        return _mode_table(kd, p, narrow_margin)


def _check_narrow(narrow_margin) -> None:
    if isinstance(narrow_margin, bool) or not isinstance(narrow_margin, (int, float)) \
            or not math.isfinite(narrow_margin) or narrow_margin < 0:
        raise ValueError(f"narrow_margin must be a non-negative number, got {narrow_margin!r}.")
