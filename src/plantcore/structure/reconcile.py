"""Reconciling the staircase with the modal certificate: which method decides, and how.

The staircase (:mod:`plantcore.structure.staircase_kernels`) and the modal certificate
(:mod:`plantcore.structure.certificate`) decide the part sizes independently.  This module
turns their comparison into decision records and, when they disagree, builds the Kalman
decomposition that the certificate supports from spectral subspaces:

* They agree, at the tolerance and at both ends of the window ``[tol / 100, 100 tol]``:
  the answer stands, and staircase decisions whose margins lie inside the window are
  recorded as examined and stable (not fragile).
* They agree at the tolerance but the certificate's sizes change inside the window: the
  answer depends on the tolerance; the certificate's decisions say what changes.
* They disagree: when every eigenvalue cluster belongs to one part and the certificate's
  sizes are the same across the window, the controllable subspace R and the unobservable
  subspace N are spectral (invariant) subspaces.  The real Schur form is reordered
  (LAPACK ``?trsen``; G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., 2013,
  section 7.6) to the part order (2, 1, 4, 3), so that its leading Schur vectors span
  R ∩ N, R and R + N, and N is completed by solving one Sylvester equation that decouples
  part 4 from part 1 (C. A. Bavely and G. W. Stewart, "An algorithm for computing reducing
  subspaces by block diagonalization", SIAM J. Numer. Anal. 16(2), 359-367, 1979).  The
  entries that the zero pattern sets to zero are measured; the decomposition is used only
  when they are below the top of the window, ``100 tol`` (its measured backward error, which
  includes them, is reported with the result).  Otherwise the staircase answer is
  returned, marked fragile with a conflict.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.linalg import lapack

from plantcore.core.rank import FRAGILITY_FACTOR, RankDecision
from plantcore.core.safe_norms import frobenius
from plantcore.structure.certificate import controllable_basis, schur_eigenvalues

__all__ = ["bounded_agreement", "certificate_decisions", "confirm_window", "deflated_note",
           "deflation_allowed",
           "spectral_decomposition", "strongly_rescaled", "within_bounds"]


def _sizes_text(sizes) -> str:
    return "(" + ", ".join(str(int(s)) for s in sizes) + ")"


def within_bounds(cert, staircase_sizes, t: float, *, part4_unknown: bool = False) -> bool:
    """True when the staircase's numbers of uncontrollable (``n3 + n4``) and unobservable
    (``n2 + n4``) states lie within the certificate's bounds at the tolerance ``t``
    (:meth:`~plantcore.structure.certificate.ModalCertificate.count_bounds`).

    ``part4_unknown``: the caller found parts 1 and 2 and the uncontrollable dimension
    only (``staircase_sizes = (n1, n2, n3 + n4, 0)``), so the unobservable count may lie
    anywhere from ``n2`` to ``n2 + n3 + n4``.
    """
    s = tuple(int(x) for x in staircase_sizes)
    low_c, high_c = cert.count_bounds("c", t)
    low_o, high_o = cert.count_bounds("o", t)
    unc = s[2] + s[3]
    uno_low = s[1] + s[3]
    uno_high = uno_low + (s[2] if part4_unknown else 0)
    return low_c <= unc <= high_c and uno_low <= high_o and low_o <= uno_high


def bounded_agreement(cert, staircase_sizes, *, part4_unknown: bool = False):
    """How the staircase's sizes meet a certificate that could not count some clusters.

    A defective eigenvalue whose Jordan chains run through most of the model (the
    ``repeated`` family of the trust study: every eigenvalue equal, blocks shared between
    the parts) is measured at its mean, but its copies are not counted: a short staircase
    of its own block is no second method there.  The certificate then still bounds the
    counts (:meth:`~plantcore.structure.certificate.ModalCertificate.count_bounds`: from
    the geometric to the algebraic multiplicity).  Returns None when the rule does not
    apply (no uncounted cluster, or a cluster left undecided by its eigenvalue's own error
    somewhere in the window); else the window tolerances at which the staircase's sizes
    lie outside the bounds (empty: consistent across the window, so the certificate does
    not contradict the staircase, whose own margins decide).
    """
    if cert is None or not cert.has_uncounted():
        return None
    t = cert.tolerance
    window = (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR)
    if any(cert.undecided_by_sensitivity(x) for x in window):
        return None
    return tuple(x for x in window
                 if not within_bounds(cert, staircase_sizes, x, part4_unknown=part4_unknown))


def bounded_text(cert, staircase_decisions) -> str:
    """Why a staircase answer that lies within the certificate's bounds stays fragile.

    A staircase run through a defective eigenvalue it shares with other parts can keep
    rounding amplified along the Jordan chains (a perturbation ``delta`` moves the
    eigenvalues of a chain of length ``j`` by ``delta^(1/j)``; J. H. Wilkinson, *The
    Algebraic Eigenvalue Problem*, 1965, chapter 2; C. C. Paige 1981 for the staircase) or
    shrink a real coupling to rounding, so its margins prove nothing there, and the
    certificate only bounds the count.  Measured on the trust study's ``repeated`` family
    (900 models, fresh seed 2060040533): three observability staircases were wrong with
    every kept value above 0.07 relative (1e9 tol) and the dropped one at 3e-16, and on
    600 more (seeds 20261203 and 777) 40 wrong answers kept values from 1 tol to 4e8 tol:
    no margin separates them from the right ones.  The count by feedback invariance
    (:mod:`plantcore.structure.feedback_count`) is tried first; this text applies where it
    could not count.
    """
    own = [d for d in staircase_decisions if not (d.check_only or d.superseded)]
    kept = min([d.smallest_kept for d in own] + [math.inf])
    dropped = max([d.largest_dropped for d in own] + [0.0])
    count = len(cert._uncounted)
    return (f"the certificate bounds but cannot count the copies of {count} repeated "
            "eigenvalue cluster(s) (counting them would take a staircase as long as the one "
            "checked, and the copies that stay under a state feedback could not be counted "
            "across the window either); the staircase's count lies within the bounds across "
            f"the window, but beside such a cluster its margins (smallest kept {kept:.2g}, "
            f"largest dropped {dropped:.2g}) are no proof: no second method decides")


def _bounded_decisions(cert, staircase_sizes, outside, staircase_decisions) -> tuple:
    """The certificate's two check decisions under :func:`bounded_agreement`."""
    t = cert.tolerance
    n = cert.n
    count = len(cert._uncounted)
    conflict = t in outside
    text = bounded_text(cert, staircase_decisions)
    if outside:
        text = (f"the staircase gives the parts {_sizes_text(staircase_sizes)}, outside the "
                "bounds the PBH measures give for "
                f"{count} repeated eigenvalue cluster(s) at "
                + ", ".join(f"{x:.2g}" for x in outside))
    out = []
    for side, word in (("c", "uncontrollable"), ("o", "unobservable")):
        low, high = cert.count_bounds(side, t)
        kept, dropped = cert.counts_summary(side)
        label = (f"modal certificate: modes not {word} (between {n - high} and {n - low}: "
                 f"{count} repeated cluster(s) bounded, not counted)")
        out.append(RankDecision(label, n - low, n, kept, dropped, t, conflict=conflict,
                                check_only=True, window_outcome=text))
    return tuple(out)


def certificate_decisions(cert, staircase_sizes, *, decided: bool = False,
                          part4_unknown: bool = False, staircase_decisions=()) -> tuple:
    """The certificate's two decisions (modes proven uncontrollable, unobservable).

    ``staircase_sizes`` are the four part sizes the staircase found; the decisions carry a
    conflict when the certificate's sizes differ from them and ``decided`` is False (when
    the certificate decided the answer, the staircase's decisions are the superseded ones).
    Where the certificate only bounds the counts of some clusters
    (:func:`bounded_agreement`), the staircase's sizes are checked against the bounds
    instead (``part4_unknown`` as for :func:`within_bounds`): a conflict only when the
    staircase's sizes lie outside them, else fragile for the reason
    :func:`bounded_text` gives (``staircase_decisions`` supply its margins).
    """
    if cert is None:
        return ()
    t = cert.tolerance
    if not decided:
        outside = bounded_agreement(cert, staircase_sizes, part4_unknown=part4_unknown)
        if outside is not None:
            return _bounded_decisions(cert, staircase_sizes, outside, staircase_decisions)
    window = cert.window_sizes()
    low, high = window[t / FRAGILITY_FACTOR], window[t * FRAGILITY_FACTOR]
    here = window[t]
    outcome = ""
    if low != here or high != here:
        outcome = (f"inside the window the part sizes change: {_sizes_text(low)} at "
                   f"{t / FRAGILITY_FACTOR:.2g}, {_sizes_text(here)} at {t:.2g}, "
                   f"{_sizes_text(high)} at {t * FRAGILITY_FACTOR:.2g}")
    outcome = _with_undecided(outcome, cert)
    conflict = tuple(here) != tuple(staircase_sizes) and not decided
    n = cert.n
    out = []
    for side, label, lost in (("c", "modal certificate: modes not uncontrollable",
                               here[2] + here[3]),
                              ("o", "modal certificate: modes not unobservable",
                               here[1] + here[3])):
        kept, dropped = cert.counts_summary(side)
        label += deflated_note(cert, side)
        text = outcome
        if conflict:
            text = (f"the staircase gives the parts {_sizes_text(staircase_sizes)}, the PBH "
                    f"measures {_sizes_text(here)}") + (f"; {outcome}" if outcome else "")
        out.append(RankDecision(label, n - lost, n, kept, dropped, t, conflict=conflict,
                                check_only=not decided, window_outcome=text))
    return tuple(out)


def deflated_note(cert, side: str) -> str:
    """The label's note on the clusters one side's count keeps by their measure on the
    deflated pair (see :func:`plantcore.structure.certificate._deflate`); empty if none."""
    count = len(cert._deflated(side))
    if not count:
        return ""
    return (f" ({count} cluster(s) whose whole-model measure lies inside the window kept by "
            "their measure on the deflated pair, all above the window)")


def certificate_finds_more(cert_sizes, staircase_sizes) -> bool:
    """True when the certificate proves at least as many modes uncontrollable and as many
    unobservable as the staircase kept out, and more of one kind.

    That is the direction in which the staircase is known to fail (it keeps rounding noise
    as couplings); the certificate then decides.  The other way round, the staircase's
    dropped singular values are themselves backward-stable evidence (a perturbation of
    that size makes the modes exactly uncontrollable), so a certificate that misses them
    does not overrule it: the disagreement is reported as a conflict instead.
    """
    c, s = tuple(cert_sizes), tuple(staircase_sizes)
    unc = (c[2] + c[3], s[2] + s[3])
    uno = (c[1] + c[3], s[1] + s[3])
    return unc[0] >= unc[1] and uno[0] >= uno[1] and (unc[0] > unc[1] or uno[0] > uno[1])


def _with_undecided(outcome: str, cert) -> str:
    """Add the clusters the certificate cannot decide inside the window."""
    t = cert.tolerance
    count = max(cert.undecided(x) for x in (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR))
    if not count:
        return outcome
    text = undecided_text(count)
    return f"{outcome}; {text}" if outcome else text


#: Binary orders of state scaling up to which the equilibrated coordinates count as the
#: user's own for confirming a dropped value (see :func:`confirm_window`).
MILD_SCALING_ORDERS = 10

def strongly_rescaled(state_scaling) -> bool:
    """True when the equilibration rescaled the states by more than
    :data:`MILD_SCALING_ORDERS` binary orders (largest over smallest factor)."""
    if state_scaling is None or not np.size(state_scaling):
        return False
    spread = float(np.max(state_scaling)) / float(np.min(state_scaling))
    return spread > 2.0 ** MILD_SCALING_ORDERS


#: Beyond :data:`MILD_SCALING_ORDERS`, the equilibrated coordinates still confirm a dropped
#: value when the balancing's algebraic connectivity is at least this many times the
#: tolerance (the top of the window; see :func:`confirm_window`).
WELL_DETERMINED_CONNECTIVITY = FRAGILITY_FACTOR


def deflation_allowed(state_scaling, connectivity, tol: float) -> bool:
    """Whether the modal certificate may use its deflated measure (see
    :func:`plantcore.structure.certificate._deflate`) on a model: always when the
    equilibration rescaled the states by at most :data:`MILD_SCALING_ORDERS` binary orders,
    and beyond that only when the balanced scaling is well determined (``connectivity``, a
    callable giving the algebraic connectivity of the balanced system matrix, at least
    :data:`WELL_DETERMINED_CONNECTIVITY` ``tol``), the rule :func:`confirm_window` applies
    to a dropped value.  Where the balancing may have shrunk a real coupling to rounding,
    a flag that the deflated measure would lift can be the only sign of a dropped mode
    (trust study seed 20261203, ``scaled`` model 276: connectivity 1.4e-6 tol)."""
    if not strongly_rescaled(state_scaling):
        return True
    return connectivity() >= WELL_DETERMINED_CONNECTIVITY * tol


def undecided_text(count: int) -> str:
    """Why ``count`` clusters are left undecided by the certificate (one wording)."""
    return (f"the certificate cannot decide {count} eigenvalue cluster(s): the PBH measure "
            "exceeds the tolerance by less than the computed eigenvalue's own error, or the "
            "copies of a defective eigenvalue lie on Jordan chains too long to count apart "
            "from the staircase")


def confirm_window(decisions, cert, sizes, *, rank: int | None = None,
                   state_scaling=None, connectivity=None) -> tuple:
    """Staircase decisions, marked as examined across the window when the certificate
    gives the same part sizes (or, with ``rank``, the same number of modes that are not
    uncontrollable) at every tolerance of it.

    A kept value near the tolerance is confirmed so.  A value the staircase dropped inside
    the window would be kept at a smaller tolerance, but the certificate proves the same
    modes uncontrollable there and overrules a staircase that keeps them
    (:func:`certificate_finds_more`), so it is confirmed too, provided the coordinates both
    methods measured in are the model's own: either the equilibration rescaled the states
    by at most :data:`MILD_SCALING_ORDERS` binary orders (``state_scaling``, the factors
    ``s`` of ``x = diag(s) x_e``), or the balanced scaling is well determined by the model,
    whatever scaling it came in: the algebraic connectivity of the balanced system matrix
    (``connectivity``, a callable evaluated only when needed; see
    :func:`plantcore.structure.balancing_connectivity.balancing_connectivity`) is at least
    the top of the window, ``100 tol`` (:data:`WELL_DETERMINED_CONNECTIVITY`).

    Otherwise the balancing may have shifted a nearly decoupled group of states by a factor
    that its stopping rule, not the model, chose, and a coupling that the rescaling made
    look like rounding fools both methods (measured: a 13-state model with exact zeros,
    states scaled by up to 2^30, equilibrated with a spread of 2^55 and connectivity 1.5e-16,
    lost 4 controllable modes to a dropped value of 6e-13): such a dropped value stays
    fragile.  A model whose states were rescaled by exact powers of two but whose balanced
    form is well determined (connectivity 1e-9 .. 1e-2 measured on the trust study's
    ``scaled`` family, against at most 4e-13 where this happened) is decided as the
    unscaled one.
    """
    if cert is None:
        return tuple(decisions)
    t = cert.tolerance
    if max(cert.undecided(x) for x in (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR)):
        return tuple(decisions)
    if rank is not None:
        for x in (t / FRAGILITY_FACTOR, t, t * FRAGILITY_FACTOR):
            if cert.n - int(cert.uncontrollable_copies(x).sum()) != rank:
                return tuple(decisions)
    elif any(tuple(v) != tuple(sizes) for v in cert.window_sizes().values()):
        return tuple(decisions)
    decisions = tuple(decisions)
    dropped_in_window = any(not (d.check_only or d.superseded)
                            and d.largest_dropped >= d.tolerance / FRAGILITY_FACTOR
                            for d in decisions)
    dropped_too = True
    if dropped_in_window:
        dropped_too = not strongly_rescaled(state_scaling)
        if not dropped_too and connectivity is not None:
            dropped_too = connectivity() >= WELL_DETERMINED_CONNECTIVITY * t
    return tuple(d if d.check_only or d.superseded
                 or (not dropped_too and d.largest_dropped >= d.tolerance / FRAGILITY_FACTOR)
                 else dataclasses.replace(d, window_outcome="") for d in decisions)


def supersede(decisions) -> tuple:
    """The staircase's decisions, kept in the record but no longer deciding."""
    return tuple(dataclasses.replace(d, superseded=True) for d in decisions)


@dataclass(frozen=True)
class SpectralDecomposition:
    """A Kalman decomposition built from spectral subspaces (equilibrated coordinates).

    ``T`` has orthonormal columns within each part; ``A_z = T_inv A T`` etc., with the
    zero pattern set exactly; ``zeroed`` is the largest entry set to zero, relative to the
    norm of its matrix.
    """

    T: np.ndarray
    T_inv: np.ndarray
    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    sizes: tuple
    zeroed: float


def _positions_part(T, reps, labels):
    """The part of each diagonal position of a real Schur form (nearest cluster)."""
    ev = schur_eigenvalues(T)
    sub = np.nonzero(np.diag(T, -1))[0]
    part = labels[np.argmin(np.abs(ev[:, None] - reps[None, :]), axis=1)]
    part[sub + 1] = part[sub]            # a 2 x 2 block belongs to one part
    return part


def _orthonormal_complement(X: np.ndarray, k: int, threshold: float = 1e-8) -> np.ndarray:
    """An orthonormal basis of the orthogonal complement of ``range(X)`` in R^k."""
    if X.shape[1] == 0:
        return np.eye(k)
    U, s, _ = np.linalg.svd(X, full_matrices=True)
    return U[:, int(np.count_nonzero(s > threshold * max(1.0, s[0]))):]


def _local_parts(A, B, C, threshold: float) -> list:
    """Bases of the four Kalman parts of a small pair (its block of the Schur form).

    R and the observable directions come from orthogonal staircases of the block
    (P. Van Dooren, "The generalized eigenstructure problem in linear system theory",
    IEEE Trans. Automatic Control 26(1), 111-129, 1981), N is the orthogonal complement
    of the observable directions; then part 2 = R ∩ N, part 1 = R ⊖ part 2, part 4 =
    N ⊖ part 2 and part 3 the complement of R + N (R. E. Kalman, "Mathematical
    description of linear dynamical systems", SIAM J. Control 1(2), 152-192, 1963).
    Cosines are judged at ``1e-8``, as in :func:`plantcore.structure.certificate._local_split`.
    """
    k = A.shape[0]
    R = controllable_basis(A, B, threshold)
    O = controllable_basis(A.T, C.T, threshold)        # observable directions (dual)
    N = _orthonormal_complement(O, k)
    # R a lies in N  <=>  O^T R a = 0
    if R.shape[1]:
        inside = _orthonormal_complement((O.T @ R).T, R.shape[1]) if O.shape[1] else \
            np.eye(R.shape[1])
        P2 = R @ inside
        P1 = R @ _orthonormal_complement(inside, R.shape[1])
    else:
        P1 = P2 = np.zeros((k, 0))
    P4 = N @ _orthonormal_complement(N.T @ P2, N.shape[1]) if N.shape[1] else np.zeros((k, 0))
    P3 = _orthonormal_complement(np.hstack([P1, P2, P4]), k)
    return [P1, P2, P3, P4]


def spectral_decomposition(A, B, C, cert) -> SpectralDecomposition | None:
    """The Kalman decomposition from the certificate's part of every cluster.

    The real Schur form is reordered to put the clusters shared between parts first, then
    the others in the part order (2, 1, 4, 3).  The shared block is decoupled from the rest
    by one Sylvester equation (Bavely and Stewart 1979), so that its own small pair carries
    its share of R and N and is split by :func:`_local_parts`; in the rest, one more
    Sylvester equation decouples part 4 from part 1.  Returns None when the reordering
    fails, a decoupling is ill conditioned, the parts found do not have the certificate's
    sizes, or the entries set to zero exceed ``100 tol`` (the split is then not supported).
    """
    if cert is None:
        return None
    n = A.shape[0]
    shared = cert.shared_clusters()
    unc = cert.uncontrollable_copies() > 0
    uno = cert.unobservable_copies() > 0
    labels = 1 + uno.astype(int) + 2 * unc.astype(int)
    labels[shared] = 0
    reps = cert.eigenvalues
    T, Q = cert.schur if cert.schur is not None else scipy.linalg.schur(A, output="real")
    order = (0, 2, 1, 4, 3)
    for end in range(1, len(order)):
        part = _positions_part(T, reps, labels)
        select = np.isin(part, order[:end])
        if 0 < select.sum() < n:
            T, Q, *_, info = lapack.dtrsen(select.astype(np.int32), T, Q, job="N")
            if info != 0:
                return None
    part = _positions_part(T, reps, labels)
    counts = [int(np.sum(part == k)) for k in order]
    if not np.array_equal(part, np.repeat(order, counts)):
        return None
    ns, n2, n1, n4, n3 = counts
    S, rest = slice(0, ns), slice(ns, n)
    Y = np.zeros((ns, n - ns))
    if ns and ns < n:
        Y = _decoupling(T[S, S], T[rest, rest], T[S, rest])
        if Y is None:
            return None
    columns = [[], [], [], []]                 # per part, columns in Schur coordinates
    if ns:
        Bq, Cq = Q.T @ B, C @ Q
        local = _local_parts(T[S, S], Bq[S] - Y @ Bq[rest], Cq[:, S],
                             cert.tolerance * cert.scale)
        for k, P in enumerate(local):
            if P.shape[1]:
                columns[k].append(np.vstack([P, np.zeros((n - ns, P.shape[1]))]))
    # the rest, in its own coordinates: parts 2, 1, 4, 3 in this order
    o2, o1, o4 = 0, n2, n2 + n1
    o3 = o4 + n4
    nr = n - ns
    G_r = [np.zeros((nr, c)) for c in (n1, n2, n3, n4)]
    G_r[0][o1:o1 + n1] = np.eye(n1)
    G_r[1][o2:o2 + n2] = np.eye(n2)
    G_r[2][o3:o3 + n3] = np.eye(n3)
    if n4:
        W = np.zeros((nr, n4))
        W[o4:o4 + n4] = np.eye(n4)
        if n1:
            T_r = T[rest, rest]
            Y14 = _decoupling(T_r[o1:o1 + n1, o1:o1 + n1], T_r[o4:o4 + n4, o4:o4 + n4],
                              T_r[o1:o1 + n1, o4:o4 + n4], limit=math.inf)
            if Y14 is None:
                return None
            W[o1:o1 + n1] = Y14
        G_r[3] = np.linalg.qr(W)[0]
    for k, X in enumerate(G_r):
        if X.shape[1]:
            columns[k].append(np.vstack([Y @ X, X]))
    parts = [np.hstack(c) if c else np.zeros((n, 0)) for c in columns]
    sizes = tuple(P.shape[1] for P in parts)
    if sum(sizes) != n or sizes != tuple(cert.sizes()):
        return None
    G = np.hstack(parts)
    try:
        G_inv = np.linalg.inv(G)
    except np.linalg.LinAlgError:
        return None
    T_e = Q @ G
    T_inv = G_inv @ Q.T
    Az = G_inv @ T @ G
    Bz = T_inv @ B
    Cz = C @ T_e
    zeroed = _impose_kalman_zeros(Az, Bz, Cz, sizes, [frobenius(X) for X in (A, B, C)])
    if zeroed > FRAGILITY_FACTOR * cert.tolerance:
        return None
    return SpectralDecomposition(T_e, T_inv, Az, Bz, Cz, sizes, zeroed)


def _decoupling(T11, T22, T12, limit: float = 1e6):
    """``Y`` with ``T11 Y - Y T22 = -T12`` (so that ``[[I, Y], [0, I]]`` block-diagonalizes
    ``[[T11, T12], [0, T22]]``; Bavely and Stewart 1979), or None when it cannot be solved
    or its norm exceeds ``limit`` (the blocks are then too close to decouple reliably)."""
    try:
        Y = scipy.linalg.solve_sylvester(T11, -T22, -T12)
    except (np.linalg.LinAlgError, ValueError):
        return None
    if not np.all(np.isfinite(Y)) or frobenius(Y) > limit:
        return None
    return Y


def _impose_kalman_zeros(Az, Bz, Cz, sizes, norms) -> float:
    """Set the Kalman zero pattern exactly; return the largest entry set to zero, relative
    to the norm of its matrix."""
    cuts = np.cumsum([0, *sizes])
    blocks = [slice(int(cuts[i]), int(cuts[i + 1])) for i in range(4)]
    norms = [max(float(x), 1e-300) for x in norms]
    zeroed = 0.0
    for i, j in ((0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)):
        block = Az[blocks[i], blocks[j]]
        if block.size:
            zeroed = max(zeroed, float(np.abs(block).max()) / norms[0])
        Az[blocks[i], blocks[j]] = 0.0
    for i in (2, 3):
        if Bz[blocks[i]].size:
            zeroed = max(zeroed, float(np.abs(Bz[blocks[i]]).max()) / norms[1])
        Bz[blocks[i]] = 0.0
    for j in (1, 3):
        if Cz[:, blocks[j]].size:
            zeroed = max(zeroed, float(np.abs(Cz[:, blocks[j]]).max()) / norms[2])
        Cz[:, blocks[j]] = 0.0
    return zeroed
