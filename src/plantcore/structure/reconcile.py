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
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.linalg import lapack

from plantcore.core.rank import FRAGILITY_FACTOR, RankDecision
from plantcore.structure.certificate import schur_eigenvalues

__all__ = ["certificate_decisions", "confirm_window", "spectral_decomposition"]


def _sizes_text(sizes) -> str:
    return "(" + ", ".join(str(int(s)) for s in sizes) + ")"


def certificate_decisions(cert, staircase_sizes, *, decided: bool = False) -> tuple:
    """The certificate's two decisions (modes proven uncontrollable, unobservable).

    ``staircase_sizes`` are the four part sizes the staircase found; the decisions carry a
    conflict when the certificate's sizes differ from them and ``decided`` is False (when
    the certificate decided the answer, the staircase's decisions are the superseded ones).
    """
    if cert is None:
        return ()
    t = cert.tolerance
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
        text = outcome
        if conflict:
            text = (f"the staircase gives the parts {_sizes_text(staircase_sizes)}, the PBH "
                    f"measures {_sizes_text(here)}") + (f"; {outcome}" if outcome else "")
        out.append(RankDecision(label, n - lost, n, kept, dropped, t, conflict=conflict,
                                check_only=not decided, window_outcome=text))
    return tuple(out)


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
    text = (f"{count} eigenvalue cluster(s) cannot be decided: their PBH measure exceeds "
            "the tolerance by less than the computed eigenvalue's own error")
    return f"{outcome}; {text}" if outcome else text


def confirm_window(decisions, cert, sizes, *, rank: int | None = None) -> tuple:
    """Staircase decisions, marked as examined across the window when the certificate
    gives the same part sizes (or, with ``rank``, the same number of modes that are not
    uncontrollable) at every tolerance of it."""
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
    # Both sides are confirmed.  A value the staircase dropped inside the window would be
    # kept at a smaller tolerance, but the certificate proves the same modes uncontrollable
    # there too, and it overrules a staircase that keeps them (certificate_finds_more), so
    # the answer returned is the same at every tolerance of the window.
    return tuple(d if d.check_only or d.superseded else dataclasses.replace(d, window_outcome="")
                 for d in decisions)


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


def spectral_decomposition(A, B, C, cert) -> SpectralDecomposition | None:
    """The Kalman decomposition from the certificate's part of every cluster.

    Returns None when a cluster is shared between parts, the reordering fails, or the
    entries set to zero exceed ``100 tol`` (the split is then not supported).
    """
    if cert is None or np.any(cert.shared_clusters()):
        return None
    n = A.shape[0]
    unc = cert.uncontrollable_copies() > 0
    uno = cert.unobservable_copies() > 0
    labels = 1 + uno.astype(int) + 2 * unc.astype(int)
    reps = cert.eigenvalues
    T, Q = scipy.linalg.schur(A, output="real")
    for group in ((2,), (2, 1), (2, 1, 4)):
        part = _positions_part(T, reps, labels)
        select = np.isin(part, group)
        if 0 < select.sum() < n:
            T, Q, *_, info = lapack.dtrsen(select.astype(np.int32), T, Q, job="N")
            if info != 0:
                return None
    part = _positions_part(T, reps, labels)
    n2, n1, n4, n3 = (int(np.sum(part == k)) for k in (2, 1, 4, 3))
    if not np.array_equal(part, np.repeat([2, 1, 4, 3], [n2, n1, n4, n3])):
        return None
    s2, s1 = slice(0, n2), slice(n2, n2 + n1)
    s4, s3 = slice(n2 + n1, n2 + n1 + n4), slice(n2 + n1 + n4, n)
    G = np.zeros((n, n))
    G[s1, :n1] = np.eye(n1)
    G[s2, n1:n1 + n2] = np.eye(n2)
    G[s3, n1 + n2:n1 + n2 + n3] = np.eye(n3)
    if n4:
        W = np.zeros((n, n4))
        W[s4] = np.eye(n4)
        if n1:
            W[s1] = scipy.linalg.solve_sylvester(T[s1, s1], -T[s4, s4], -T[s1, s4])
        G[:, n - n4:] = np.linalg.qr(W)[0]
    G_inv = np.linalg.inv(G)
    T_e = Q @ G
    T_inv = G_inv @ Q.T
    Az = G_inv @ T @ G
    Bz = T_inv @ B
    Cz = C @ T_e
    cuts = np.cumsum([0, n1, n2, n3, n4])
    blocks = [slice(int(cuts[i]), int(cuts[i + 1])) for i in range(4)]
    norms = [max(float(np.linalg.norm(X)), 1e-300) for X in (A, B, C)]
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
    if zeroed > FRAGILITY_FACTOR * cert.tolerance:
        return None
    return SpectralDecomposition(T_e, T_inv, Az, Bz, Cz, (n1, n2, n3, n4), zeroed)
