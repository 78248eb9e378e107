r"""The modal certificate: PBH measures at every eigenvalue, at every size.

The staircase algorithms decide ranks step by step, and a long chain of small subdiagonal
blocks (many states driven through few inputs) can make rounding noise of ``eps ||A||``
reappear as a "coupling" many orders of magnitude larger (C. C. Paige, "Properties of
numerical algorithms related to computing controllability", IEEE Trans. Automatic Control
26(1), 130-138, 1981).  The certificate is an independent second method: for every cluster
of computed eigenvalues ``lambda`` it gives the PBH measures

.. math::

    c(\lambda) = \sigma_{\min}([A - \lambda I,\; B]) / s, \qquad
    o(\lambda) = \sigma_{\min}([A - \lambda I;\; C]) / s,

(M. L. J. Hautus, "Controllability and observability conditions of linear autonomous
systems", Proc. KNAW A 72, 1969), with ``s`` the model's scale; ``c(lambda)`` is the size of
the smallest perturbation of ``[A, B]`` that makes ``lambda`` an uncontrollable eigenvalue
(R. Eising, "Between controllable and uncontrollable", Systems & Control Letters 4(5),
263-264, 1984).  A mode is certainly uncontrollable at the tolerance when ``c <= tol``.

Method
------
Two tiers, so that the cost stays ``O(n^3)`` for the models people bring and the answer
stays right for the hard ones:

1. *Eigenvector tier, every eigenvalue.*  One eigendecomposition with left and right
   eigenvectors (LAPACK ``geev``).  For a left eigenvector ``w`` (``||w|| = 1``),
   ``w^H [A - lambda I, B] = [r, w^H B]`` with ``r`` the rounding residual, so
   ``||w^H B|| + n eps`` is an upper figure for ``c``.  A lower figure comes from the
   first-order decoupling of ``lambda`` from the rest of the spectrum: with the eigenvalue
   condition numbers ``kappa = 1 / |w^H v|`` and the estimated separation
   ``g = min_j |lambda - lambda_j| / max(kappa, kappa_j)`` from the nearest other
   eigenvalues, ``c >= ||w^H B|| min(1, g) / 2`` up to second-order terms
   (Bavely and Stewart's block diagonalization argument: C. A. Bavely and G. W. Stewart,
   "An algorithm for computing reducing subspaces by block diagonalization", SIAM J.
   Numer. Anal. 16(2), 359-367, 1979).  The dual with right eigenvectors and ``C`` gives
   ``o``.
2. *Measured tier, where the eigenvectors cannot decide.*  Every cluster whose interval
   ``[lower, upper]`` meets the decision window ``[tol / 100, 100 tol]``, and every cluster
   of several eigenvalues, is measured directly on the Schur form ``A = Q T Q^H``:
   ``[T - lambda I, Q^H B]`` has the singular values of ``[A - lambda I, B]``, and one
   triangular-pentagonal QR (LAPACK ``?tpqrt``) turns it into an ``n x n`` triangle with the
   same singular values in ``O(n^2 m)``; a few steps of inverse iteration give its smallest
   singular values (an upper bound that is tight in practice).  The Schur form is computed
   only when some cluster needs it.
3. *Clusters.*  Eigenvalues within each other's error discs are one cluster: the disc of a
   computed eigenvalue has a radius of ``1e3 kappa eps ||A||``, its first-order error
   (J. H. Wilkinson, *The Algebraic Eigenvalue Problem*, 1965, chapter 2) with room for the
   higher-order terms that rule near a defective eigenvalue, at least
   ``1e3 eps ||A||``; the scattered copies of a defective eigenvalue of multiplicity ``k``
   (a ring of radius ``eps^(1/k) ||A||``) are ill conditioned in just that proportion, so
   they link up, while a group is never let grow wider than such a ring (see
   :func:`_clusters`), so distinct ill-conditioned eigenvalues stay apart; groups whose
   centres agree (the rings of one eigenvalue's Jordan blocks of different sizes) are then
   merged.  For a cluster of ``k`` copies the number of uncontrollable copies is the
   algebraic multiplicity of ``lambda`` as an input-decoupling zero: the cluster is moved
   to the bottom of the real Schur form (``?trsen``; G. H. Golub and C. F. Van Loan,
   *Matrix Computations*, 4th ed., 2013, section 7.6), where its block ``(T_22, B_2)``
   holds only its own eigenvalues, and the count is ``k`` minus the controllable dimension
   of that small pair, decided by an orthogonal staircase at each tolerance of the window
   (P. Van Dooren 1981, see :func:`_staircase_run`).  Where that staircase would be as long
   as the one being checked the cluster is left uncounted here; the callers then count it
   by feedback invariance (:mod:`plantcore.structure.feedback_count`).

4. *Deflated measure, where the whole model's measure lies inside the window.*  The
   measure of the whole model at a kept eigenvalue is also small when an uncontrollable
   part's pseudospectrum reaches it, which says nothing about the part sizes; such a
   cluster is measured again on the pair left after the clusters counted at the tolerance
   are moved out of the Schur form, and is kept across the window when that measure's
   lower figure lies above ``100 tol`` (see :func:`_deflate`).  Measured on the trust
   study's ``large`` family (66 models, n = 100-500, seed 20261203): the right answers
   flagged fragile only for this reason fell from 10 to 0.

How it can fail: measures are taken at the computed eigenvalues.  For hypersensitive
spectra (strongly non-normal chains) the computed eigenvalues can lie far from the
uncontrollable ones.  So the lower figure of every cluster is reduced by the eigenvalue's
own first-order error ``10 kappa eps ||A||`` (Weyl's inequality moves ``sigma_min`` by at
most the shift); where that leaves the figure inside the decision window, the cluster is
*undecided* and the answer is marked fragile rather than certified.  The measured tier costs ``O(n^2 m)`` per cluster
with a memory-bound constant (about 10 ms for a real and 100 ms for a complex eigenvalue at
n = 2000), so strongly non-normal large models, where most clusters need it, are slow.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
import scipy.sparse
from scipy.linalg import blas, lapack
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from plantcore.core.rank import FRAGILITY_FACTOR
from plantcore.core.safe_norms import frobenius, frobenius_of_columns, frobenius_of_rows

__all__ = ["ModalCertificate", "controllable_basis", "modal_certificate", "schur_eigenvalues"]

_EPS = np.finfo(float).eps
_CLUSTER_FACTOR = _EPS ** (1.0 / 3.0)
_REPEATED_RADIUS = 1e3 * _EPS    # exactly repeated, well-conditioned eigenvalues
_ERROR_FACTOR = 1e3              # error disc of a computed eigenvalue: 1e3 kappa eps ||A||
_EIGENVALUE_ERROR = 10.0         # first-order error of a computed eigenvalue, in kappa eps ||A||
_INVERSE_STEPS = 4
_INDEPENDENT_STEPS = 4      # longest local staircase that counts as a second method
_CENTRE_AGREEMENT = 1e-3    # centres of one eigenvalue's rings agree to this part of a ring
_MAX_CLUSTER = 24           # copies of one eigenvalue grouped at most (see _clusters)


@dataclass(frozen=True)
class ModalCertificate:
    """PBH measures per cluster of eigenvalues (every array: one entry per cluster).

    Attributes
    ----------
    eigenvalues : (k,) complex ndarray
        Cluster representatives (the mean of the cluster's computed eigenvalues).
    multiplicities : (k,) int ndarray
        Computed eigenvalues in each cluster (they sum to ``n``).
    controllability, observability : (k,) ndarray
        Best figure of ``sigma_min([A - lambda I, B]) / scale`` (``[A - lambda I; C]``):
        measured where ``*_measured`` is True, else the eigenvector upper figure.
    controllability_lower, observability_lower : (k,) ndarray
        A lower figure: equal to the measure where measured, else the first-order
        decoupling bound of the module notes.
    controllability_measured, observability_measured : (k,) bool ndarray
        Where the measured tier was used.
    tolerance, scale : float
        The relative tolerance and the model scale the measures are divided by.
    schur : (T, Q) or None
        The real Schur form of ``A`` when it was computed and asked for (``keep_schur``),
        for the callers that reorder it; None otherwise.
    """

    eigenvalues: np.ndarray = field(repr=False)
    multiplicities: np.ndarray = field(repr=False)
    controllability: np.ndarray = field(repr=False)
    observability: np.ndarray = field(repr=False)
    controllability_lower: np.ndarray = field(repr=False)
    observability_lower: np.ndarray = field(repr=False)
    controllability_measured: np.ndarray = field(repr=False)
    observability_measured: np.ndarray = field(repr=False)
    tolerance: float
    scale: float
    _copies_c: tuple = field(repr=False, default=())
    _copies_o: tuple = field(repr=False, default=())
    _local_both: dict = field(repr=False, default_factory=dict)
    _uncounted: frozenset = field(repr=False, default=frozenset())
    schur: tuple | None = field(repr=False, default=None, compare=False)
    _uncounted_c: frozenset = field(repr=False, default=frozenset())
    _uncounted_o: frozenset = field(repr=False, default=frozenset())
    _deflated_c: dict = field(repr=False, default_factory=dict)
    _deflated_o: dict = field(repr=False, default_factory=dict)
    # counts and sizes already computed, by (what, side, tolerance): the record-keeping asks
    # for the same ones many times; not an init field, so dataclasses.replace starts afresh
    _memo: dict = field(repr=False, default_factory=dict, init=False, compare=False)

    @property
    def n(self) -> int:
        return int(self.multiplicities.sum())

    def _count(self, side: str, t: float) -> np.ndarray:
        key = ("count", side, float(t))
        if key not in self._memo:
            self._memo[key] = self._counted(side, t)
        return self._memo[key].copy()

    def _counted(self, side: str, t: float) -> np.ndarray:
        up = self.controllability if side == "c" else self.observability
        low = self.controllability_lower if side == "c" else self.observability_lower
        copies = self._copies_c if side == "c" else self._copies_o
        # (an unmeasured cluster is only ever asked inside its bounds)
        counted = ~((low > t) | (up > t))
        for i, value in self._deflated(side).items():
            if value > t:
                counted[i] = False   # kept by its measure on the deflated pair (see _deflate)
        out = counted.astype(int)    # one copy, unless the cluster's copies were measured
        if copies:
            for i in np.flatnonzero(counted):
                if copies[i] is not None:
                    out[i] = max(1, int(np.count_nonzero(copies[i] <= t)))
        return np.minimum(out, self.multiplicities)

    def undecided(self, t: float | None = None) -> int:
        """Clusters (on either side) whose measure lies above ``t`` but whose lower figure
        does not, and clusters whose copies could not be counted independently of the
        staircase (see :func:`_copy_values`): the answer at ``t`` is not certified there
        (see the module notes on ill-conditioned eigenvalues)."""
        c, o = self._open(t)
        c[list(self._uncounted)] = True       # copies no short staircase could count
        return int(np.count_nonzero(c | o))

    def undecided_by_sensitivity(self, t: float | None = None) -> int:
        """Clusters (on either side) whose measure lies above ``t`` but whose lower figure
        does not: the computed eigenvalue's own error leaves the answer open (the clusters
        of :meth:`undecided` other than those only left uncounted)."""
        c, o = self._open(t)
        return int(np.count_nonzero(c | o))

    def _deflated(self, side: str) -> dict:
        """Cluster -> lower figure of its measure on the deflated pair (see :func:`_deflate`);
        only clusters that this measure keeps across the whole window are present."""
        return self._deflated_c if side == "c" else self._deflated_o

    def _open(self, t: float | None) -> tuple[np.ndarray, np.ndarray]:
        """Per side, the clusters whose measure lies above ``t`` but whose lower figure does
        not (and that the deflated measure does not decide)."""
        t = self.tolerance if t is None else t
        c = (self.controllability_lower <= t) & (self.controllability > t)
        o = (self.observability_lower <= t) & (self.observability > t)
        for mask, deflated in ((c, self._deflated_c), (o, self._deflated_o)):
            for i, value in deflated.items():
                if value > t:
                    mask[i] = False
        return c, o

    def has_uncounted(self) -> bool:
        """True when some cluster's copies could not be counted by a short staircase of its
        own block (see :func:`_copy_values`)."""
        return bool(self._uncounted)

    def count_bounds(self, side: str, t: float | None = None) -> tuple[int, int]:
        """Bounds on the total number of uncontrollable (``side="c"``) or unobservable
        (``"o"``) copies at the tolerance ``t``.

        Exact (both bounds equal) for every counted cluster.  For a cluster whose copies no
        short staircase could count, the measured singular values of ``[A - lambda I, B]``
        at the cluster's mean give the geometric multiplicity of ``lambda`` as an
        uncontrollable eigenvalue (its number of Jordan chains; Hautus 1969), a lower
        bound for the algebraic count, and the cluster's size an upper bound; a cluster
        with no value at or below ``t`` has no uncontrollable copy (both bounds 0).
        """
        t = self.tolerance if t is None else t
        counts = self._count(side, t)
        low = int(counts.sum())
        high = low
        for c in (self._uncounted_c if side == "c" else self._uncounted_o):
            if counts[c] > 0:
                high += int(self.multiplicities[c] - counts[c])
        return low, high

    def uncontrollable_copies(self, t: float | None = None) -> np.ndarray:
        """Copies of each cluster that are uncontrollable at the tolerance ``t``."""
        return self._count("c", self.tolerance if t is None else t)

    def unobservable_copies(self, t: float | None = None) -> np.ndarray:
        """Copies of each cluster that are unobservable at the tolerance ``t``."""
        return self._count("o", self.tolerance if t is None else t)

    def sizes(self, t: float | None = None) -> tuple:
        """The four Kalman part sizes the certificate implies at the tolerance ``t``:
        (controllable and observable, controllable unobservable, uncontrollable observable,
        uncontrollable and unobservable)."""
        t = self.tolerance if t is None else t
        key = ("sizes", "", float(t))
        if key not in self._memo:
            self._memo[key] = self._sizes_at(t)
        return self._memo[key]

    def _sizes_at(self, t: float) -> tuple:
        k = self.multiplicities
        u, v = self.uncontrollable_copies(t), self.unobservable_copies(t)
        # Copies that are both uncontrollable and unobservable: the smaller count where a
        # whole cluster is in one part; for a cluster shared between parts, the split from
        # the cluster's own decoupled block (see _local_split), when it agrees with the
        # counts, else the counts taken as disjoint where they fit.
        both = np.where((u == k) | (v == k), np.minimum(u, v), np.maximum(0, u + v - k))
        for c, value in self._local_both.items():
            if 0 < u[c] < k[c] or 0 < v[c] < k[c]:
                both[c] = min(value, u[c], v[c])
        n4 = int(both.sum())
        n3 = int((u - both).sum())
        n2 = int((v - both).sum())
        return (int(k.sum()) - n2 - n3 - n4, n2, n3, n4)

    def shared_clusters(self, t: float | None = None) -> np.ndarray:
        """Clusters whose copies lie in more than one part (not a spectral split)."""
        k = self.multiplicities
        u, v = self.uncontrollable_copies(t), self.unobservable_copies(t)
        return ((u > 0) & (u < k)) | ((v > 0) & (v < k))

    def window_sizes(self) -> dict:
        """Part sizes at the ends of the decision window and at the tolerance itself."""
        t = self.tolerance
        return {t / FRAGILITY_FACTOR: self.sizes(t / FRAGILITY_FACTOR), t: self.sizes(t),
                t * FRAGILITY_FACTOR: self.sizes(t * FRAGILITY_FACTOR)}

    def counts_summary(self, side: str) -> tuple[float, float]:
        """(smallest figure kept, largest figure dropped) at the tolerance, copy by copy,
        for the decision record of one side."""
        t = self.tolerance
        up = self.controllability if side == "c" else self.observability
        low = self.controllability_lower if side == "c" else self.observability_lower
        copies = self._copies_c if side == "c" else self._copies_o
        deflated = self._deflated(side)
        k = self.multiplicities.size
        # one figure kept and one dropped at most per cluster (NaN: none), in cluster order
        kept, dropped = np.full(k, np.nan), np.full(k, np.nan)
        measured = (np.array([c is not None for c in copies], dtype=bool) if copies
                    else np.zeros(k, dtype=bool))
        by_deflation = np.zeros(k, dtype=bool)
        for i, value in deflated.items():
            if value > t:
                by_deflation[i] = True
                kept[i] = value
        plain = ~by_deflation & ~measured
        below = up <= t
        dropped[plain & below] = up[plain & below]
        kept[plain & ~below] = low[plain & ~below]
        for i in np.flatnonzero(~by_deflation & measured):
            values = copies[i]
            under, over = values[values <= t], values[values > t]
            if under.size:
                dropped[i] = under.max()
            if over.size:
                kept[i] = over.min()
        return _first_extreme(kept, np.argmin, math.inf), _first_extreme(dropped, np.argmax, 0.0)


def _first_extreme(values: np.ndarray, arg, start: float) -> float:
    """``min([start, *values])`` (``arg=np.argmin``) or ``max`` (``np.argmax``) as Python
    computes it over the values that are not NaN: the first value that beats ``start``
    and every earlier one, or ``start`` itself."""
    values = values[~np.isnan(values)]
    if values.size:
        best = values[arg(values)]
        if (best < start) if arg is np.argmin else (best > start):
            return float(best)
    return start


# --- building blocks ---------------------------------------------------------------------

def eigenvector_conditions(VL: np.ndarray, VR: np.ndarray) -> np.ndarray:
    """Condition numbers ``1 / |w^H v|`` of the eigenvalues from unit left and right
    eigenvectors (columns of ``VL`` and ``VR``; Wilkinson 1965, chapter 2); ``inf`` where
    the two are orthogonal."""
    overlap = np.abs(np.einsum("ij,ij->j", VL.conj(), VR))
    return np.where(overlap > 0, 1.0 / np.maximum(overlap, 1e-300), math.inf)


def offset_mean(z: np.ndarray) -> complex:
    """The mean of the nearby values ``z`` as the mean of their offsets from the first one:
    no overflow near the largest floats.  A group closed under conjugation (LAPACK returns
    exact pairs for a real matrix) has a real mean."""
    z = np.asarray(z, dtype=complex)
    mean = complex(z[0] + (z - z[0]).mean())
    imag = np.sort(z.imag)
    return complex(mean.real, 0.0) if np.array_equal(imag, -imag[::-1]) else mean


def close_pairs(values: np.ndarray, reach: float) -> np.ndarray:
    """Index pairs ``(i, j)``, ``i < j``, of the finite complex ``values`` at most ``reach``
    apart (a k-d tree; J. L. Bentley, "Multidimensional binary search trees used for
    associative searching", 1975).  The tree squares distances, so the points are first
    scaled by an exact power of two: no overflow near the largest floats."""
    finite = np.flatnonzero(np.isfinite(values))
    if finite.size < 2 or not reach > 0 or not math.isfinite(reach):
        return np.zeros((0, 2), dtype=int)
    points = np.column_stack([values[finite].real, values[finite].imag])
    shift = math.frexp(float(np.abs(points).max()) or 1.0)[1]
    pairs = cKDTree(np.ldexp(points, -shift)).query_pairs(
        math.ldexp(reach, -shift), output_type="ndarray").reshape(-1, 2)
    return finite[pairs]


def _clusters(values: np.ndarray, radii: np.ndarray, base: float) -> np.ndarray:
    """Groups of eigenvalues that are computed copies of one eigenvalue (labels).

    Two eigenvalues can belong together only when each lies within the other's error
    disc (``|lambda_i - lambda_j| <= 2 min(r_i, r_j)``): both must be ill conditioned in
    proportion to their distance, as the scattered copies of one eigenvalue are.  A group of ``k`` copies of a defective
    eigenvalue scatters over a ring of diameter at most ``b_k = 2 (n eps)^(1/k) base``; so
    for ``k`` from 2 up to :data:`_MAX_CLUSTER`, the connected groups at the distance
    ``b_k`` (over such pairs, among the eigenvalues not yet grouped) are accepted when a
    group of ``s`` members fits its own ring, ``diameter <= b_s``, with
    ``2 <= s <= _MAX_CLUSTER``.  Tight groups are found first and never merged later, so
    two nearby defective eigenvalues stay two groups, and distinct, merely ill-conditioned
    eigenvalues do not chain into one large group.
    """
    n = values.size
    labels = np.arange(n)
    if n < 2:
        return labels
    bound = {k: 2.0 * (n * _EPS) ** (1.0 / k) * base for k in range(2, _MAX_CLUSTER + 1)}
    # Only pairs within 2 min(r_i, r_j) are kept below, so the search reaches no further
    # than twice the largest radius (widened by 1e-6 relative, far beyond the few units
    # in the last place by which the tree's distance and |lambda_i - lambda_j| can differ):
    # the same pairs survive, without listing the O(n^2) pairs within the widest ring.
    reach = min(bound[_MAX_CLUSTER], 2.0 * float(radii.max()) * (1.0 + 1e-6))
    pairs = close_pairs(values, reach)
    if not pairs.size:
        return labels
    dist = np.abs(values[pairs[:, 0]] - values[pairs[:, 1]])
    keep = dist <= 2.0 * np.minimum(radii[pairs[:, 0]], radii[pairs[:, 1]])
    pairs, dist = pairs[keep], dist[keep]
    free = np.ones(n, dtype=bool)
    for k in range(2, _MAX_CLUSTER + 1):
        use = (dist <= bound[k]) & free[pairs[:, 0]] & free[pairs[:, 1]]
        if not np.any(use):
            continue
        graph = scipy.sparse.coo_matrix((np.ones(int(use.sum())),
                                         (pairs[use, 0], pairs[use, 1])), shape=(n, n))
        _, comp = connected_components(graph, directed=False)
        for c in np.unique(comp[pairs[use, 0]]):
            group = np.nonzero(comp == c)[0]
            s = group.size
            if not 2 <= s <= _MAX_CLUSTER:
                continue
            z = values[group]
            if float(np.abs(z[:, None] - z[None, :]).max()) <= bound[s]:
                labels[group] = group[0]
                free[group] = False
    return _merge_concentric(values, np.unique(labels, return_inverse=True)[1], base)


def _merge_concentric(values: np.ndarray, labels: np.ndarray, base: float) -> np.ndarray:
    """Merge groups whose centres agree to rounding: the copies of one eigenvalue with
    Jordan blocks of different sizes scatter over rings of different radii
    (``eps^(1/k)``), which the ring rule of :func:`_clusters` keeps apart, but the mean of
    each ring is the eigenvalue to about ``eps ||A||`` (the trace of the block is exact to
    rounding; for a group that holds only some of the copies, to a small fraction of its
    ring).  A group of several members is merged with any group or single eigenvalue whose
    centre lies within ``max(1e3 n eps ||A||, 1e-3 rho)`` of its own, ``rho`` the larger
    ring radius (distinct eigenvalues that close lie inside each other's rings and cannot
    be told apart by their computed copies)."""
    k = int(labels.max()) + 1
    size = np.bincount(labels, minlength=k)
    if not np.any(size > 1):
        return labels
    centre = np.array([offset_mean(values[labels == c]) for c in range(k)])
    ring = np.array([float(np.abs(values[labels == c] - centre[c]).max()) for c in range(k)])
    floor = _ERROR_FACTOR * values.size * _EPS * base
    reach = np.maximum(floor, _CENTRE_AGREEMENT * ring)
    pairs = close_pairs(centre, float(reach.max()))
    gap = np.abs(centre[pairs[:, 0]] - centre[pairs[:, 1]])
    pairs = pairs[((size[pairs[:, 0]] > 1) | (size[pairs[:, 1]] > 1))
                  & (gap <= np.maximum(reach[pairs[:, 0]], reach[pairs[:, 1]]))]
    if not pairs.size:
        return labels
    graph = scipy.sparse.coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])),
                                    shape=(k, k))
    _, merged = connected_components(graph, directed=False)
    return np.unique(merged[labels], return_inverse=True)[1]


def _separation(values: np.ndarray, labels: np.ndarray, kappa: np.ndarray) -> np.ndarray:
    """A first-order estimate of how well each eigenvalue is separated from the others of
    other clusters: ``min_j |lambda_i - lambda_j| / max(kappa_i, kappa_j)`` over its nearest
    neighbours.  Dividing by the neighbours' condition numbers too matters near a defective
    eigenvalue: the scattered copies of a Jordan block are far apart but ill conditioned,
    and the block is nearly singular much closer to them than their distance says."""
    n = values.size
    if n < 2:
        return np.full(n, math.inf)
    points = np.column_stack([values.real, values.imag])
    # distances are squared inside the tree: an exact power-of-two scaling first
    top = float(np.abs(points[np.isfinite(points)]).max(initial=0.0))
    shift = math.frexp(top or 1.0)[1]
    points = np.ldexp(points, -shift)
    k = min(n, 9)
    dist, idx = cKDTree(points).query(points, k=k)
    dist = np.ldexp(dist, shift)
    dist, idx = np.atleast_2d(dist), np.atleast_2d(idx)
    out = np.full(n, math.inf)
    for j in range(1, k):
        other = labels[idx[:, j]] != labels
        estimate = dist[:, j] / np.maximum(kappa, kappa[idx[:, j]])
        out = np.where(other & (estimate < out), estimate, out)
    return out


@functools.lru_cache(maxsize=64)
def _start_block_cached(n: int, width: int, cplx: bool) -> np.ndarray:
    rng = np.random.default_rng(20240917)
    X = rng.standard_normal((n, width))
    if cplx:
        X = X + 1j * rng.standard_normal((n, width))
    X.flags.writeable = False
    return X


def _start_block(n: int, width: int, cplx: bool) -> np.ndarray:
    """The fixed random start block of :func:`_smallest_singular_values` (seed 20240917,
    read-only): drawn once per shape, not once per measure."""
    return _start_block_cached(int(n), int(width), bool(cplx))


def _solve_upper(R, X, *, trans: int) -> np.ndarray:
    """``op(R)^{-1} X`` for the upper triangle ``R`` by LAPACK ``?trtrs`` (``trans`` 0: ``R``,
    2: ``R^H``), the call :func:`scipy.linalg.solve_triangular` makes, without its input
    validation and dispatch (a few tens of microseconds per call, paid four to eight times
    per measure).  ``X`` is not overwritten."""
    trtrs = _TRTRS[np.iscomplexobj(R) or np.iscomplexobj(X)]
    if R.flags.f_contiguous or trans == 2:
        x, info = trtrs(R, X, lower=0, trans=trans)
    else:   # the transposed system, as scipy solves a C-ordered triangle
        x, info = trtrs(R.T, X, lower=1, trans=1 - (trans != 0))
    if info > 0:
        raise np.linalg.LinAlgError(f"singular matrix: resolution failed at diagonal {info - 1}")
    if info < 0:   # pragma: no cover - LAPACK argument error
        raise ValueError(f"illegal value in {-info}-th argument of internal trtrs")
    return x


_TRTRS = {False: lapack.dtrtrs, True: lapack.ztrtrs}


def _smallest_singular_values(top, bottom, k: int, start=None) -> np.ndarray:
    """Upper bounds on the ``k`` smallest singular values of ``[top; bottom]``.

    ``top`` (n x n, upper triangular, Fortran order) is overwritten.  ``?tpqrt`` gives the
    triangle ``R`` with the same singular values; block inverse iteration on ``R^H R`` (two
    triangular solves per step) and Rayleigh-Ritz on ``R X`` give values that bound the
    ``k`` smallest singular values from above (Courant-Fischer).  ``start`` (n-vector), a
    guess of the singular vector of the smallest value (e.g. the eigenvector), lets a
    single value converge in fewer steps: iteration stops once a step changes the estimate
    of ``sigma^2`` by less than ``1e-3`` relative (the value is then within about 0.1 % of
    the limit the iteration converges to, from above).
    """
    n = top.shape[0]
    cplx = np.iscomplexobj(top)
    tpqrt = lapack.ztpqrt if cplx else lapack.dtpqrt
    trmm = blas.ztrmm if cplx else blas.dtrmm
    R, _, _, info = tpqrt(0, max(1, min(32, n)), top, np.array(bottom, order="F"),
                          overwrite_a=1, overwrite_b=1)
    if info != 0:   # pragma: no cover - LAPACK argument error
        raise np.linalg.LinAlgError(f"?tpqrt failed (info={info})")
    d = R.diagonal().copy()
    big = float(np.abs(R[0, :]).max() + np.abs(d).max()) + 1e-300
    floor = 1e-3 * _EPS * big              # keeps an exactly singular triangle solvable
    small = np.abs(d) < floor
    idx = np.nonzero(small)[0]
    R[idx, idx] = floor
    width = min(n, k + (1 if k > 1 else 0))
    X = _start_block(n, width, cplx).copy()
    single = width == 1 and start is not None and np.all(np.isfinite(start))
    if single:
        X = np.asarray(start, dtype=X.dtype).reshape(n, 1) + 1e-3 * X / math.sqrt(n)
        X /= max(float(frobenius(X)), 1e-300)
    previous = 0.0
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(_INVERSE_STEPS):
            X = _solve_upper(R, X, trans=2)
            X /= np.maximum(frobenius_of_columns(X), 1e-300)
            X = _solve_upper(R, X, trans=0)
            if not np.all(np.isfinite(X)):
                break
            if single:
                growth = float(frobenius(X))    # about 1 / sigma^2 once converged
                X /= max(growth, 1e-300)
                if previous and abs(growth - previous) <= 1e-3 * growth:
                    break
                previous = growth
            else:
                X, _ = np.linalg.qr(X)
    if not np.all(np.isfinite(X)):
        # the triangle is singular to working precision at several pivots: its smallest
        # singular values are at rounding level
        return np.full(k, floor)
    Y = trmm(1.0, R, X)
    if idx.size:                            # the true triangle for the bound
        Y[idx, :] -= (floor - d[idx])[:, None] * X[idx, :]
    return np.linalg.svd(Y, compute_uv=False)[::-1][:k]


def _staircase_run(A, B, threshold: float) -> tuple[int, float, float, int]:
    """One orthogonal controllability staircase of a small pair at an absolute rank
    threshold (P. Van Dooren, "The generalized eigenstructure problem in linear system
    theory", IEEE Trans. Automatic Control 26(1), 111-129, 1981).

    Returns (copies not reached, i.e. ``k`` minus the controllable dimension; the largest
    singular value dropped; the smallest kept; the number of steps taken)."""
    A = np.array(A, dtype=np.result_type(A, B, float))
    X = np.array(B, dtype=A.dtype)
    k = A.shape[0]
    done, dropped, kept, steps = 0, 0.0, math.inf, 0
    while done < k and X.size:
        steps += 1
        U, sv, _ = np.linalg.svd(X)
        r = int(np.count_nonzero(sv > threshold))
        if r < sv.size:
            dropped = max(dropped, float(sv[r]))
        if r == 0:
            break
        kept = min(kept, float(sv[r - 1]))
        rest = slice(done, k)
        A[rest, :] = U.conj().T @ A[rest, :]
        A[:, rest] = A[:, rest] @ U
        X = A[done + r:, done:done + r]
        done += r
    return k - done, dropped, kept, steps


def _copy_values(A, B, thresholds, pairs: bool, copies: int) -> np.ndarray:
    """Values whose count below each of the three ``thresholds`` (ascending, absolute) is
    the number of uncontrollable copies of a cluster whose block is the pair ``(A, B)``.

    The block holds only the cluster's eigenvalues (and, when ``pairs``, their conjugates,
    one copy each in its 2 x 2 blocks), so its uncontrollable dimension is the number of
    uncontrollable copies, the algebraic count a repeated or defective eigenvalue needs.
    It is decided by a small staircase at each threshold; the values returned are the
    singular values that decided it (the largest dropped at the threshold where the count
    grows, the smallest kept above the last), ``copies`` of them in all.

    A staircase of more than :data:`_INDEPENDENT_STEPS` steps is the same long chain of
    rank decisions that the staircase being checked makes (a defective eigenvalue whose
    Jordan chains run through most of the model): it is no second method, and None is
    returned (the cluster is then undecided).
    """
    runs = [_staircase_run(A, B, t) for t in thresholds]
    if max(r[3] for r in runs) > _INDEPENDENT_STEPS:
        return None
    counts = np.maximum.accumulate([r[0] for r in runs])
    if pairs:
        counts = -(-counts // 2)
    counts = np.minimum(counts, copies)
    values = [min(runs[0][1], thresholds[0])] * int(counts[0])
    for i in (1, 2):
        values += [min(max(runs[i][1], thresholds[i - 1] * (1 + 1e-12)), thresholds[i])] * \
            int(counts[i] - counts[i - 1])
    values += [max(runs[2][2], thresholds[2] * (1 + 1e-12))] * (copies - int(counts[2]))
    return np.asarray(values, dtype=float)


def schur_eigenvalues(T: np.ndarray) -> np.ndarray:
    """Eigenvalues of a real quasi-triangular (real Schur) matrix, by diagonal position;
    a 2 x 2 block ``[[a, b], [c, d]]`` with ``b c < 0`` gives ``(a + d) / 2 +- i sqrt(-b c)``
    (standardized blocks have ``a = d``)."""
    ev = np.diag(T).astype(complex)
    for i in np.nonzero(np.diag(T, -1))[0]:
        a, b, c, d = T[i, i], T[i, i + 1], T[i + 1, i], T[i + 1, i + 1]
        # products and sums formed so that they cannot overflow near the largest floats
        im = math.sqrt(abs(b)) * math.sqrt(abs(c)) if (b < 0) != (c < 0) and b and c else 0.0
        re = a / 2 + d / 2
        ev[i], ev[i + 1] = complex(re, im), complex(re, -im)
    return ev


class _Schur:
    """The real Schur form of ``A`` and, lazily, its complex form (internal)."""

    def __init__(self, A, *, triangle=None):
        if triangle is None:
            self.T, self.Q = scipy.linalg.schur(A, output="real")
        else:                 # a block of a real Schur form, in its own coordinates
            self.T, self.Q = triangle, np.eye(triangle.shape[0])
        self._complex = None
        self._pairs = {}

    @property
    def complex(self):
        if self._complex is None:
            # The rotations of the conversion square entries of T: far from 1 in size, T is
            # first scaled by an exact power of two (and the triangle scaled back), so
            # nothing overflows or underflows for any finite T.
            top = float(np.abs(self.T).max()) if self.T.size else 0.0
            shift = math.frexp(top)[1] if top > 0 and not 2.0**-400 < top < 2.0**400 else 0
            Tc, Qc = scipy.linalg.rsf2csf(np.ldexp(self.T, -shift), self.Q)
            self._complex = (np.ldexp(Tc.real, shift) + 1j * np.ldexp(Tc.imag, shift), Qc)
        return self._complex

    def pair(self, X, side: str, real: bool):
        """The triangle and the extra rows whose stacked singular values are those of
        ``[A - lam I, B]`` (side "c") or ``[A - lam I; C]`` (side "o") once ``lam`` is taken
        off the triangle's diagonal (conjugated): for "c", ``[J (T - lam I)^H J; (Q^H B)^H J]``
        with ``J`` the flip, so that the top block is upper triangular; for "o",
        ``conj([T - lam I; C Q])``.  Computed once per side and arithmetic (cached)."""
        key = (side, real, id(X))
        entry = self._pairs.get(key)
        if entry is None or entry[0] is not X:     # (an id can be reused once X is freed)
            T, Q = (self.T, self.Q) if real else self.complex
            if side == "c":
                cached = (np.conj(T.T[::-1, ::-1]), (Q.conj().T @ X).conj().T[:, ::-1])
            else:
                cached = (np.conj(T), np.conj(X @ Q))
            cached = tuple(np.asfortranarray(M) for M in cached)   # fast copies later
            entry = self._pairs[key] = (X, cached)   # X is kept alive with its entry
        return entry[1]

    def eigenvalues(self) -> np.ndarray:
        return schur_eigenvalues(self.T)


def _measure(schur: _Schur, X, lam: complex, side: str, k: int, start=None) -> np.ndarray:
    """The ``k`` smallest singular values of ``[A - lam I, B]`` (side "c", ``X = B``) or
    ``[A - lam I; C]`` (side "o", ``X = C``), measured on the Schur form.  ``start``: the
    left (side "c") or right (side "o") eigenvector of ``A`` for ``lam``, when known, as
    the first guess of the singular vector."""
    real = lam.imag == 0.0 and not np.any(np.diag(schur.T, -1))
    T, bottom = schur.pair(X, side, real)
    n = T.shape[0]
    top = np.array(T, order="F")
    top[np.diag_indices(n)] -= lam.real if real else np.conj(lam)
    guess = None
    if start is not None and k == 1:
        Z = schur.Q if real else schur.complex[1]
        y = np.conj(np.conj(start) @ Z)          # Z^H start: the eigenvector in Schur coordinates
        if real:
            y = y.real if np.abs(y.imag).max() <= 1e-8 * np.abs(y.real).max() else None
        if y is not None:
            guess = y[::-1] if side == "c" else np.conj(y)
    return _smallest_singular_values(top, bottom, k, start=guess)


def _cluster_copy_values(schur: _Schur, B, C, members: np.ndarray, side: str,
                         thresholds, pairs: bool, copies: int) -> np.ndarray:
    """Values that count the uncontrollable (unobservable) copies of a cluster, from its
    own block of the reordered real Schur form (see :func:`_copy_values`)."""
    select = members
    k = int(select.sum())
    T, Q = schur.T, schur.Q
    if side == "c":   # the cluster to the bottom: its block has [0 I] as left invariant space
        Ts, Qs, *_, info = lapack.dtrsen((~select).astype(np.int32), T, Q, job="N")
        if info != 0:
            raise np.linalg.LinAlgError("the cluster could not be reordered")
        return _copy_values(Ts[-k:, -k:], (Qs.T @ B)[-k:], thresholds, pairs, copies)
    Ts, Qs, *_, info = lapack.dtrsen(select.astype(np.int32), T, Q, job="N")
    if info != 0:
        raise np.linalg.LinAlgError("the cluster could not be reordered")
    return _copy_values(Ts[:k, :k].T, (C @ Qs)[:, :k].T, thresholds, pairs, copies)


def controllable_basis(A, X, threshold: float) -> np.ndarray:
    """Orthonormal basis of the controllable subspace of a small pair by the orthogonal
    staircase (Van Dooren 1981), ranks decided at the absolute ``threshold``."""
    k = A.shape[0]
    kind = np.result_type(A, X, float)       # real data stay real
    Q = np.eye(k, dtype=kind)
    A = np.array(A, dtype=kind)
    X = np.array(X, dtype=kind)
    done = 0
    while done < k and X.size:
        U, s, _ = np.linalg.svd(X)
        r = int(np.count_nonzero(s > threshold))
        if r == 0:
            break
        rest = slice(done, k)
        A[rest, :] = U.conj().T @ A[rest, :]
        A[:, rest] = A[:, rest] @ U
        Q[:, rest] = Q[:, rest] @ U
        X = A[done + r:, done:done + r]
        done += r
    return Q[:, :done]


def _local_split(schur: _Schur, B, C, members: np.ndarray, threshold: float) -> int | None:
    """Copies of a shared cluster that are both uncontrollable and unobservable.

    The cluster is moved to the top of the real Schur form and decoupled from the rest by
    one Sylvester equation (Bavely and Stewart 1979), so that its own block ``(A_c, B_c,
    C_c)`` carries its part of the controllable and unobservable subspaces (for disjoint
    spectra these subspaces are direct sums over the blocks).  Orthogonal staircases of
    the small block give R_c and N_c; the copies in part 4 (unobservable, outside the
    controllable subspace) number ``dim(R_c + N_c) - dim R_c``.
    """
    k = int(members.sum())
    n = schur.T.shape[0]
    Ts, Qs, *_, info = lapack.dtrsen(members.astype(np.int32), schur.T, schur.Q, job="N")
    if info != 0:
        return None
    T11, T12, T22 = Ts[:k, :k], Ts[:k, k:], Ts[k:, k:]
    Bq, Cq = Qs.T @ B, C @ Qs
    if k < n:
        try:
            Y = scipy.linalg.solve_sylvester(T11, -T22, -T12)   # T11 Y - Y T22 = -T12
        except (np.linalg.LinAlgError, ValueError):
            return None
        if not np.all(np.isfinite(Y)) or frobenius(Y) > 1e6:
            return None
        B_c = Bq[:k] - Y @ Bq[k:]          # rows of X^-1 B with X = [[I, Y], [0, I]]
    else:
        B_c = Bq[:k]
    C_c = Cq[:, :k]
    R = controllable_basis(T11, B_c, threshold)
    N_perp = controllable_basis(T11.T, C_c.T, threshold)         # observable directions (dual)
    # N_c is the orthogonal complement of the observable directions
    if N_perp.shape[1]:
        full = np.linalg.qr(N_perp, mode="complete")[0]
        N = full[:, N_perp.shape[1]:]
    else:
        N = np.eye(k)
    span = np.hstack([R, N])
    if span.shape[1] == 0:
        return 0
    s = np.linalg.svd(span, compute_uv=False)
    rank_sum = int(np.count_nonzero(s > 1e-8))
    # part 4 of the block: N without R ∩ N, of dimension dim(R + N) - dim R
    return rank_sum - R.shape[1]


def _eigen_residuals(A, lam, VL, VR, block: int = 256):
    """Norms of the residuals ``w_i^H (A - lambda_i I)`` and ``(A - lambda_i I) v_i`` of the
    computed left and right eigenvectors (columns of ``VL``, ``VR``), in blocks of
    columns so that no further ``n x n`` complex array is formed."""
    n = A.shape[0]
    left, right = np.empty(n), np.empty(n)
    for start in range(0, n, block):
        sl = slice(start, min(n, start + block))
        W, V, z = VL[:, sl], VR[:, sl], lam[sl]
        # w^H A = (A^T conj(w))^T, taken as two real products
        WA = A.T @ W.real - 1j * (A.T @ W.imag)          # columns: (w^H A)^T
        WA -= np.conj(W) * z[None, :]
        left[sl] = frobenius_of_columns(WA)
        AV = A @ V.real + 1j * (A @ V.imag)
        AV -= V * z[None, :]
        right[sl] = frobenius_of_columns(AV)
    return left, right


def _cluster_reduce(ufunc, values: np.ndarray, labels: np.ndarray, k: int) -> np.ndarray:
    """Per cluster, ``ufunc`` (``np.minimum`` or ``np.maximum``) over its members' values:
    one unbuffered pass in place of a mask per cluster (``O(n)`` instead of ``O(n k)``;
    the same values, since a minimum or maximum involves no rounding)."""
    start = math.inf if ufunc is np.minimum else -math.inf
    out = np.full(k, start)
    ufunc.at(out, labels, values)
    return out


def _cluster_means(values: np.ndarray, labels: np.ndarray, mult: np.ndarray) -> np.ndarray:
    """:func:`offset_mean` of each cluster's values, in cluster order.  For a single value
    it is the value plus zero (``z + (z - z).mean()``, a real value's imaginary part made
    +0.0), taken for all singletons at once; the clusters of several values are averaged
    one by one."""
    out = np.zeros(mult.size, dtype=complex)
    single = mult[labels] == 1
    out[labels[single]] = values[single] + 0j
    for c in np.flatnonzero(mult > 1):
        out[c] = offset_mean(values[labels == c])
    return out


def _nearest(points: np.ndarray, values: np.ndarray, rows: int = 256) -> np.ndarray:
    """Index of the nearest of ``values`` to each of ``points`` (the first on a tie, as
    ``np.argmin``), a block of ``rows`` points at a time."""
    out = np.empty(points.size, dtype=int)
    for start in range(0, points.size, rows):
        block = points[start:start + rows]
        out[start:start + rows] = np.argmin(np.abs(values[None, :] - block[:, None]), axis=1)
    return out


def modal_certificate(A, B, C, *, scale: float, tol: float,
                      keep_schur: bool = False, deflate: bool = True) -> ModalCertificate | None:
    """The modal certificate of ``(A, B, C)`` (see the module notes for the method).

    Parameters
    ----------
    A : (n, n) ndarray
        Equilibrated state matrix (not modified).
    B, C : (n, m), (p, n) ndarray
        Inputs and outputs scaled for rank decisions.
    scale : float
        The model scale the measures are divided by.
    tol : float
        Relative tolerance.
    keep_schur : bool
        Keep the real Schur form in the result (``schur``) when it was computed.
    deflate : bool
        Measure the kept clusters inside the window again on the deflated pair (see
        :func:`_deflate`).  Callers pass False for a model whose states the equilibration
        rescaled strongly and whose balanced scaling is poorly determined
        (:func:`plantcore.structure.reconcile.deflation_allowed`): there the measures
        depend on where the balancing stopped, and a flag that the deflated measure would
        lift may be the only sign of a dropped mode that other coordinates keep (trust
        study seed 20261203, ``scaled`` model 276: an observable mode dropped at 3.5e-13,
        just below the window, flagged only through two kept modes at 2e-10 and 7e-10).

    Returns
    -------
    ModalCertificate or None
        None when the eigenvalue computation fails (non-finite data after scaling).
    """
    n = A.shape[0]
    m, p = B.shape[1], C.shape[0]
    if n == 0:
        return None
    try:
        lam, VL, VR = scipy.linalg.eig(A, left=True, right=True, check_finite=True)
    except (np.linalg.LinAlgError, ValueError):
        return None
    if not np.all(np.isfinite(lam)):
        return None
    VL = VL / frobenius_of_columns(VL)
    VR = VR / frobenius_of_columns(VR)
    kappa = eigenvector_conditions(VL, VR)
    norm_A = float(frobenius(A))
    # the residuals ||w^H (A - lambda I)|| and ||(A - lambda I) v||, measured, plus the
    # rounding of measuring them (sqrt(n) eps ||A||, common practice for the typical
    # error of an inner product of length n)
    floor = math.sqrt(n) * _EPS * norm_A / scale
    res_l, res_r = _eigen_residuals(A, lam, VL, VR)
    upper_c = (np.hypot(frobenius_of_rows(VL.conj().T @ B), res_l) / scale + floor
               if m else np.zeros(n))
    upper_o = (np.hypot(frobenius_of_columns(C @ VR), res_r) / scale + floor
               if p else np.zeros(n))
    # Error discs: the first-order error of a computed eigenvalue is about
    # kappa eps ||A||; for the scattered copies of a defective eigenvalue of multiplicity k
    # this is the radius eps^(1/k) ||A|| of their ring, so copies of one eigenvalue link up
    # while well-conditioned distinct eigenvalues do not.
    base = max(norm_A, scale * _EPS)
    radii = np.maximum(_REPEATED_RADIUS, _ERROR_FACTOR * _EPS * kappa) * base
    labels = _clusters(lam, radii, base)
    separation = _separation(lam, labels, kappa) / scale
    decoupling = np.minimum(1.0, separation) / 2.0
    k = int(labels.max()) + 1
    mult = np.bincount(labels, minlength=k)
    reps = _cluster_means(lam, labels, mult)
    # cluster figures: the best (smallest) upper figure and the smallest lower figure
    up_c = _cluster_reduce(np.minimum, upper_c, labels, k)
    up_o = _cluster_reduce(np.minimum, upper_o, labels, k)
    low_c = np.minimum(up_c, _cluster_reduce(np.minimum, upper_c * decoupling, labels, k))
    low_o = np.minimum(up_o, _cluster_reduce(np.minimum, upper_o * decoupling, labels, k))
    lo, hi = tol / FRAGILITY_FACTOR, tol * FRAGILITY_FACTOR
    # A measure at a computed eigenvalue certifies nothing beyond the eigenvalue's own
    # first-order error (see below); where that error alone exceeds the window, measuring
    # would not decide, and the cluster is left undecided without the cost.
    # (For a cluster of several copies the measure is taken at their mean, which is as
    # accurate as the cluster's invariant subspace, not as its scattered members: the
    # rounding level is used there.)
    error = _EIGENVALUE_ERROR * _EPS * kappa * norm_A / scale
    radius = np.where(mult == 1, _cluster_reduce(np.maximum, error, labels, k),
                      _EIGENVALUE_ERROR * n * _EPS * norm_A / scale)
    useful = radius <= hi
    need_c = (m > 0) & useful & ((mult > 1) | ((low_c <= hi) & (up_c >= lo)))
    need_o = (p > 0) & useful & ((mult > 1) | ((low_o <= hi) & (up_o >= lo)))
    copies_c, copies_o = [None] * k, [None] * k
    measured_c, measured_o = np.zeros(k, dtype=bool), np.zeros(k, dtype=bool)
    local_both = {}
    uncounted = set()
    uncounted_side = {"c": set(), "o": set()}
    schur = None
    if np.any(need_c) or np.any(need_o):
        schur = _Schur(A)
        positions = schur.eigenvalues()
        # the cluster of each diagonal position of the Schur form (nearest eigenvalue)
        pos_label = labels[_nearest(positions, lam)]
        done = np.zeros(k, dtype=bool)
        partners = {}          # complex clusters measured with their conjugate
        for c in range(k):
            if done[c] or not (need_c[c] or need_o[c]):
                continue
            value = reps[c]
            if abs(value.imag) <= _CLUSTER_FACTOR * norm_A:
                value = complex(value.real, 0.0)
            partner = None
            if value.imag != 0.0:   # the conjugate cluster has the same measures
                partner = int(np.argmin(np.abs(reps - np.conj(value))))
                if partner == c or mult[partner] != mult[c]:
                    partner = None
            for side, need, up, low, copies, measured, X in (
                    ("c", need_c, up_c, low_c, copies_c, measured_c, B),
                    ("o", need_o, up_o, low_o, copies_o, measured_o, C)):
                if not need[c]:
                    continue
                start = None
                if mult[c] == 1:
                    start = (VL if side == "c" else VR)[:, int(np.argmax(labels == c))]
                values = _measure(schur, X, value, side, int(mult[c]), start=start) / scale
                up[c] = low[c] = float(values[0])
                copies[c] = values
                if mult[c] > 1 and values[0] <= hi:
                    members = pos_label == c
                    if partner is not None:
                        members |= pos_label == partner
                    try:
                        counted = _cluster_copy_values(
                            schur, B, C, members, side, (lo * scale, tol * scale, hi * scale),
                            partner is not None, int(mult[c]))
                        if counted is None:
                            uncounted.add(c)
                            uncounted_side[side].add(c)
                            if partner is not None:
                                uncounted.add(partner)
                                uncounted_side[side].add(partner)
                        else:
                            copies[c] = np.sort(counted / scale)
                    except np.linalg.LinAlgError:
                        pass      # the geometric count of the measured values stands
                measured[c] = True
                if partner is not None:
                    up[partner], low[partner] = up[c], low[c]
                    copies[partner], measured[partner] = copies[c], True
            done[c] = True
            if partner is not None:
                done[partner] = True
                partners[c], partners[partner] = partner, c
        # clusters shared between parts: which copies are in neither subspace
        for c in range(k):
            if mult[c] < 2 or not (measured_c[c] or measured_o[c]) or m == 0 or p == 0:
                continue
            copies = [copies_c[c], copies_o[c]]
            u = int(np.count_nonzero(copies[0] <= tol)) if copies[0] is not None else 0
            v = int(np.count_nonzero(copies[1] <= tol)) if copies[1] is not None else 0
            if ((0 < u < mult[c]) or (0 < v < mult[c])) and c not in local_both:
                members = pos_label == c
                partner = partners.get(c)
                if partner is not None:
                    # a 2 x 2 block of the real Schur form holds one copy of each
                    members |= pos_label == partner
                both = _local_split(schur, B, C, members, tol * scale)
                if both is not None:
                    if partner is not None:
                        local_both[partner] = both // 2
                        both //= 2
                    local_both[c] = both
    # A measure taken at a computed eigenvalue certifies only the computed point: the
    # eigenvalue itself may lie anywhere within its first-order error ``kappa eps ||A||``,
    # and sigma_min([A - z I, B]) >= sigma_min([A - lambda I, B]) - |z - lambda| (Weyl), so
    # the lower figures drop by that radius (negligible unless the eigenvalue is ill
    # conditioned, as in long non-normal chains).
    low_c = np.maximum(0.0, np.minimum(low_c, up_c - radius))
    low_o = np.maximum(0.0, np.minimum(low_o, up_o - radius))
    cert = ModalCertificate(reps, mult, up_c, up_o, low_c, low_o, measured_c, measured_o,
                            float(tol), float(scale), tuple(copies_c), tuple(copies_o),
                            local_both, frozenset(uncounted),
                            (schur.T, schur.Q) if keep_schur and schur is not None else None,
                            frozenset(uncounted_side["c"]), frozenset(uncounted_side["o"]))
    if schur is None or not deflate:
        return cert
    deflated = {side: _deflate(cert, schur, X, side, pos_label, radius, norm_A)
                for side, X in (("c", B), ("o", C)) if X.size}
    if not any(deflated.values()):
        return cert
    return dataclasses.replace(cert, _deflated_c=deflated.get("c", {}),
                               _deflated_o=deflated.get("o", {}))


def _deflate(cert: ModalCertificate, schur: _Schur, X, side: str, pos_label: np.ndarray,
             radius: np.ndarray, norm_A: float) -> dict:
    """Measures of the kept clusters near the top of the window on the deflated pair.

    The PBH measure of the whole model at an eigenvalue ``lambda`` is small not only when
    ``lambda`` is weakly controllable: it is at most ``sigma_min(A_u - lambda I)``, ``A_u``
    the model on the uncontrollable part, which for a non-normal ``A_u`` is small well
    away from its eigenvalues (``lambda`` in its pseudospectrum; L. N. Trefethen and
    M. Embree, *Spectra and Pseudospectra*, 2005).  A perturbation of that size then moves
    an eigenvalue of ``A_u`` onto ``lambda`` and leaves the number of uncontrollable modes
    unchanged (``A = diag(a, b)``, ``B = [1; 0]``: the measure at ``a`` is ``|a - b|``, but
    the controllable dimension stays 1 until ``B`` itself is changed), so it says nothing
    about the part sizes.  What does: the clusters counted uncontrollable at the tolerance
    are moved to the bottom of the real Schur form (``?trsen``; Golub and Van Loan 2013,
    7.6), and ``lambda`` is measured on the leading block ``(T_11, Q_1^T B)``, the model
    on the controllable subspace the tolerance found (C. C. Paige 1981 and R. Eising 1984
    measure controllability of a pair; a perturbation ``E`` of that pair that makes
    ``lambda`` uncontrollable is the perturbation ``Q_1 E Q_1^T`` of the model, which
    leaves ``range Q_1`` invariant and the controllable dimension one smaller).  The dual
    (unobservable clusters to the top, ``(T_22, C Q_2)``) serves side ``"o"``.

    Only clusters of one eigenvalue that the tolerance keeps, that are not a copy of a
    removed eigenvalue (distance above ``100`` times the top of the window), and whose
    lower figure on the whole model meets the top of the window ``100 tol`` are measured;
    the lower figure of the deflated measure takes off the eigenvalue's own error (as for
    the whole model) and the rows of ``Q_2^T B`` the deflation neglects.  A cluster enters
    the result only when that lower figure exceeds ``100 tol``: it is then kept at every
    tolerance of the window, and the count of the whole model is not used for it.
    Nothing is deflated when a cluster is shared between parts at the tolerance, or when
    some computed eigenvalue's first-order error exceeds the top of the window: the
    reordering swaps the removed clusters past all the others, and the subspace it
    delivers is only as accurate as their separation allows (Z. Bai and J. W. Demmel, "On
    swapping diagonal blocks in real Schur form", Linear Algebra Appl. 186, 73-95, 1993).
    (Why the lower figure is safe where the errors are first-order: a truly uncontrollable
    eigenvalue ``mu`` that the tolerance kept stays an uncontrollable eigenvalue of the
    deflated pair, so the deflated measure at its computed ``lambda`` is at most about
    ``|lambda - mu|``, which the subtracted eigenvalue error covers.)
    Measured on the trust study (fresh seed 3805153754, ``chain`` model 25, 45 states, an
    eigenvalue error of 1.3e-4 relative): without this rule a deflated measure kept an
    uncontrollable mode of a strongly non-normal chain, unflagged.

    Returns
    -------
    dict
        Cluster index -> lower figure of the deflated measure (relative to the scale).
    """
    t = cert.tolerance
    hi = FRAGILITY_FACTOR * t
    scale = cert.scale
    mult = cert.multiplicities
    counted = cert._count(side, t)
    if (np.any((counted > 0) & (counted < mult)) or not np.any(counted)
            or float(radius.max()) > hi):
        return {}
    up = cert.controllability if side == "c" else cert.observability
    low = cert.controllability_lower if side == "c" else cert.observability_lower
    measured = cert.controllability_measured if side == "c" else cert.observability_measured
    removed = counted > 0
    reps = cert.eigenvalues
    gone = reps[removed]
    candidates = [c for c in np.nonzero(~removed & (mult == 1) & measured & (low <= hi)
                                        & (up > t))[0]
                  if c not in cert._uncounted
                  and float(np.abs(gone - reps[c]).min()) > FRAGILITY_FACTOR * hi * scale]
    if not candidates:
        return {}
    select = removed[pos_label]
    sub = np.nonzero(np.diag(schur.T, -1))[0]
    select[sub + 1] |= select[sub]          # a 2 x 2 block moves as one
    select[sub] = select[sub + 1]
    k = int(select.sum())
    n = select.size
    if not 0 < k < n:
        return {}
    keep = n - k
    if side == "c":   # the removed clusters to the bottom: (T_11, Q_1^T B) is the pair on R
        Ts, Qs, *_, info = lapack.dtrsen((~select).astype(np.int32), schur.T, schur.Q, job="N")
        if info != 0:
            return {}
        XQ = Qs.T @ X
        block, pair, neglected = Ts[:keep, :keep], XQ[:keep], XQ[keep:]
    else:             # dual: the removed clusters to the top, (T_22, C Q_2)
        Ts, Qs, *_, info = lapack.dtrsen(select.astype(np.int32), schur.T, schur.Q, job="N")
        if info != 0:
            return {}
        XQ = X @ Qs
        block, pair, neglected = Ts[k:, k:], XQ[:, k:], XQ[:, :k]
    local = _Schur(None, triangle=np.array(block))
    rest = float(frobenius(neglected)) / scale
    out = {}
    for c in candidates:
        value = reps[c]
        if abs(value.imag) <= _CLUSTER_FACTOR * norm_A:
            value = complex(value.real, 0.0)
        measured = float(_measure(local, pair, value, side, 1)[0]) / scale
        lower = measured - float(radius[c]) - rest
        if lower > hi:
            out[int(c)] = lower
    return out
