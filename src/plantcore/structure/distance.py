"""Distance of a model to the nearest uncontrollable (unobservable) model.

``min over complex λ of sigma_min([A - λI, B])`` (and the dual with ``C``), estimated by a
local descent from the eigenvalues with the smallest PBH margins; the conventions of scale
are those of :mod:`plantcore.structure.modes`.  See :func:`distance_to_uncontrollability`
for the method, its references and how it can fail.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import as_model
from plantcore.core.safe_norms import frobenius
from plantcore.core.wording import shown_eigenvalue
from plantcore.structure.kalman import _prepare
from plantcore.structure.modes import _CLUSTER_FACTOR, _EPS, _clustered_eigenvalues, _upper
from plantcore.structure.pbh_measures import PBHMeasures, one_blas_thread, threads_by_size

__all__ = ["DistanceEstimate", "distance_to_uncontrollability", "distance_to_unobservability"]


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

_MAX_STARTS = 3

_START_FACTOR = 2.0

_MAX_ITERATIONS = 30

_CURVATURE_FLOOR = 1e-3

_ZERO_LEVEL = 1e3 * _EPS

_ADJECTIVE = {"uncontrollability": "uncontrollable", "unobservability": "unobservable"}

_BATCH_ELEMENTS = 1 << 21

"""Most complex entries of the stacked ``[A - λI, M]`` in one batched SVD of the searches
(32 MB): searches on large models are evaluated a few at a time, so the memory stays
``O(n^2)`` while small models keep one LAPACK batch per iteration."""


_DENSE_SEARCH_SIZE = 300

"""Above this many states the searches measure on the Schur form of ``A`` (see
:func:`_evaluate_on_schur`) instead of taking a dense SVD per point: ``O(n^2)`` per point
instead of ``O(n^3)``, so the searches stay below the cost of one eigendecomposition."""

_SEARCH_RTOL = 1e-6

"""Lanczos residual tolerance of a measure taken during a search on the Schur form: the
value is attained (an upper bound) at any tolerance, and the direction of the next move
needs no more."""


@dataclass(frozen=True)
class _Search:
    """One local search for ``min_λ sigma_min([A - λI, M])`` (internal).

    With ``measures`` (large models), the points are measured on the Schur form held there,
    ``[A - λI, X]`` (side ``"c"``, ``A`` the state matrix) or ``[A^T - λI, X^T]`` read as
    ``[A_0 - λI; X]`` (side ``"o"``, ``A = A_0^T``); ``state`` keeps the last vector as the
    start of the next measure.  The search runs on the problem divided by ``unit``, an exact
    power of two near the model's scale, so that ``sigma^2`` and the squared singular values
    of the Hessian never overflow or underflow (models with entries near ``1e+-155``); the
    measures on the Schur form, made on the undivided ``A``, are taken at ``unit λ`` and
    divided by ``unit``."""

    A: np.ndarray         # (n, n) real
    M: np.ndarray         # (n, w) real
    start: complex        # in the closed upper half-plane
    radius: float         # length of a move along negative curvature; sets the move tolerance
    measures: object = None
    X: np.ndarray | None = None
    side: str = "c"
    state: dict = field(default_factory=dict)
    unit: float = 1.0     # A, M, start and radius are the problem's divided by this power of 2


class _Evaluation:
    """``phi(λ) = sigma_min([A_k - λ_k I, M_k])^2`` with its gradient and Hessian in
    ``(Re λ, Im λ)`` for a stack of searches, from one batched SVD (internal).

    With ``X = [A - λI, M]`` and ``G = X X^H = (A - λI)(A - λI)^H + M M^H``, ``phi`` is the
    smallest eigenvalue ``μ_0 = σ_0^2`` of ``G``, whose eigenvectors are the left singular
    vectors ``u_j`` of ``X``.  Since ``∂G/∂x = 2x I - A - A^T`` and
    ``∂G/∂y = 2y I + i(A - A^T)`` (``λ = x + iy``, ``A`` real), first-order perturbation
    theory gives ``∇phi = 2 (λ - ρ)`` with the Rayleigh quotient ``ρ = u_0^H A u_0`` (written
    as the complex number ``phi_x + i phi_y``), and second-order perturbation theory gives
    ``H_ab = 2 δ_ab - 2 Re Σ_{j>0} conj(w_aj) w_bj / (μ_j - μ_0)`` with
    ``w_aj = u_j^H (∂G/∂a) u_0``.  Where ``μ_0`` is repeated the Hessian is not finite.
    """

    __slots__ = ("gradient", "hxx", "hxy", "hyy", "rho", "sigma")

    def __init__(self, A, M, lam, eye):
        n = A.shape[1]
        X = np.concatenate((A - lam[:, None, None] * eye, M), axis=2)
        U, s, _ = np.linalg.svd(X, full_matrices=False)
        self.sigma = s[:, n - 1]
        u0 = U[:, :, n - 1:]                                  # (k, n, 1)
        Au = A @ u0
        ATu = np.swapaxes(A, 1, 2) @ u0
        self.rho = np.sum(u0.conj() * Au, axis=(1, 2))
        self.gradient = 2.0 * (lam - self.rho)
        W = np.swapaxes(U[:, :, :n - 1].conj(), 1, 2) @ np.concatenate((Au + ATu, Au - ATu), 2)
        wx, wy = -W[:, :, 0], 1j * W[:, :, 1]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            gap = 1.0 / (s[:, :n - 1] ** 2 - s[:, n - 1:] ** 2)
            self.hxx = 2.0 - 2.0 * np.sum((wx.real ** 2 + wx.imag ** 2) * gap, axis=1)
            self.hyy = 2.0 - 2.0 * np.sum((wy.real ** 2 + wy.imag ** 2) * gap, axis=1)
            self.hxy = -2.0 * np.sum((wx.conj() * wy).real * gap, axis=1)

    def step(self, expand, radius):
        """``(move, newton, predicted)``: proposed moves (complex), whether each is a Newton
        move, and the decrease of ``phi`` that Newton's model predicts (0 otherwise).

        Newton's move where the Hessian is positive definite (both curvatures above
        ``_CURVATURE_FLOOR``); elsewhere the majorization move ``λ -> ρ`` stretched by
        ``expand`` (1, 2, 4, ... while such moves keep being accepted), plus a move of length
        ``radius`` along the direction of negative curvature when the gradient has no
        component along it (a real ``λ`` whose minimum lies off the real axis), or in the
        direction ``+i`` where the smallest singular value is repeated and the gradient
        vanishes (no Hessian exists there).
        """
        a, b, c = self.hxx, self.hxy, self.hyy
        gx, gy = self.gradient.real, self.gradient.imag
        with np.errstate(invalid="ignore", over="ignore"):
            half = 0.5 * (a - c)
            root = np.hypot(half, b)
            h_min = 0.5 * (a + c) - root
            newton = np.isfinite(h_min) & (h_min > _CURVATURE_FLOOR)
            det = np.where(newton, a * c - b * b, 1.0)
            dx = np.where(newton, -(c * gx - b * gy) / det, 0.0)
            dy = np.where(newton, -(a * gy - b * gx) / det, 0.0)
        predicted = np.where(newton, -0.5 * (gx * dx + gy * dy), 0.0)
        move = np.where(newton, dx + 1j * dy, -expand * self.gradient / 2.0)
        flat = np.isfinite(h_min) & (h_min < 0.0)
        if flat.any():
            # Unit eigenvector of the smallest curvature, then a push along it where the
            # gradient does not already point that way.
            vx = np.where(half <= 0, root - half, b)
            vy = np.where(half <= 0, -b, -(root + half))
            vx, vy = np.where(b == 0, (half <= 0) * 1.0, vx), np.where(b == 0, (half > 0) * 1.0, vy)
            norm = np.hypot(vx, vy)
            vx, vy = vx / norm, vy / norm
            gv = gx * vx + gy * vy
            push = flat & (np.abs(gv) <= 1e-3 * radius)
            if push.any():
                sign = np.where(gv > 0, -1.0, np.where((gv == 0) & (vy < 0), -1.0, 1.0))
                move = np.where(push, move + sign * radius * (vx + 1j * vy), move)
        # A repeated smallest singular value (a cone point, no Hessian) with no usable
        # gradient: step off it in the direction +i (toward the upper half-plane).
        stuck = ~np.isfinite(h_min) & (np.abs(self.gradient) <= 1e-3 * radius)
        if stuck.any():
            move = np.where(stuck, move + 1j * radius, move)
        return move, newton, predicted


def _evaluate_on_schur(searches: list[_Search], idx: np.ndarray, lam: np.ndarray) -> _Evaluation:
    """:class:`_Evaluation` of large searches, measured on the Schur form (internal).

    ``sigma_min`` and the left singular vector ``u_0`` come from
    :meth:`plantcore.structure.pbh_measures.PBHMeasures.smallest_with_vector` (``O(n^2 m)``
    per point, started from the previous vector of the same search); the gradient is the
    exact ``2 (λ - ρ)``.  The Hessian, which would need every singular vector, is replaced
    by a secant (BFGS) model built from the gradients along the search
    (:func:`_secant_hessian`), starting from ``2 I``, the Hessian of the majorizing
    quadratic: the first move is the majorization move ``λ -> ρ`` and the next ones
    quasi-Newton moves, safeguarded as in :func:`_descend`.
    """
    sigma = np.empty(idx.size)
    rho = np.empty(idx.size, dtype=complex)
    hessians = np.empty((idx.size, 2, 2))
    for row, (j, point) in enumerate(zip(idx, lam)):
        search = searches[j]
        value, vector, state = search.measures.smallest_with_vector(
            search.X, point * search.unit, search.side, start=search.state.get("z"),
            rtol=_SEARCH_RTOL)
        search.state["z"] = state
        u = vector if search.side == "c" else np.conj(vector)
        sigma[row] = value / search.unit
        rho[row] = np.vdot(u, search.A @ u)
        hessians[row] = _secant_hessian(search.state, complex(point), 2.0 * (point - rho[row]))
    ev = object.__new__(_Evaluation)
    ev.sigma, ev.rho = sigma, rho
    ev.gradient = 2.0 * (lam - rho)
    ev.hxx, ev.hxy, ev.hyy = hessians[:, 0, 0], hessians[:, 0, 1], hessians[:, 1, 1]
    return ev


def _secant_hessian(state: dict, point: complex, gradient: complex) -> np.ndarray:
    """The 2 x 2 Hessian model of ``phi`` in ``(Re λ, Im λ)`` of one search, updated by the
    BFGS secant formula from the gradient at the previous point it was measured at
    (Nocedal and Wright 2006, ch. 6); it starts from ``2 I``, the Hessian of the
    majorizing quadratic, and an update that would lose positive definiteness is skipped."""
    H = state.get("H", 2.0 * np.eye(2))
    if "x" in state:
        step = point - state["x"]
        change = gradient - state["g"]
        s = np.array([step.real, step.imag])
        y = np.array([change.real, change.imag])
        sy = float(s @ y)
        Hs = H @ s
        sHs = float(s @ Hs)
        if sy > 1e-12 * frobenius(s) * frobenius(y) and sHs > 0:
            H = H - np.outer(Hs, Hs) / sHs + np.outer(y, y) / sy
    state["H"], state["x"], state["g"] = H, point, gradient
    return H


def _evaluate(searches: list[_Search], idx: np.ndarray, lam: np.ndarray) -> _Evaluation:
    """:class:`_Evaluation` of the searches ``idx`` at the points ``lam``, in batches of at
    most :data:`_BATCH_ELEMENTS` entries (every ``M`` padded with zero columns to the widest,
    which leaves the singular values and left singular vectors unchanged); on the Schur
    form for large searches (:func:`_evaluate_on_schur`)."""
    if searches[0].measures is not None:
        return _evaluate_on_schur(searches, idx, lam)
    n = searches[0].A.shape[0]
    w = max(s.M.shape[1] for s in searches)
    eye = np.eye(n)
    per_batch = max(1, _BATCH_ELEMENTS // (n * (n + w)))
    parts = []
    for start in range(0, idx.size, per_batch):
        chunk = idx[start:start + per_batch]
        A = np.stack([searches[j].A for j in chunk])
        M = np.zeros((chunk.size, n, w))
        for row, j in enumerate(chunk):
            M[row, :, :searches[j].M.shape[1]] = searches[j].M
        parts.append(_Evaluation(A, M, lam[start:start + per_batch], eye))
    if len(parts) == 1:
        return parts[0]
    joined = object.__new__(_Evaluation)
    for name in _Evaluation.__slots__:
        setattr(joined, name, np.concatenate([getattr(part, name) for part in parts]))
    return joined


def _descend(searches: list[_Search]) -> list[tuple[float, complex]]:
    """Run the local searches side by side; ``(sigma_min, λ)`` at the last accepted point.

    Every iteration evaluates all the active searches in batched SVDs (see
    :func:`_evaluate`).  A proposed move
    is accepted when it lowers ``phi``.  A rejected move is replaced by the plain
    majorization move ``λ -> ρ``, which never increases ``phi``: with ``u_0`` fixed,
    ``u_0^H G(μ) u_0 = u_0^H G(λ) u_0 - |λ - ρ|^2 + |μ - ρ|^2`` for every ``μ``, and
    ``phi(μ)`` is at most this (the alternating minimization over ``u`` and ``λ`` of
    ``||u^H [A - λI, M]||``).  Newton moves are capped by a trust length that is cut to a
    quarter of a rejected move and doubled past an accepted one (Nocedal and Wright 2006,
    ch. 4).  A search ends when a plain majorization move is rejected (possible only
    through rounding), when a move is below ``1e-12`` relative to ``max(|λ|, radius)``,
    when Newton's model predicts a gain in ``sigma_min`` below ``1e-10`` relative, when an
    accepted move gains less than ``1e-13`` relative, or after ``_MAX_ITERATIONS``
    evaluations.  The value returned for each search is the singular value computed at the
    point returned.
    """
    k = len(searches)
    lam = np.array([s.start for s in searches], dtype=complex)
    radius = np.array([s.radius for s in searches])
    ev = _evaluate(searches, np.arange(k), lam)
    sigma, rho = ev.sigma.copy(), ev.rho.copy()
    expand = np.ones(k)
    move, newton, predicted = ev.step(expand, radius)
    plain = np.zeros(k, dtype=bool)       # the pending move is the plain majorization move
    trust = np.full(k, np.inf)            # longest Newton move, after a rejected one
    active = np.ones(k, dtype=bool)
    xtol = 1e-12 * np.maximum(np.abs(lam), radius)
    for _ in range(_MAX_ITERATIONS):
        active &= (np.abs(move) > xtol) & ~(newton & (predicted <= 2e-10 * sigma ** 2))
        if not active.any():
            break
        idx = np.flatnonzero(active)
        length = np.abs(move[idx])
        cap = newton[idx] & (length > trust[idx])
        move[idx[cap]] *= trust[idx[cap]] / length[cap]
        trial = lam[idx] + move[idx]
        te = _evaluate(searches, idx, trial)
        accept = te.sigma < sigma[idx]
        acc = idx[accept]
        active[acc[te.sigma[accept] >= (1.0 - 1e-13) * sigma[acc]]] = False
        lam[acc] = trial[accept]
        sigma[acc] = te.sigma[accept]
        rho[acc] = te.rho[accept]
        expand[acc] = np.where(newton[acc] | plain[acc], 1.0, 2.0 * expand[acc])
        grown = acc[newton[acc]]
        trust[grown] = np.maximum(trust[grown], 2.0 * np.abs(move[grown]))
        next_move, next_newton, next_predicted = te.step(expand[idx], radius[idx])
        move[acc] = next_move[accept]
        newton[acc] = next_newton[accept]
        predicted[acc] = next_predicted[accept]
        plain[acc] = False
        # A rejected move falls back to the plain majorization move from the same point; a
        # rejected plain majorization move ends the search.
        rej = idx[~accept]
        active[rej[plain[rej]]] = False
        retry = rej[~plain[rej]]
        trust[retry] = np.abs(move[retry]) / 4.0
        move[retry] = rho[retry] - lam[retry]
        plain[retry] = True
        newton[retry] = False
        predicted[retry] = 0.0
        expand[retry] = 1.0
    return [(float(sigma[j]), complex(lam[j])) for j in range(k)]


def _power_of_two_near(x: float) -> float:
    """``2^e`` with ``x = f 2^e``, ``0.5 <= f < 1`` (1.0 for 0 or a non-finite ``x``)."""
    return math.ldexp(1.0, math.frexp(x)[1]) if x > 0 and math.isfinite(x) else 1.0


def _scored_starts(measure, values, known) -> list[tuple[float, complex]]:
    """``(sigma_min, λ)`` at the distinct eigenvalues (upper half-plane), least first;
    ``measure`` maps a list of points to ``sigma_min`` at each."""
    if known is None:
        starts = list(dict.fromkeys(_upper(lam) for lam in values))
        scored = list(zip((float(v) for v in measure(starts)), starts))
    else:
        best: dict = {}
        for value, lam in known:
            lam = _upper(lam)
            best[lam] = min(float(value), best.get(lam, math.inf))
        scored = [(v, lam) for lam, v in best.items()]
    scored.sort(key=lambda t: t[0])
    return scored


def _distances_of(problems) -> list[DistanceEstimate]:
    """Distance estimates for ``(A, M, scale, values, kind, known, measure)`` problems
    (internal).

    ``sigma_min([A - λI, M]) / scale`` is evaluated at the distinct eigenvalues by
    ``measure`` (a function of a list of points; None: on the Schur form of ``A``, see
    :mod:`plantcore.structure.pbh_measures`), or taken from ``known``, pairs
    ``(sigma_min, λ)`` already evaluated on the same ``A, M``; the lowest ones are refined
    by :func:`_descend`, all problems together.
    """
    results: list = [None] * len(problems)
    searches, owners = [], []
    prepared = []
    for i, problem in enumerate(problems):
        A, M, scale, values, kind, known, measure = problem[:7]
        on_schur = problem[7] if len(problem) > 7 and A.shape[0] > _DENSE_SEARCH_SIZE else None
        n = A.shape[0]
        if n == 0:
            results[i] = DistanceEstimate(
                math.inf, None, kind, "a model without states has no modes to lose.")
            prepared.append(None)
            continue
        scale = float(scale)
        if known is not None:
            known = [(float(v) * scale, lam) for v, lam in known]
        if measure is None and known is None:
            on_A = PBHMeasures(A)

            def measure(points, on_A=on_A, M=M):
                return on_A.smallest(M, points, "c")
        scored = _scored_starts(measure, values, known)
        best_value, best_at = scored[0]
        if best_value / scale <= _ZERO_LEVEL:
            method = (f"smallest singular value evaluated at the eigenvalues; it is at the "
                      f"rounding level at {_short(shown_eigenvalue(best_at, frobenius(A)))}, so the model is numerically "
                      f"{_ADJECTIVE[kind]} there and no search was needed")
            results[i] = DistanceEstimate(float(best_value / scale), best_at, kind, method)
            prepared.append(None)
            continue
        tried = [t for t in scored if t[0] <= _START_FACTOR * best_value][:_MAX_STARTS]
        # the searches run on the problem divided by an exact power of two near its scale
        norm_A = frobenius(A)
        unit = _power_of_two_near(scale if scale > 0 else norm_A)
        A_u, M_u = A / unit, M / unit
        freq = norm_A / unit / max(1, n)
        for _, lam in tried:
            lam_u = complex(lam) / unit
            radius = 0.05 * max(abs(lam_u), 0.1 * freq, 1e-300)
            if on_schur is None:
                searches.append(_Search(A_u, M_u, lam_u, radius, unit=unit))
            else:
                searches.append(_Search(A_u, M_u, lam_u, radius, *on_schur, unit=unit))
            owners.append(i)
        prepared.append((scale, kind, len(scored), len(tried), best_value, best_at,
                         on_schur is not None))
    if searches:
        # many small batched SVDs (small models) or level-2 measures on the Schur form
        # (large models) per iteration: faster on one BLAS thread
        with one_blas_thread():
            found = _descend(searches)
        for (i, (value, at)), search in zip(zip(owners, found), searches):
            value, at = value * search.unit, at * search.unit
            scale, kind, n_scored, n_tried, best_value, best_at, large = prepared[i]
            if value < best_value:
                best_value, best_at = value, at
            prepared[i] = (scale, kind, n_scored, n_tried, best_value, best_at, large)
    for i, item in enumerate(prepared):
        if item is None:
            continue
        scale, kind, n_scored, n_tried, best_value, best_at, large = item
        search = ("a safeguarded quasi-Newton (secant) search measured on the Schur form"
                  if large else "a safeguarded Newton search")
        method = (f"smallest singular value evaluated at each of the {n_scored} distinct "
                  f"eigenvalue(s) (up to conjugation), then refined from the {n_tried} lowest "
                  f"(those within a factor {_START_FACTOR:g} of the least, at most "
                  f"{_MAX_STARTS}) by {search} in the complex plane; the "
                  "value is a singular value computed at the point reported and the search is "
                  "local, hence an upper bound on the true distance")
        results[i] = DistanceEstimate(float(best_value / scale), best_at, kind, method)
    return results


def _distance(A, M, scale, values, kind: str, known=None) -> DistanceEstimate:
    """Estimate ``min_λ sigma_min([A - λI, M]) / scale`` by local searches from eigenvalues.

    ``known`` optionally gives ``(value, λ)`` pairs already evaluated exactly (the mode
    table's margins, relative to ``scale``), which then replace the evaluations at the
    eigenvalues.
    """
    return _distances_of([(A, M, scale, values, kind, known, None)])[0]


def _short(lam: complex) -> str:
    lam = complex(lam)
    if lam.imag == 0:
        return f"lambda = {lam.real:.4g}"
    return f"lambda = {lam.real:.4g} {'+' if lam.imag > 0 else '-'} {abs(lam.imag):.4g}j"


def _distances(p, modes=None, whole=None) -> tuple[DistanceEstimate, DistanceEstimate]:
    """Both distance estimates for a prepared model (internal).

    ``whole`` may hand in the PBH measures of ``p.A`` (its Schur form) shared with the mode
    table and the Gramians (:func:`plantcore.analyze`).

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
        nA = frobenius(p.A)
        values = _clustered_eigenvalues(p.A, _CLUSTER_FACTOR * nA)
    # one Schur form of A serves both sides: [A^T - λI, C^T] is the transpose of
    # [A - λI; C], with the same singular values
    on_A = PBHMeasures(p.A) if whole is None else whole
    return tuple(_distances_of([
        (p.A, p.B_dec, p.scale, values, "uncontrollability", known_c,
         lambda points: on_A.smallest(p.B_dec, points, "c"), (on_A, p.B_dec, "c")),
        (p.A.T, p.C_dec.T, p.scale, values, "unobservability", known_o,
         lambda points: on_A.smallest(p.C_dec, points, "o"), (on_A, p.C_dec, "o"))]))


@threads_by_size()
def distance_to_uncontrollability(model) -> DistanceEstimate:
    """Estimate how far the model is from the nearest uncontrollable model.

    The distance (Eising 1984) is

    .. math::

        d_c = \\min_{\\lambda \\in \\mathbb{C}} \\sigma_{\\min}([A - \\lambda I,\\; B]),

    the norm of the smallest perturbation ``[ΔA, ΔB]`` that makes the pair uncontrollable.
    It is measured on the equilibrated, input-scaled model relative to its scale, like
    every margin in plantcore (see :mod:`plantcore.structure.modes`).

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])

    Returns
    -------
    DistanceEstimate
        ``value`` is an **estimate and an upper bound** on ``d_c`` (relative to the model's
        scale); ``at`` is the point ``λ`` where it was found.

    Notes
    -----
    How the estimate is found:

    1. ``sigma_min([A - λI, B])`` is evaluated at every distinct eigenvalue of ``A`` (one
       of each conjugate pair: the function is symmetric about the real axis for real
       data); it is small there when a mode is nearly uncontrollable.  When the least of
       these is at the rounding level (``1e3 eps`` relative) the model is numerically
       uncontrollable and no search is made.
    2. From the lowest of them (those within a factor 2 of the least, at most 3) local
       searches minimize ``phi(λ) = sigma_min^2`` over the complex plane, side by side in
       batched SVDs.  With ``u_0`` the left singular vector, ``∇phi = 2 (λ - ρ)`` where
       ``ρ = u_0^H A u_0``, and the Hessian follows from second-order perturbation theory
       of the smallest eigenvalue of ``(A - λI)(A - λI)^H + B B^H`` (Lancaster 1964), using
       all left singular vectors of the same SVD.  Each step is a Newton step where the
       Hessian is positive definite, capped by a trust length, and otherwise the move
       ``λ -> ρ`` (lengthened while it keeps succeeding), which minimizes the majorizing
       quadratic ``u_0^H G(μ) u_0`` and so never increases ``phi``; a move that does not
       lower ``phi`` is replaced by ``λ -> ρ``.  At a real ``λ`` with negative curvature
       across the real axis the search is pushed off the axis.  A search stops when
       Newton's model predicts a relative gain below ``1e-10``, or after 30 evaluations.
    3. The least value found is returned; it is a singular value computed at ``at``, so
       ``d_c <= value`` always holds.  The searches are local and may miss a deeper
       minimum away from the eigenvalues, so the value is an estimate of ``d_c``, not a
       certificate of it.  Methods with a guaranteed global minimum exist (Gu 2000) but
       cost ``O(n^4)`` or more.

    A typical 20-state model costs about a dozen SVDs of ``n x (n + m)`` complex matrices
    for both distances together.  Above 300 states a dense SVD per point would cost more
    than the whole eigendecomposition, so the searches measure instead on the Schur form
    of ``A`` that the starts already used (``O(n^2 m)`` per point, the Lanczos iteration of
    :mod:`plantcore.structure.pbh_measures` started from the previous point's vector), with
    the exact gradient and a BFGS secant model of the Hessian (Nocedal and Wright 2006,
    ch. 6) in place of the second-order perturbation formula, which needs every singular
    vector; the value is still a singular value attained at ``at``, an upper bound.

    References
    ----------
    .. [1] R. Eising, "Between controllable and uncontrollable", Systems & Control Letters
       4(5), 263-264, 1984.
    .. [2] P. Lancaster, "On eigenvalues of matrices dependent on a parameter", Numerische
       Mathematik 6, 377-387, 1964.
    .. [3] J. Nocedal and S. J. Wright, *Numerical Optimization*, 2nd ed., Springer, 2006
       (trust regions, ch. 4).
    .. [4] M. Gu, "New methods for estimating the distance to uncontrollability", SIAM J.
       Matrix Analysis and Applications 21(3), 989-1003, 2000.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> d = pc.structure.distance_to_uncontrollability(([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [0.0]], [[1.0, 1.0]]))
    >>> d.value < 1e-15
    True
    """
    return _distance_of_model(model, 0)


def _distance_of_model(model, which: int) -> DistanceEstimate:
    """One of the two estimates of a model, computed on the model divided by an exact power
    of two near ``||A||_F`` (its relative value is unchanged, ``at`` is multiplied back), so
    that no square overflows or underflows for entries near ``1e+-155`` or beyond."""
    model = as_model(model)
    unit = _power_of_two_near(frobenius(model.A))
    if unit != 1.0:
        model = model.replace(A=model.A / unit, B=model.B / unit, C=model.C / unit,
                              D=model.D / unit)
    estimate = _distances(_prepare(model, None))[which]
    if unit == 1.0 or estimate.at is None:
        return estimate
    return dataclasses.replace(estimate, at=complex(estimate.at) * unit)


@threads_by_size()
def distance_to_unobservability(model) -> DistanceEstimate:
    """Estimate how far the model is from the nearest unobservable model.

    The dual of :func:`distance_to_uncontrollability`:
    ``min over λ of sigma_min([A - λI; C])``, relative to the model's scale, found the same
    way and likewise an estimate and an upper bound.

    Examples
    --------
    >>> import plantcore as pc
    >>> d = pc.structure.distance_to_unobservability(([[-1.0]], [[1.0]], [[1.0]]))
    >>> 0.0 < d.value <= 1.0
    True
    """
    return _distance_of_model(model, 1)
