"""A modal cross-check of staircase rank decisions.

The staircase algorithms are backward stable, but a long chain of small subdiagonal blocks
(many states driven through few inputs) makes the computed Krylov basis drift away from
the true controllable subspace, so that rounding noise of ``eps ||A||`` can reappear as a
"coupling" many orders of magnitude larger and be kept as real (C. C. Paige,
"Properties of numerical algorithms related to computing controllability", IEEE Trans.
Automatic Control 26(1), 1981, discusses this sensitivity).  Margins of the staircase's own
decisions do not reveal it.

The cross-check uses an independent, one-sided certificate.  For a computed left
eigenvector ``w`` of ``A`` (``w^H A = lambda w^H``),

.. math::

    \\sigma_{\\min}([A - \\lambda I,\\; B]) \\;\\le\\; \\frac{\\|w^H B\\|}{\\|w\\|},

because ``w^H [A - lambda I, B] = [0, w^H B]`` (the PBH test; M. L. J. Hautus,
"Controllability and observability conditions of linear autonomous systems", 1969).  A
mode with ``||w^H B|| / ||w||`` below the tolerance is therefore certainly uncontrollable
to within the tolerance: a perturbation of ``B`` of that size makes it exactly so.  If more
modes are certainly uncontrollable than the staircase left out, the staircase kept noise,
and the result is marked fragile.  The check never changes an answer, and it can only
under-count (for a repeated eigenvalue, the computed eigenvectors are an arbitrary basis
of the eigenspace and need not show the uncontrollable combination), so it raises no false
alarms on repeated or defective eigenvalues.  The dual test with right eigenvectors and
``C`` checks observability.

The eigenvector bound is only as good as the computed ``w``: for strongly non-normal
``A`` (ill-conditioned eigenvalues) ``w`` carries large errors, and a mode within rounding of
uncontrollable can show ``||w^H B|| / ||w||`` of ``1e-8`` to ``1e-4``.  Then *every* mode
may be within the tolerance of uncontrollable while the staircase, step by step, sees clear
margins.  So when no mode is certified by its eigenvector, the most suspicious one (the
smallest ``||w^H B|| / ||w||``) is measured directly: ``sigma_min([A - lambda I, B])`` at
its computed eigenvalue, the size of the smallest perturbation that makes that ``lambda``
an uncontrollable eigenvalue (R. Eising, "Between controllable and uncontrollable",
Systems & Control Letters 4(5), 263-264, 1984).  It is at most the eigenvector bound and
independent of the eigenvector's accuracy, and it replaces that mode's measure.  (It is
not tried when a mode is already certified: at a repeated eigenvalue it would count the
same uncontrollable direction twice.)

It costs one eigen-decomposition, ``O(n^3)`` with a larger constant than the staircase, and
at most one SVD of the ``n x (n + m)`` matrix, so it runs only up to
:data:`MODAL_CHECK_MAX_STATES` states.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.linalg

from plantcore.core.rank import RankDecision

MODAL_CHECK_MAX_STATES = 400


def modal_measures(A, X, *, scale: float, tol: float, side: str):
    """``||w^H X|| / ||w||`` per left eigenvector (``side="left"``, ``X = B``) or
    ``||X v|| / ||v||`` per right eigenvector (``side="right"``, ``X = C``), relative to
    ``scale``; ``None`` when the model is too large for the check or the eigenvalue
    computation fails.  When none is at most ``tol``, the smallest is replaced by the PBH
    distance at its eigenvalue when that is smaller (see the module notes).  Call it before
    any routine that overwrites ``A``."""
    n = A.shape[0]
    if n == 0 or n > MODAL_CHECK_MAX_STATES or X.size == 0:
        return None
    try:
        if side == "left":
            lam, vecs = scipy.linalg.eig(A, left=True, right=False)
            proj = np.linalg.norm(vecs.conj().T @ X, axis=1)
        else:
            lam, vecs = scipy.linalg.eig(A, left=False, right=True)
            proj = np.linalg.norm(X @ vecs, axis=0)
    except (np.linalg.LinAlgError, ValueError):
        return None
    norms = np.linalg.norm(vecs, axis=0)
    if not (np.all(np.isfinite(proj)) and np.all(norms > 0) and np.all(np.isfinite(lam))):
        return None
    values = proj / norms / scale
    if not np.any(values <= tol):
        i = int(np.argmin(values))
        shift = lam[i].real if lam[i].imag == 0.0 else lam[i]   # real arithmetic if it can
        k = X.shape[1] if side == "left" else X.shape[0]
        M = np.empty((n, n + k) if side == "left" else (n + k, n),
                     dtype=np.result_type(A.dtype, X.dtype, shift))
        M[:n, :n] = A
        M[np.arange(n), np.arange(n)] -= shift
        if side == "left":
            M[:, n:] = X
        else:
            M[n:, :] = X
        try:
            distance = float(np.linalg.svd(M, compute_uv=False)[-1]) / scale
        except np.linalg.LinAlgError:
            distance = math.inf
        values[i] = min(values[i], distance)
    return values


def modal_decision(measures, *, tol: float, missing_found: int, label: str):
    """The cross-check as a check-only :class:`RankDecision` (``None`` without measures).

    ``rank`` is the number of modes the certificate cannot exclude; ``conflict`` is True
    when more modes are certainly missing (measure below ``tol``) than the staircase found
    (``missing_found``).
    """
    if measures is None:
        return None
    g = np.asarray(measures)
    certain = int(np.count_nonzero(g <= tol))
    kept, dropped = g[g > tol], g[g <= tol]
    return RankDecision(label, int(g.size) - certain, int(g.size),
                        float(kept.min()) if kept.size else math.inf,
                        float(dropped.max()) if dropped.size else 0.0, float(tol),
                        conflict=certain > missing_found, check_only=True)
