"""The four-part Kalman decomposition.

The state space splits into four parts, in this order:

1. ``controllable_observable``: a complement of (R ∩ N) in R,
2. ``controllable_unobservable``: R ∩ N,
3. ``uncontrollable_observable``: a complement of R + N,
4. ``uncontrollable_unobservable``: a complement of (R ∩ N) in N,

where R is the controllable subspace and N the unobservable subspace.  In these
coordinates (``x = T z``) the model has the exact zero pattern::

    A = [[A11, 0,   A13, 0  ],      B = [[B1],      C = [C1, 0, C3, 0]
         [A21, A22, A23, A24],           [B2],
         [0,   0,   A33, 0  ],           [0 ],
         [0,   0,   A43, A44]]           [0 ]]

The module is a little over 600 lines: the decomposition, its two routes to part 4 and the
final zero-pattern transformation share one prepared model and read best together.
"""

from __future__ import annotations

import collections
import dataclasses
import functools
import math
import threading
import warnings
import weakref
import zlib
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
import scipy.linalg
from scipy.linalg import lapack

from plantcore.core.derived_names import derived_state_names
from plantcore.core.equilibration import equilibrate, io_scaled
from plantcore.core.errors import AccuracyWarning, NumericalBreakdown
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import RankDecision, any_fragile, resolve_tolerance
from plantcore.core.safe_norms import frobenius
from plantcore.structure.balancing_connectivity import balancing_connectivity
from plantcore.structure.certificate import modal_certificate
from plantcore.structure.feedback_count import resolve_uncounted
from plantcore.structure.pbh_measures import one_blas_thread
from plantcore.structure.reconcile import (
    certificate_decisions,
    certificate_finds_more,
    confirm_window,
    deflation_allowed,
    spectral_decomposition,
    supersede,
)
from plantcore.structure.staircase import _input_gains, _scale_of
from plantcore.structure.staircase_kernels import reduce_staircase

__all__ = ["PART_NAMES", "KalmanDecomposition", "PartSizes", "kalman_decomposition"]

# T with a condition number (in equilibrated coordinates) above the limit is refused: T_inv
# would have fewer than about four correct digits.  Above the warning level the measured
# backward error's warning explains it.
_CONDITION_WARNING = 1e8
_CONDITION_LIMIT = 1e12
# a measured relative backward error above this is reported with an AccuracyWarning
_ACCURACY_WARNING = 1e-8
# up to this many states the accuracy figures are computed exactly (dense products, an SVD)
_EXACT_ACCURACY_STATES = 400

# Part 4 is taken from the quotient by R ∩ N (see _part4_from_quotient) only when the first
# two staircases dropped singular values no larger than this many n * eps (relative to the
# model's scale): then the quotient's data are exact to the rounding that any staircase of
# the whole model makes anyway.
_QUOTIENT_MAX_DROPPED = 1.0

PART_NAMES = (
    "controllable_observable",
    "controllable_unobservable",
    "uncontrollable_observable",
    "uncontrollable_unobservable",
)


class PartSizes(NamedTuple):
    """Dimensions of the four Kalman parts, in state order."""

    controllable_observable: int
    controllable_unobservable: int
    uncontrollable_observable: int
    uncontrollable_unobservable: int


@dataclass(frozen=True)
class _Prepared:
    """A model with its equilibration and rank-decision scaling (internal)."""

    model: StateSpaceModel
    tol: float
    s: np.ndarray          # state scaling, x = diag(s) x_e
    A: np.ndarray          # equilibrated
    B: np.ndarray          # equilibrated, user input units
    C: np.ndarray          # equilibrated, user output units
    B_dec: np.ndarray      # inputs rescaled for rank decisions
    C_dec: np.ndarray      # outputs rescaled for rank decisions
    scale: float

    @functools.cached_property
    def connectivity(self) -> float:
        """How well the balancing is determined (:func:`balancing_connectivity`), computed
        once for the deflation rule and the window rule of a call."""
        return balancing_connectivity(self.A, self.B, self.C)


def _prepare(model, tol) -> _Prepared:
    model = as_model(model)
    tol = resolve_tolerance(tol, model.n)
    eq = equilibrate(model.A, model.B, model.C)
    A, B, C = eq.apply(model.A, model.B, model.C)
    scale = _scale_of(A, B, C)
    B_dec, C_dec = io_scaled(B, C, scale)
    return _Prepared(model, tol, eq.state_scaling, A, B, C, B_dec, C_dec, scale)


def _relabel(decisions, old: str, new: str) -> tuple:
    """The same decisions under another label prefix."""
    return tuple(dataclasses.replace(d, label=new + d.label[len(old):]) if d.label.startswith(old)
                 else d for d in decisions)


@dataclass
class _Nested:
    """The controllability staircase, then the observability staircase of its controllable
    part (internal).

    ``red1`` reduces ``(A, B)`` (equilibrated, decision-scaled inputs; the decision-scaled
    ``C`` carried along) and ``red2`` reduces the dual ``(A11^T, C1^T)`` of the controllable
    part, carrying ``[B1^T; A12^T]`` along, so that in the coordinates
    ``W1 = U1 diag(Z, I)`` every block of the model is available without a product with a
    full matrix.  When the whole state is controllable (``direct``), ``red2`` is computed on
    the original coordinates instead (``W1 = Z``): the staircase of an orthogonally
    transformed model has the same steps and singular values, and ``U1`` is then never
    needed.
    """

    red1: object
    red2: object
    n: int
    nc: int
    n1: int
    direct: bool
    decisions: tuple


def _nested(p: _Prepared, *, keep_A: bool = True) -> _Nested:
    """Run the two nested staircases; ``keep_A=False`` drops what only kalman needs."""
    n = p.model.n
    red1 = reduce_staircase(p.A, p.B_dec, p.C_dec, scale=p.scale, tol=p.tol,
                            label="controllability")
    nc = red1.rank
    label = "observability of the controllable part"
    if nc == n:
        red1 = dataclasses.replace(red1, A=None, B=None, C=None, transforms=[])
        red2 = reduce_staircase(p.A.T, p.C_dec.T, p.B_dec.T, scale=p.scale, tol=p.tol,
                                label=label)
        direct = True
    else:
        A11t = np.array(red1.A[:nc, :nc].T, order="F")
        carried = np.vstack([red1.B[:nc, :].T, red1.A[:nc, nc:].T])
        C1t = red1.C[:, :nc].T
        if not keep_A:
            red1 = dataclasses.replace(red1, A=None)
        red2 = reduce_staircase(A11t, C1t, carried, scale=p.scale, tol=p.tol, label=label,
                                overwrite_a=True)
        del A11t, carried, C1t
        direct = False
    return _Nested(red1, red2, n, nc, red2.rank, direct,
                   tuple(red1.decisions) + tuple(red2.decisions))


def _start(p: _Prepared, *, keep_A: bool):
    """The common start of the decomposition and the minimal realization (internal).

    Returns the input and output gains of the decision scaling, the modal certificate
    (taken first: the staircases overwrite their input), and the two nested staircases.
    """
    g_in = _input_gains(p.B, p.B_dec)
    g_out = _input_gains(p.C.T, p.C_dec.T)
    return g_in, g_out, _certificate(p), _nested(p, keep_A=keep_A)


_RECENT_CERTIFICATES: collections.OrderedDict = collections.OrderedDict()
_RECENT_LIMIT = 4
_RECENT_LOCK = threading.Lock()


def _fingerprint(model) -> int:
    """A checksum of the model's matrices (they are read-only; this guards the cache
    against a user who makes them writeable again)."""
    value = 0
    for X in (model.A, model.B, model.C):
        value = zlib.crc32(np.ascontiguousarray(X).view(np.uint8).ravel(), value)
    return value


def _certificate(p: _Prepared):
    """The modal certificate of a prepared model, shared by the calls on the same model.

    ``kalman_decomposition``, ``minimal_realization`` and ``analyze`` on one model ask
    for the same certificate; the last few are kept (without their Schur form, which only
    the call that computed it reuses), keyed by the model object, the tolerance and a
    checksum of the matrices.
    """
    key = (id(p.model), float(p.tol), _fingerprint(p.model))
    with _RECENT_LOCK:
        hit = _RECENT_CERTIFICATES.get(key)
        if hit is not None and hit[0]() is p.model:
            _RECENT_CERTIFICATES.move_to_end(key)
            return hit[1]
    cert = modal_certificate(p.A, p.B_dec, p.C_dec, scale=p.scale, tol=p.tol, keep_schur=True,
                             deflate=deflation_allowed(
                                 p.s, lambda: p.connectivity, p.tol))
    cert = resolve_uncounted(cert, p.A, p.B_dec, p.C_dec)
    if cert is not None:
        with _RECENT_LOCK:
            _RECENT_CERTIFICATES[key] = (weakref.ref(p.model),
                                         dataclasses.replace(cert, schur=None))
            while len(_RECENT_CERTIFICATES) > _RECENT_LIMIT:
                _RECENT_CERTIFICATES.popitem(last=False)
    return cert


@dataclass(frozen=True)
class KalmanDecomposition:
    """The Kalman decomposition of a model.

    Attributes
    ----------
    model : StateSpaceModel
        The model in the new coordinates ``z`` (``x = T z``), with the zero pattern exact.
    T, T_inv : (n, n) ndarray
        The transformation and its inverse.
    condition : float
        2-norm condition number of the returned ``T`` itself, state scaling included
        (computed from its singular values up to :data:`_EXACT_ACCURACY_STATES` states,
        estimated by power iterations on ``T`` and ``T_inv`` above).  A large value means
        the parts are nearly dependent, or the states have very different units.
    residual : float
        The measured relative backward error of what is returned: the largest of
        ``||T A_z T_inv - A||_F / ||A||_F``, ``||T B_z - B||_F / ||B||_F`` and
        ``||C_z T_inv - C||_F / ||C||_F``.  Computed exactly up to
        :data:`_EXACT_ACCURACY_STATES` states; above, estimated from 16 Gaussian probe
        vectors and doubled, which is above the true value except with probability below
        about ``1e-3`` (common practice for randomized norm estimation).
    condition_equilibrated : float
        The 2-norm condition number of ``T`` in the equilibrated state coordinates, where
        every part has an orthonormal basis (differs from ``condition`` by at most the
        ratio of the largest to the smallest power-of-two state scale).
    """

    model: StateSpaceModel
    T: np.ndarray = field(repr=False)
    T_inv: np.ndarray = field(repr=False)
    condition: float
    sizes: PartSizes
    decisions: tuple
    fragile: bool
    residual: float
    condition_equilibrated: float = math.nan

    def _slice(self, name: str) -> slice:
        if name not in PART_NAMES:
            raise ValueError(f"unknown part {name!r}; choose one of {', '.join(PART_NAMES)}.")
        i = PART_NAMES.index(name)
        start = sum(self.sizes[:i])
        return slice(start, start + self.sizes[i])

    def part(self, name: str) -> StateSpaceModel:
        """The diagonal block of one part, with its rows of ``B`` and columns of ``C``.

        The part carries the model's ``D``, so ``part("controllable_observable")`` has the
        transfer function of the whole model.
        """
        sl = self._slice(name)
        m = self.model
        return StateSpaceModel(m.A[sl, sl], m.B[sl, :], m.C[:, sl], m.D, m.dt,
                               states=m.states[sl], inputs=m.inputs, outputs=m.outputs,
                               name=f"{m.name or 'model'}: {name.replace('_', ' ')}")

    def basis(self, name: str) -> np.ndarray:
        """The columns of ``T`` spanning one part, in the original state coordinates."""
        return self.T[:, self._slice(name)].copy()


def _complement(M: np.ndarray, n: int) -> np.ndarray:
    """Orthonormal basis of the orthogonal complement of the columns of ``M``."""
    k = M.shape[1]
    if k == 0:
        return np.eye(n)
    Q, _ = scipy.linalg.qr(M, mode="full")
    return Q[:, k:]


def kalman_decomposition(model, tol=None) -> KalmanDecomposition:
    """Split a model into its four Kalman parts.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance; default ``5e-11`` of the model's scale, as for
        :func:`plantcore.controllability_staircase` (see :mod:`plantcore.core.rank`).

    Returns
    -------
    KalmanDecomposition

    Notes
    -----
    The construction uses orthogonal staircase reductions on the equilibrated model
    (Van Dooren 1981; Varga 1981) and never the Krylov matrix:

    * the controllability staircase gives an orthonormal basis of R;
    * the observability staircase of the controllable part ``(A11, C V_c)`` splits R into
      R ∩ N (part 2) and its orthogonal complement in R (part 1);
    * part 4 is the orthogonal complement of R ∩ N inside N, found by an observability
      staircase of the model without R ∩ N: the quotient by R ∩ N, whose unobservable
      subspace is N / (R ∩ N) and whose staircase has the whole model's step ranks.  It
      keeps the uncontrollable states' coupling into the controllable ones (splitting the
      uncontrollable part off on its own would be wrong: an uncontrollable state may be
      seen only through that coupling).  The quotient is used only when the first two
      staircases dropped nothing beyond rounding (``n eps`` of the model's scale) and its
      own decisions are clear-cut; otherwise the observability staircase of the whole
      equilibrated model gives N, which sees only the model's own rounding.  Either way
      the decisions are recorded as ``observability``.  When everything is controllable,
      the second staircase already is this one: it is then computed on the model itself
      and its decisions are recorded under both labels.
    * part 3 is the orthogonal complement of R + N.

    Each part has an orthonormal basis; ``T`` is well conditioned unless N is nearly
    inside R + (part 3) directions, which ``condition`` reports.  The model, ``T`` and
    ``T_inv`` are assembled from the staircase forms in the coordinates of the first two
    staircases, where parts 1 and 2 are coordinate blocks: only part 4 couples to part 1,
    so ``T_inv`` follows from projections and a small pseudo-inverse, without inverting
    ``T``.  The zero pattern is then imposed exactly and the size of what was zeroed
    (including what the staircases dropped) is reported as ``residual``.

    On the quotient route the part-4 columns of the model are read from the staircase
    form (part 4 is an invariant subspace there), not multiplied out.

    When N comes from the whole model, the two rank decisions that determine N and R ∩ N
    are made separately; when they are not consistent (only possible when a decision is
    fragile), a :class:`plantcore.NumericalBreakdown` is raised naming the tolerance to
    change.

    References
    ----------
    .. [1] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.
    .. [2] P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
       IEEE Trans. Automatic Control 26(1), 111-129, 1981.
    .. [3] A. Varga, "Numerically stable algorithm for standard controllability form
       determination", Electronics Letters 17(2), 74-75, 1981.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, -2.0, -3.0, -4.0])
    >>> B = np.array([[1.0], [1.0], [0.0], [0.0]])
    >>> C = np.array([[1.0, 0.0, 1.0, 0.0]])
    >>> kd = pc.kalman_decomposition((A, B, C))
    >>> tuple(kd.sizes)
    (1, 1, 1, 1)
    >>> bool(np.allclose(kd.T @ kd.model.A @ kd.T_inv, A))
    True
    """
    # One BLAS thread: the staircase and the certificate issue many small (level-2) calls,
    # which a second thread slows down (measured at n = 1000, 3 inputs and outputs, two
    # threads: 2.8-3.0 s instead of 1.4-1.5 s; at n = 2000 one thread is still faster).
    with one_blas_thread():
        return _decompose(_prepare(model, tol))


def _decompose(p: _Prepared) -> KalmanDecomposition:
    """The decomposition of a prepared model (internal; also used by the minimal
    realization when the staircase and the certificate disagree)."""
    try:
        return _decomposition(p)
    except NumericalBreakdown:
        # the staircase's parts are (nearly) dependent; the certificate may still split
        # the model spectrally
        cert = _certificate(p)
        spectral = spectral_decomposition(p.A, p.B, p.C, cert) if cert is not None else None
        if spectral is None:
            raise
        record = (RankDecision("staircase: the four parts are (nearly) dependent", 0, 0,
                               math.inf, 0.0, p.tol, superseded=True),)
        return _from_spectral(p, spectral, record, cert, cert.sizes())


def _decomposition(p: _Prepared) -> KalmanDecomposition:
    """The decomposition from the staircases, checked against the modal certificate."""
    n = p.model.n
    m = p.model.n_inputs
    g_in, g_out, cert, nest = _start(p, keep_A=True)
    red1, red2, nc, n1 = nest.red1, nest.red2, nest.nc, nest.n1
    decisions_c = nest.decisions
    n2 = nc - n1
    n3 = n - nc
    # The model in the coordinates W1 (equilibrated; B and C in the user's units):
    #   A_w = [[A_oo, 0, A13], [A_uo, A_uu, A23], [0, 0, A22]],  B_w = [B_c; 0],
    #   C_w = [C_o, 0, C2]  with blocks of sizes n1 (observable part of the controllable
    # part), n2 (its unobservable part, R ∩ N) and n3 (the rest).
    B_w = np.zeros((n, m))
    B_w[:nc, :] = red2.C[:m, :].T / g_in[None, :]
    C_w = np.empty((p.model.n_outputs, n))
    C_w[:, :nc] = red2.B.T / g_out[:, None]
    if nest.direct:
        A_w = red2.A.T
        decisions_obs = _relabel(red2.decisions, "observability of the controllable part",
                                 "observability")
        n4 = 0
        N_q = np.zeros((0, 0))
        Lam = None
        W1 = red2.form_U()
        del nest, red1, red2
    else:
        A_w = red1.A                   # reused: A22 and the exact zeros are already there
        A_w[:nc, :nc] = red2.A.T
        A_w[:nc, nc:] = red2.C[m:, :].T
        C_w[:, nc:] = red1.C[:, nc:] / g_out[:, None]
        Cq_t = np.vstack([red2.B[:n1, :], red1.C[:, nc:].T])   # see _part4_from_quotient
        W1 = np.zeros((n, n), order="F")
        W1[:nc, :nc] = red2.form_U()
        W1[nc:, nc:] = np.eye(n3)
        del nest, red2
        W1 = red1.apply_U(W1, overwrite=True)
        del red1
        # Part 4 (the orthogonal complement of R ∩ N inside N) and its W1 coordinates
        # N_q = (N1, N3) in parts 1 and 3, from the quotient by R ∩ N when the first two
        # staircases dropped nothing beyond rounding, else from the whole model.
        found = None
        dropped = max([0.0] + [d.largest_dropped for d in decisions_c])
        if dropped <= _QUOTIENT_MAX_DROPPED * n * np.finfo(float).eps:
            found = _part4_from_quotient(p, A_w, Cq_t, n1, nc)
        if found is None:
            try:
                found = _part4_from_whole_model(p, W1, n1, nc, decisions_c)
            except NumericalBreakdown as exc:
                found = _part4_after_contradiction(p, A_w, Cq_t, n1, nc, exc)
        del Cq_t
        decisions_obs, N_q, T4, Lam = found
        n4 = N_q.shape[1]
        if T4 is None:
            T4 = W1[:, :n1] @ N_q[:n1, :]              # T4 = W1 (N1, 0, N3)
            T4 += W1[:, nc:] @ N_q[n1:, :]
    decisions = decisions_c + decisions_obs
    # Part 4 = {W1 (N1 y, 0, N3 y)}; part 3 = block-3 directions orthogonal to range(N3).
    N1, N3 = N_q[:n1, :], N_q[n1:, :]
    if n4:
        # N3 = Q [R; 0]: Q[:, n4:] spans part 3; pinv(N3) = R^-1 Q[:, :n4]^T
        Q3, R3 = scipy.linalg.qr(N3, mode="full")
        R3 = R3[:n4, :]
        # T = W1 M with M^T M = I + [[0, N1], [N1^T, 0]] on parts 1 and 4, so the singular
        # values of T are sqrt(1 +- sigma_i(N1)), and sigma_max(N1)^2 = 1 - sigma_min(N3)^2
        # (N1^T N1 + N3^T N3 = T4^T T4 = I).  Both ends come from the smaller of the two;
        # from N1 only while 1 - sigma_max(N1)^2 is not a cancellation (>= 0.01, so it keeps
        # all but about two digits), else from the SVD of R3.  sigma_max(N1)^2 is the
        # largest eigenvalue of the n1 x n1 Gram matrix, whose absolute error (about n1 eps)
        # leaves that difference at least ten correct digits.
        smin = None
        if 0 < n1 < n4:
            c2 = float(scipy.linalg.eigh(N1 @ N1.T, eigvals_only=True,
                                         subset_by_index=[n1 - 1, n1 - 1])[0])
            if 1.0 - c2 >= 1e-2:
                smin = np.sqrt(1.0 - c2)
        elif n1 == 0:
            smin = 1.0  # N3 = V3^T T4 has orthonormal columns
        if smin is None:
            smin = float(np.linalg.svd(R3, compute_uv=False)[-1])
        c = np.sqrt(max(0.0, 1.0 - smin * smin))
        sv_max, sv_min = np.sqrt(1.0 + c), np.sqrt(smin * smin / (1.0 + c))
        if sv_min <= np.finfo(float).eps * n * sv_max:
            raise NumericalBreakdown(
                "the four parts are linearly dependent (the transformation is singular); the "
                f"answer depends on the tolerance (tol={p.tol:g}).",
                {"singular_values": np.array([sv_max, sv_min])})
        K = scipy.linalg.solve_triangular(R3, Q3[:, :n4].T)   # pseudo-inverse of N3 (n4 x n3)
        Q3c = Q3[:, n4:]
        del Q3, R3
        condition = float(sv_max / sv_min)
        if condition > _CONDITION_LIMIT:
            raise NumericalBreakdown(
                f"the four parts are nearly dependent (condition number of T {condition:.3g}); "
                "T_inv would not be an accurate inverse. The answer depends on the tolerance "
                f"(tol={p.tol:g}); see the fragile decisions and try a different tol.",
                {"condition": condition})
    else:
        K = np.zeros((0, n3))
        Q3c = None
        condition = 1.0
    n3c = n3 - n4

    def right(X):
        """X M: columns (parts 1, 2 | part 3 | part 4) of X in W1 coordinates."""
        if not n4:
            return X
        out = np.empty((X.shape[0], n), order="F" if X.flags.f_contiguous else "C")
        out[:, :nc] = X[:, :nc]
        out[:, nc:nc + n3c] = X[:, nc:] @ Q3c
        out[:, nc + n3c:] = X[:, :n1] @ N1 + X[:, nc:] @ N3
        return out

    def left(X, part3=None):
        """M^{-1} X: rows (parts 1, 2 | part 3 | part 4) from rows of X in W1 coordinates
        (``part3``: the rows of part 3, when already known)."""
        if not n4:
            return X
        out = np.empty((n, X.shape[1]), order="F" if X.flags.f_contiguous else "C")
        np.matmul(K, X[nc:, :], out=out[nc + n3c:, :])
        KX = out[nc + n3c:, :]
        out[:n1, :] = X[:n1, :]
        out[:n1, :] -= N1 @ KX
        out[n1:nc, :] = X[n1:nc, :]
        out[nc:nc + n3c, :] = Q3c.T @ X[nc:, :] if part3 is None else part3
        return out

    if n4:
        # T = W1 M, built in W1's storage once T_inv = M^-1 W1^T is done; T's part-4
        # columns are T4 itself (= W1 [N1; 0; N3] up to rounding), and the part-3 rows of
        # T_inv are the transposed part-3 columns of T (Q3c^T V3^T = (V3 Q3c)^T).
        T3 = W1[:, nc:] @ Q3c
        Ti_e = left(W1.T, part3=T3.T)
        T_e = W1
        T_e[:, nc:nc + n3c] = T3
        T_e[:, nc + n3c:] = T4
        del T4, T3
        Az = _transform_staircase_model(A_w, nc, n1, N1, N3, Q3c, K, Lam)
    else:
        T_e = W1
        Ti_e = np.array(W1.T)   # a copy: T_e and T_inv are scaled in place below
        Az = A_w
    del W1, A_w
    Bz = left(B_w)
    Cz = right(C_w)
    s = p.s
    T = T_e
    T *= s[:, None]
    T_inv = Ti_e
    T_inv /= s[None, :]
    del T_e, Ti_e
    sizes = PartSizes(n1, n2, n3c, n4)
    decisions = confirm_window(decisions, cert, sizes, state_scaling=p.s,
                               connectivity=lambda: p.connectivity)
    if cert is not None and certificate_finds_more(cert.sizes(), sizes):
        spectral = spectral_decomposition(p.A, p.B, p.C, cert)
        if spectral is not None:
            return _from_spectral(p, spectral, decisions, cert, sizes)
    decisions = decisions + certificate_decisions(cert, sizes, staircase_decisions=decisions)
    _impose_zero_pattern(Az, Bz, Cz, sizes)
    states = derived_state_names(p.model.states, T, T_inv.T)
    new = StateSpaceModel(Az, Bz, Cz, p.model.D, p.model.dt, states=states,
                          inputs=p.model.inputs, outputs=p.model.outputs, name=p.model.name)
    del Az
    return _finish(p.model, new, T, T_inv, sizes, decisions, condition, p.tol)


def _finish(model, new, T, T_inv, sizes, decisions, condition_equilibrated, tol):
    """The result with its measured accuracy (and a warning when it is poor).

    The backward error includes what the rank decisions set to zero, up to the tolerance
    itself; it is reported when it exceeds ``max(1e-8, 10 tol)`` (an ill-conditioned ``T``
    alone is no reason: states in very different units make it so, and the measured error
    says whether it matters).
    """
    residual = backward_error(model, new, T, T_inv)
    condition = condition_number(T, T_inv)
    limit = max(_ACCURACY_WARNING, 10.0 * tol)
    if residual > limit:
        # a decomposition that does not reproduce the model cannot vouch for its parts
        text = (f"the returned decomposition reproduces the model only to a relative "
                f"backward error of {residual:.2g} (measured; limit {limit:.2g})")
        decisions = tuple(decisions) + (RankDecision(
            "accuracy of the decomposition", 0, 0, math.inf, 0.0, tol, conflict=True,
            check_only=True, window_outcome=text),)
        why = (" the parts are nearly dependent or the states' units very different, and"
               if condition > _CONDITION_WARNING else "")
        warnings.warn(
            f"the Kalman decomposition reproduces the model to a relative backward error of "
            f"{residual:.2g} (measured), and its transformation T has condition number "
            f"{condition:.3g}:{why} the answer may depend on the tolerance (marked fragile).",
            AccuracyWarning, stacklevel=3)
    return KalmanDecomposition(new, T, T_inv, condition, sizes, decisions,
                               any_fragile(decisions), residual, condition_equilibrated)


def backward_error(model, new, T, T_inv) -> float:
    """``max(||T A_z T_inv - A||, ||T B_z - B||, ||C_z T_inv - C||)`` relative (Frobenius);
    exact up to :data:`_EXACT_ACCURACY_STATES` states, else a doubled 16-probe estimate."""
    n = model.n
    if n == 0:
        return 0.0
    A, B, C = model.A, model.B, model.C

    def rel(E, X):
        size = float(frobenius(X))
        return float(frobenius(E)) / size if size > 0 else float(frobenius(E))

    errors = [rel(T @ new.B - B, B), rel(new.C @ T_inv - C, C)]
    if n <= _EXACT_ACCURACY_STATES:
        errors.append(rel(T @ (new.A @ T_inv) - A, A))
    else:
        G = np.random.default_rng(20240917).standard_normal((n, 16))
        E = T @ (new.A @ (T_inv @ G)) - A @ G
        errors.append(2.0 * float(frobenius(E)) / 4.0 / max(float(frobenius(A)), 1e-300))
    return max(errors)


def condition_number(T, T_inv) -> float:
    """2-norm condition number of ``T`` (exact up to :data:`_EXACT_ACCURACY_STATES` states,
    else ``||T||_2 ||T_inv||_2`` by 30 power iterations each)."""
    n = T.shape[0]
    if n == 0:
        return 1.0
    if n <= _EXACT_ACCURACY_STATES:
        s = np.linalg.svd(T, compute_uv=False)
        return float(s[0] / s[-1]) if s[-1] > 0 else math.inf

    def norm2(M):
        x = np.random.default_rng(7).standard_normal(n)
        value = 0.0
        for _ in range(30):
            y = M.T @ (M @ x)
            value = math.sqrt(float(frobenius(y)))
            if value == 0.0:
                return 0.0
            x = y / frobenius(y)
        return value

    return norm2(T) * norm2(T_inv)


def _from_spectral(p: _Prepared, spectral, decisions, cert, staircase_sizes):
    """The decomposition the modal certificate supports, built from spectral subspaces
    (see :mod:`plantcore.structure.reconcile`); the staircase's decisions stay in the
    record as superseded."""
    s = p.s
    T = spectral.T * s[:, None]
    T_inv = spectral.T_inv / s[None, :]
    sizes = PartSizes(*spectral.sizes)
    decisions = supersede(decisions) + certificate_decisions(cert, staircase_sizes,
                                                             decided=True)
    states = derived_state_names(p.model.states, T, T_inv.T)
    new = StateSpaceModel(spectral.A, spectral.B, spectral.C, p.model.D, p.model.dt,
                          states=states, inputs=p.model.inputs, outputs=p.model.outputs,
                          name=p.model.name)
    return _finish(p.model, new, T, T_inv, sizes, decisions,
                   float(np.linalg.cond(spectral.T)), p.tol)


class _Part4(NamedTuple):
    """Part 4 as found by one of the two routes (internal)."""

    decisions: tuple        # the observability staircase's decisions
    N_q: np.ndarray         # its W1 coordinates in parts 1 and 3, (n1 + n3, n4), orthonormal
    T4: np.ndarray | None   # part 4 in the equilibrated state coordinates, when formed
    Lam: np.ndarray | None  # N_q^T A_q N_q, when the staircase gave it


def _part4_from_quotient(p: _Prepared, A_w, Cq_t, n1: int, nc: int, *,
                         accept_fragile: bool = False):
    """Part 4 from the quotient of the model by R ∩ N (internal; ``None`` when not clear-cut).

    In the W1 coordinates R ∩ N is the coordinate block ``n1:nc``; it is A-invariant and
    inside ker C, so the model without those rows and columns (parts 1 and 3) is the
    quotient model, whose unobservable subspace is N / (R ∩ N), and its observability
    staircase has the same steps as the whole model's (Kalman 1963).  A basis ``(N1, N3)``
    of it lifts to ``(N1, 0, N3)``: directions in N orthogonal to R ∩ N, which is part 4.
    The quotient is smaller than the model by ``n2`` states, and N contains R ∩ N by
    construction.

    Its data carry the rounding of the first two staircases besides the model's own; the
    caller uses it only when those staircases dropped nothing beyond rounding, and it is
    given up (``None``) when one of its decisions is fragile (unless ``accept_fragile``) or
    the decisions disagree, so that the whole model's staircase, which sees only the
    model's own rounding, decides.
    Returns a :class:`_Part4` with ``N_q`` the ``(n1 + n3, n4)`` orthonormal basis and
    ``Lam = N_q^T A_q N_q``, the quotient's unobservable block, from the staircase form.
    """
    n = A_w.shape[0]
    n3 = n - nc
    nq = n1 + n3
    Aq_t = np.empty((nq, nq), order="F")       # the quotient's A, transposed (dual)
    Aq_t[:n1, :n1] = A_w[:n1, :n1].T
    Aq_t[:n1, n1:] = 0.0                       # A_w[nc:, :n1]: zero, R is invariant
    Aq_t[n1:, :n1] = A_w[:n1, nc:].T
    Aq_t[n1:, n1:] = A_w[nc:, nc:].T
    red3 = reduce_staircase(Aq_t, Cq_t, np.zeros((0, nq)), scale=p.scale, tol=p.tol,
                            label="observability", overwrite_a=True)
    del Aq_t
    n4 = nq - red3.rank
    if n4 > n3 or (any_fragile(red3.decisions) and not accept_fragile):
        return None
    Lam = np.array(red3.A[nq - n4:, nq - n4:].T, order="F")
    return _Part4(tuple(red3.decisions), red3.form_U(n4, first=False), None, Lam)


def _part4_after_contradiction(p: _Prepared, A_w, Cq_t, n1: int, nc: int, exc):
    """Part 4 from the quotient when the whole model's staircase contradicts R ∩ N
    (internal).

    Every unobservable direction of the controllable part is unobservable in the whole
    model, so a whole-model staircase that finds fewer has kept rounding noise as
    couplings (the failure Paige 1981 describes); the quotient by R ∩ N contains R ∩ N by
    construction and decides instead.  The contradicting decisions stay in the record as
    superseded, and the modal certificate checks the result as always.  Re-raises ``exc``
    when the quotient cannot decide either.
    """
    nN = exc.context.get("nN")
    if nN is None:          # another contradiction (the subspaces do not meet as they must)
        raise exc
    found = _part4_from_quotient(p, A_w, Cq_t, n1, nc, accept_fragile=True)
    if found is None:
        raise exc
    n = A_w.shape[0]
    n2 = nc - n1
    record = RankDecision(
        f"observability of the whole model: {nN} unobservable directions, fewer "
        f"than the {n2} of the controllable part (superseded by the quotient by R ∩ N)",
        n - nN, n, math.inf, 0.0, p.tol, superseded=True)
    return found._replace(decisions=(record,) + tuple(found.decisions))


def _part4_from_whole_model(p: _Prepared, W1, n1: int, nc: int, decisions_c):
    """Part 4 from the observability staircase of the whole model (internal).

    The staircase runs on the equilibrated model itself, so that its decisions see only the
    model's own rounding.  N is spanned by the last ``nN`` columns ``W_n`` of its ``U``;
    ``W_n`` is never formed: the products with it are reflector applications.  Raises
    :class:`plantcore.NumericalBreakdown` when N does not contain the R ∩ N found by the
    second staircase (only possible when a decision is fragile).  Returns a
    :class:`_Part4` with ``N_q`` as :func:`_part4_from_quotient` gives it, and ``T4``.
    """
    n = W1.shape[0]
    n2 = nc - n1
    red3 = reduce_staircase(p.A.T, p.C_dec.T, np.zeros((0, n)), scale=p.scale,
                            tol=p.tol, label="observability", need_A=False)
    decisions_obs = tuple(red3.decisions)
    nN = n - red3.rank
    decisions = tuple(decisions_c) + decisions_obs
    if n2 > nN:
        raise NumericalBreakdown(
            f"the rank decisions disagree: the controllable part has {n2} unobservable "
            f"directions but the whole model only {nN}; the answer depends on the tolerance "
            f"(tol={p.tol:g}); try a different tol.",
            {"n2": n2, "nN": nN, "decisions": decisions})
    P = red3.apply_Ut(W1[:, n1:nc])[n - nN:, :]  # W_n^T (R ∩ N): nN x n2, orthonormal
    if n2:                                        # columns when R ∩ N lies in N
        cosines = np.linalg.svd(P, compute_uv=False)
        if cosines.min() < 0.5:
            raise NumericalBreakdown(
                "the unobservable directions found inside the controllable subspace do not "
                f"lie in the unobservable subspace (smallest cosine {cosines.min():.3g}); the "
                f"answer depends on the tolerance (tol={p.tol:g}); try a different tol.",
                {"cosines": cosines, "decisions": decisions})
    # Part 4, the orthogonal complement of R ∩ N inside N:  T4 = W_n Qp[:, n2:]
    if nN > n2:
        # Qp[:, n2:] for P = Qp [Rp; 0], as the reflectors of P applied to [0; I]
        E = np.zeros((n, nN - n2), order="F")
        E[n - nN + n2:, :] = np.eye(nN - n2)
        if n2:
            refl, tau, _, info = lapack.dgeqrf(P)
            if info != 0:  # pragma: no cover - LAPACK argument error
                raise RuntimeError(f"geqrf failed with info={info}")
            E[n - nN:, :] = lapack.dormqr("L", "N", refl, tau, E[n - nN:, :],
                                          lwork=max(1, 64 * nN))[0]
        T4 = red3.apply_U(E, overwrite=True)
        del E
    else:
        T4 = np.zeros((n, 0))
    del red3, P
    n4 = T4.shape[1]
    if n1 + n2 + n4 > n:
        raise NumericalBreakdown(
            f"the rank decisions disagree: a controllable subspace of dimension {nc} and an "
            f"unobservable subspace of dimension {nN} meeting in dimension {n2} do not fit in "
            f"{n} states; the answer depends on the tolerance (tol={p.tol:g}); see the "
            "fragile decisions and try a different tol.",
            {"sizes": (n1, n2, n4), "decisions": decisions})
    # Its W1 coordinates: (N1, ~0, N3); the R ∩ N component is rounding (T4 ⊥ R ∩ N).
    return _Part4(decisions_obs, np.vstack([W1[:, :n1].T @ T4, W1[:, nc:].T @ T4]), T4, None)


def _transform_staircase_model(A_w, nc, n1, N1, N3, Q3c, K, Lam=None):
    """``M^-1 A_w M`` for the part-4 coupling ``M`` of :func:`kalman_decomposition`,
    computed in the storage of ``A_w`` (a Fortran-ordered array, returned).

    ``A_w`` is zero in rows ``nc:`` and columns ``:nc`` (R is invariant), so the products
    that would only meet that block are skipped; rows of parts 3 and 4 in the columns of
    parts 1 and 2 are exactly zero, and the columns of parts 1 and 2 do not change.

    ``Lam``, when given, is ``N_q^T A_q N_q`` from the quotient's staircase form: then the
    part-4 columns are not multiplied out.  ``(N1, N3)`` spans an invariant subspace of the
    quotient ``A_q`` (parts 1 and 3 of ``A_w``), ``A_q N_q = N_q Lam``, so in those columns
    the rows of parts 1 and 3 are zero, the rows of part 4 are ``Lam`` and only the rows of
    part 2 need a product (what the staircase dropped to make the subspace invariant is in
    its decisions' ``largest_dropped``).
    """
    n = A_w.shape[0]
    n3c = Q3c.shape[1]
    out = A_w[:, nc:]                              # a view: A_w updated in place
    if Lam is None:
        AM = np.empty((n, n - nc), order="F")      # columns of parts 3 and 4 of A_w M
        np.matmul(A_w[:, nc:], Q3c, out=AM[:, :n3c])
        AM[:nc, n3c:] = A_w[:nc, :n1] @ N1
        AM[:nc, n3c:] += A_w[:nc, nc:] @ N3
        AM[nc:, n3c:] = A_w[nc:, nc:] @ N3
        cols = slice(None)
    else:
        AM = A_w[:, nc:] @ Q3c                     # columns of part 3 of A_w M
        A24 = A_w[n1:nc, :n1] @ N1
        A24 += A_w[n1:nc, nc:] @ N3
        out[:, n3c:] = 0.0
        out[n1:nc, n3c:] = A24
        out[nc + n3c:, n3c:] = Lam
        cols = slice(0, n3c)
    np.matmul(K, AM[nc:, :], out=out[nc + n3c:, cols])
    out[:nc, cols] = AM[:nc, :]
    out[:n1, cols] -= N1 @ out[nc + n3c:, cols]
    out[nc:nc + n3c, cols] = Q3c.T @ AM[nc:, :]
    return A_w


def _impose_zero_pattern(A, B, C, sizes) -> float:
    """Set the structural zeros exactly (in place); return the largest relative entry zeroed."""
    cuts = np.cumsum((0,) + tuple(sizes))
    blk = [slice(cuts[i], cuts[i + 1]) for i in range(4)]
    zero_A = [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]
    res = 0.0
    nA = max(frobenius(A), np.finfo(float).tiny)
    nB = max(frobenius(B), np.finfo(float).tiny)
    nC = max(frobenius(C), np.finfo(float).tiny)
    for i, j in zero_A:
        sub = A[blk[i], blk[j]]
        if sub.size:
            res = max(res, np.abs(sub).max() / nA)
            A[blk[i], blk[j]] = 0.0
    for i in (2, 3):
        sub = B[blk[i], :]
        if sub.size:
            res = max(res, np.abs(sub).max() / nB)
            B[blk[i], :] = 0.0
    for j in (1, 3):
        sub = C[:, blk[j]]
        if sub.size:
            res = max(res, np.abs(sub).max() / nC)
            C[:, blk[j]] = 0.0
    return float(res)
