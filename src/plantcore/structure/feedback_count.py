r"""Counting the uncontrollable copies of a defective eigenvalue by feedback invariance.

The modal certificate (:mod:`plantcore.structure.certificate`) counts the uncontrollable
copies of a cluster of equal eigenvalues by a short staircase of the cluster's own block.
When the cluster's Jordan chains run through most of the model (every eigenvalue equal,
blocks shared between the parts), that staircase is as long as the one being checked, is
no second method, and the certificate only bounds the count.  This module supplies a
second method for those clusters.

Method
------
The uncontrollable modes of ``(A, B)`` are exactly the eigenvalues that no state feedback
moves: in a Kalman basis ``A + B K = [[A_11 + B_1 K_1, *], [0, A_22]]`` for every ``K``,
so the eigenvalues of ``A_22`` stay, while for a generic ``K`` those of the controllable
pair go anywhere (W. M. Wonham, "On pole assignment in multi-input controllable linear
systems", IEEE Trans. Automatic Control 12(6), 660-665, 1967; the fixed modes of S. H.
Wang and E. J. Davison, "On the stabilization of decentralized control systems", IEEE
Trans. Automatic Control 18(5), 473-478, 1973).  With one fixed random ``K`` the
controllable copies of a shared defective eigenvalue leave its cluster, and the copies
that stay are all uncontrollable: the certificate of ``(A + B K, B)`` counts them with a
staircase of one step, whatever the length of the chains in ``A``.

Controllability is invariant under feedback, and so, up to a factor, are the PBH
measures: ``[A + B K - lambda I, B] = [A - lambda I, B] [[I, 0], [K, I]]``, whose last
factor and its inverse have norm at most ``1 + ||K||_2``, so every singular value moves by
at most that factor (``||K||_2`` is one of :data:`GAINS`; the columns of ``B`` are scaled
to the model's scale, so ``K`` is dimensionless).  A count that is the same at every tolerance
of the decision window widened by that factor on both sides is therefore the count of
``(A, B)`` at every tolerance of the window.  The dual (``A^T + C^T L``) counts the
unobservable copies; the copies in neither subspace (part 4) follow from the unobservable
copies of the model restricted to its controllable subspace, counted the same way.

How it can fail: where a moved eigenvalue lands inside the cluster, or the fixed copies
scatter so far (rings of radius ``eps^(1/j)`` for chains of length ``j``) that the
certificate of ``A + B K`` cannot count them, no count is returned and the answer stays
bounded, not counted (fragile).  The copies in neither subspace are split this way only
for a single shared cluster (or a conjugate pair); with several, the answer stays bounded.

Cost: only models with an uncounted cluster (a defective eigenvalue of five or more copies
whose chains run through the model) pay it: one eigendecomposition and certificate of
``A + B K`` per gain tried (up to three) and side, and as many for the part-4 count, each
``O(n^3)``.  Measured on the trust study's ``repeated`` family (n = 12-20): right and
unflagged 171 of 300 with it, 82 without (seed 20261203; three more seeds in the README).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from plantcore.core.rank import FRAGILITY_FACTOR
from plantcore.structure.certificate import (
    ModalCertificate,
    _nearest,
    controllable_basis,
    modal_certificate,
    schur_eigenvalues,
)

__all__ = ["GAINS", "resolve_uncounted"]

#: ``||K||_2`` of the feedbacks tried, in turn (dimensionless: inputs scaled to the model's
#: scale); the first whose count passes every check is used.
GAINS = (1.0, 4.0, 16.0)
_SEED = 19670601


@dataclasses.dataclass(frozen=True)
class _FeedbackCount:
    count: int                 # uncontrollable copies, the same across the widened window
    kept: float                # smallest figure kept, divided by the factor 1 + gain
    dropped: float             # largest figure dropped, times the factor
    cert: ModalCertificate     # the certificate of (A + X K, X)
    eigenvalues: np.ndarray    # the computed eigenvalues of A + X K
    factor: float              # 1 + gain


def _feedback_count(A, X, *, scale: float, tol: float, gain: float) -> _FeedbackCount | None:
    """Uncontrollable copies of ``(A, X)`` counted on ``(A + X K, X)`` with ``||K||_2 =
    gain`` (module notes), or None when that count is not the same across the widened
    window."""
    n, m = X.shape
    if m == 0 or n == 0:
        return None
    G = np.random.default_rng(_SEED).standard_normal((m, n))
    G *= gain / float(np.linalg.norm(G, 2))
    A_f = A + X @ G
    cert = modal_certificate(A_f, X, np.zeros((0, n)), scale=scale, tol=tol, deflate=False,
                             keep_schur=True)
    if cert is None or cert.has_uncounted():
        return None
    factor = 1.0 + gain
    lo, hi = tol / FRAGILITY_FACTOR, tol * FRAGILITY_FACTOR
    points = (lo / factor, lo, tol, hi, hi * factor)
    if any(cert.undecided(x) for x in points):
        return None
    counts = {int(cert.uncontrollable_copies(x).sum()) for x in points}
    if len(counts) != 1:
        return None
    kept, dropped = cert.counts_summary("c")
    # the computed eigenvalues, from the certificate's own Schur form where it made one
    eigenvalues = (schur_eigenvalues(cert.schur[0]) if cert.schur is not None
                   else np.linalg.eigvals(A_f))
    return _FeedbackCount(counts.pop(), kept / factor, dropped * factor,
                          dataclasses.replace(cert, schur=None), eigenvalues, factor)


def _clean(found: _FeedbackCount) -> bool:
    """True when every cluster of ``A + X K`` is wholly fixed or wholly moved and each
    fixed cluster's computed eigenvalues lie within a quarter of the distance of the
    nearest eigenvalue of another cluster (so no moved copy sits among fixed ones, and no
    ring of fixed copies was split)."""
    fc = found.cert
    count = fc.uncontrollable_copies()
    if np.any((count > 0) & (count < fc.multiplicities)):
        return False
    owner = _nearest(found.eigenvalues, fc.eigenvalues)
    for j in np.nonzero(count)[0]:
        mine = owner == j
        if np.all(mine):
            continue
        distance = np.abs(found.eigenvalues - fc.eigenvalues[j])
        if distance[~mine].min() <= 4.0 * distance[mine].max():
            return False
    return True


def _first_count(A, X, *, scale: float, tol: float, accept=None) -> _FeedbackCount | None:
    """The first feedback count over :data:`GAINS` that passes :func:`_clean` and
    ``accept`` (a callable, or None)."""
    for gain in GAINS:
        found = _feedback_count(A, X, scale=scale, tol=tol, gain=gain)
        if found is not None and _clean(found) and (accept is None or accept(found)):
            return found
    return None


def _group(cert: ModalCertificate, clusters) -> list | None:
    """Clusters as one group: a single cluster or a conjugate pair of equal multiplicity
    (sorted); None otherwise (several distinct eigenvalues left uncounted on one side were
    tried on the trust study and gained nothing)."""
    clusters = sorted(int(c) for c in clusters)
    if len(clusters) == 1:
        return clusters
    if len(clusters) == 2:
        a, b = clusters
        za, zb = cert.eigenvalues[a], cert.eigenvalues[b]
        if cert.multiplicities[a] == cert.multiplicities[b] and za.imag != 0.0 and \
                abs(za - np.conj(zb)) <= 1e-8 * max(abs(za), 1e-300):
            return clusters
    return None


def _window(t: float) -> tuple:
    return (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR)


def _fixed_copies(cert, group, found: _FeedbackCount) -> dict | None:
    """Copies of each cluster of ``group`` that stay under the feedback, or None when the
    picture is not clean (on top of :func:`_clean`): the count of every cluster of
    ``A + X K`` must be the same across the widened window, and the fixed copies nearest
    to a cluster of the group must lie within a quarter of the distance from its centre
    of every other computed eigenvalue."""
    fc = found.cert
    reps = cert.eigenvalues
    lo, hi = cert.tolerance / FRAGILITY_FACTOR, cert.tolerance * FRAGILITY_FACTOR
    points = (lo / found.factor, lo, cert.tolerance, hi, hi * found.factor)
    counts = np.array([fc.uncontrollable_copies(x) for x in points])
    if np.any(counts != counts[0]):
        return None
    nearest = _nearest(fc.eigenvalues, reps)
    fixed_cluster = counts[0] == fc.multiplicities      # (_clean: no cluster is partly fixed)
    owner = _nearest(found.eigenvalues, fc.eigenvalues)
    fixed = {}
    for c in group:
        mine_clusters = np.nonzero((nearest == c) & fixed_cluster)[0]
        fixed[c] = int(fc.multiplicities[mine_clusters].sum())
        if fixed[c] > int(cert.multiplicities[c]):
            return None
        mine = np.isin(owner, mine_clusters)
        if np.any(mine) and np.any(~mine):
            distance = np.abs(found.eigenvalues - reps[c])
            if distance[~mine].min() <= 4.0 * distance[mine].max():
                return None
    return fixed


def _resolve_side(cert, side, A, X, scale, tol):
    """New copy values for the uncounted group of one side, or None."""
    uncounted = cert._uncounted_c if side == "c" else cert._uncounted_o
    group = _group(cert, uncounted)
    if group is None:
        return None
    mine = np.zeros(cert.multiplicities.size, dtype=bool)
    mine[group] = True
    others = {int(cert._count(side, x)[~mine].sum()) for x in _window(tol)}
    if len(others) != 1:
        return None
    others = others.pop()

    chosen = {}

    def accept(found):
        fixed = _fixed_copies(cert, group, found)
        chosen["fixed"] = fixed
        return fixed is not None and sum(fixed.values()) == found.count - others and \
            len(set(fixed.values())) == 1

    found = _first_count(A, X, scale=scale, tol=tol, accept=accept)
    if found is None:
        return None
    fixed = chosen["fixed"]
    values = {}
    for c in group:
        k = int(cert.multiplicities[c])
        values[c] = np.sort(np.array([found.dropped] * fixed[c]
                                     + [found.kept] * (k - fixed[c])))
    return values


def resolve_uncounted(cert: ModalCertificate | None, A, B, C) -> ModalCertificate | None:
    """The certificate with its uncounted clusters counted by feedback invariance (module
    notes), where that count holds across the widened window; else ``cert`` unchanged.

    ``A, B, C`` are the arrays the certificate measured (equilibrated, inputs and outputs
    scaled).
    """
    if cert is None or not cert.has_uncounted():
        return cert
    scale, tol = cert.scale, cert.tolerance
    copies = {"c": list(cert._copies_c), "o": list(cert._copies_o)}
    sides = {"c": (A, B), "o": (A.T, C.T)}
    resolved = set()
    for side in ("c", "o"):
        uncounted = cert._uncounted_c if side == "c" else cert._uncounted_o
        if not uncounted:
            continue
        values = _resolve_side(cert, side, *sides[side], scale, tol)
        if values is None:
            return cert
        for c, v in values.items():
            copies[side][c] = v
        resolved |= set(values)
    if set(cert._uncounted) - resolved:
        return cert
    out = dataclasses.replace(cert, _copies_c=tuple(copies["c"]), _copies_o=tuple(copies["o"]),
                              _uncounted=frozenset(), _uncounted_c=frozenset(),
                              _uncounted_o=frozenset())
    # copies in neither subspace for a cluster (or conjugate pair) shared between parts:
    # the part-4 total counted by feedback, less what the other clusters hold
    shared = [c for c in sorted(resolved) if out.shared_clusters()[c]]
    if not shared or B.shape[1] == 0 or C.shape[0] == 0:
        return out          # (a one-sided certificate needs no split of the copies)
    if _group(cert, shared) is None:
        return cert         # several shared clusters: the total does not say how to split
    part4 = _part4_total(out, A, B, C, scale, tol)
    if part4 is None:
        return cert
    local = dict(out._local_both)
    for c in shared:
        local[c] = 0
    zeroed = dataclasses.replace(out, _local_both=local)
    here = {part4 - zeroed.sizes(x)[3] for x in _window(tol)}
    if len(here) != 1:
        return cert
    both = here.pop()
    u, v = out.uncontrollable_copies(), out.unobservable_copies()
    if both < 0 or both % len(shared) or any(both // len(shared) > min(u[c], v[c])
                                             for c in shared):
        return cert
    for c in shared:
        local[c] = both // len(shared)
    return dataclasses.replace(out, _local_both=local)


def _part4_total(cert, A, B, C, scale, tol) -> int | None:
    """Copies in neither the controllable nor the observable subspace: the unobservable
    copies minus those of the model restricted to its controllable subspace, both counted
    by feedback invariance; None when a count does not hold across the widened window."""
    counts = {x: (int(cert.uncontrollable_copies(x).sum()), int(cert.unobservable_copies(x).sum()))
              for x in _window(tol)}
    if len(set(counts.values())) != 1:
        return None
    uncontrollable, unobservable = counts[tol]
    n = A.shape[0]
    W = controllable_basis(A, B, tol * scale)
    if W.shape[1] != n - uncontrollable:
        return None
    if W.shape[1] == 0:
        return unobservable
    A_R, C_R = W.T @ A @ W, C @ W
    found = _first_count(A_R.T, C_R.T, scale=scale, tol=tol)
    if found is None:
        return None
    return unobservable - found.count
