"""Rank decisions, their margins and the default tolerance.

Every numerical rank that plantcore decides is decided from singular values (of a small
block produced by orthogonal transformations, never of a Krylov matrix) and recorded as a
:class:`RankDecision`.  A decision is *fragile* when its outcome depends on the tolerance:
a kept or dropped singular value lies within a factor :data:`FRAGILITY_FACTOR` of the
tolerance (the *window* ``[tol / 100, 100 tol]``) and no second method has shown the
outcome to be the same across the window, or when a second method contradicts it (see
``RankDecision.window_outcome`` and :mod:`plantcore.structure.reconcile`).

Default tolerance
-----------------
Ranks are decided on the equilibrated model (see :mod:`plantcore.core.equilibration`), with
singular values measured **relative to the model's scale** ``max(||A||_F, ||B||_F,
||C||_F)`` (after input and output columns/rows have been scaled to that size, see
:func:`~plantcore.core.equilibration.io_scaled`).  The default relative tolerance is
:data:`DEFAULT_RELATIVE_TOLERANCE` ``= 5e-11``, chosen as follows:

* A model that went through a similarity transformation of condition number up to about
  ``1e3`` carries rounding noise near ``1e3 * eps ~ 2e-13`` relative.  Such noise must be
  dropped, and not fragile: ``2e-13 <= tol / 100`` requires ``tol >= 2e-11``.
* Couplings of ``1e-8`` relative and above are real and must be kept, and not fragile:
  ``1e-8 >= 100 * tol`` requires ``tol <= 1e-10``.

``5e-11`` lies between the two limits (a factor 2.5 above the noise limit and 2 below the
limit for real couplings).  For large models
the tolerance grows as ``max(5e-11, 20 * n * eps)`` so that the rounding of the
decomposition itself (``O(n eps)`` by the standard backward-error analysis of Householder
transformations; Higham, *Accuracy and Stability of Numerical Algorithms*, 2002, ch. 19)
stays below it; up to n = 11,000 the first term rules.  A user tolerance ``tol`` is also
relative to the model's scale.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["DEFAULT_RELATIVE_TOLERANCE", "FRAGILITY_FACTOR", "RankDecision", "resolve_tolerance",
           "decide_rank", "any_fragile"]


DEFAULT_RELATIVE_TOLERANCE = 5e-11

FRAGILITY_FACTOR = 100.0

_EPS = np.finfo(float).eps


@dataclass(frozen=True)
class RankDecision:
    """One numerical rank decision.

    Attributes
    ----------
    label : str
        What was decided, e.g. ``"controllability step 2"``.
    rank : int
        The rank decided (number of singular values kept).
    size : int
        How many singular values were examined.
    smallest_kept : float
        Smallest singular value kept, relative to the model's scale; ``inf`` when none kept.
    largest_dropped : float
        Largest singular value dropped, relative to the model's scale; ``0.0`` when none.
    tolerance : float
        The relative tolerance used.
    conflict : bool
        True when this decision is a second method that contradicts another decision (see
        :mod:`plantcore.structure.certificate`); the answer then depends on the method and is fragile.
    check_only : bool
        True for a check that decides nothing itself (the certificate checking the
        staircase), so only a ``conflict`` or its ``window_outcome`` (not its margins)
        makes it fragile.
    window_outcome : str or None
        ``None`` when the decision was not examined across the tolerance window.  Otherwise
        the window ``[tolerance / 100, 100 tolerance]`` was examined by an independent
        method (the modal certificate): ``""`` when the outcome (part sizes, minimal order)
        is the same at every tolerance of the window, so a margin inside the window does
        not make the decision fragile; else a sentence saying what changes inside it,
        which makes it fragile.
    superseded : bool
        True when another method decided this outcome instead (the decision is kept in the
        record, says what the staircase found, and makes nothing fragile).
    """

    label: str
    rank: int
    size: int
    smallest_kept: float
    largest_dropped: float
    tolerance: float
    conflict: bool = False
    check_only: bool = False
    window_outcome: str | None = None
    superseded: bool = False

    @property
    def margin(self) -> float:
        """How far the decision is from the tolerance, as a factor (>= 1; large is safe).

        The smaller of ``smallest_kept / tolerance`` and ``tolerance / largest_dropped``.
        """
        up = self.smallest_kept / self.tolerance if self.tolerance > 0 else math.inf
        down = self.tolerance / self.largest_dropped if self.largest_dropped > 0 else math.inf
        return min(up, down)

    @property
    def fragile(self) -> bool:
        """True when the outcome depends on the tolerance: a kept or dropped value lies
        within a factor 100 of the tolerance and the window was not shown to give the same
        outcome (``window_outcome``), or a cross-check contradicts the decision it checks."""
        if self.superseded:
            return False
        if self.conflict:
            return True
        if self.window_outcome is not None:
            return bool(self.window_outcome)
        if self.check_only:
            return False
        return self.margin < FRAGILITY_FACTOR

    def to_dict(self) -> dict:
        """JSON-safe dictionary (``inf`` becomes ``None``)."""
        def safe(x):
            return None if not math.isfinite(x) else float(x)

        return {
            "label": self.label,
            "rank": self.rank,
            "size": self.size,
            "smallest_kept": safe(self.smallest_kept),
            "largest_dropped": float(self.largest_dropped),
            "tolerance": float(self.tolerance),
            "margin": safe(self.margin),
            "fragile": self.fragile,
            "conflict": self.conflict,
            "window_outcome": self.window_outcome,
            "superseded": self.superseded,
        }

    def describe(self) -> str:
        """One line for reports."""
        kept = "none" if not math.isfinite(self.smallest_kept) else f"{self.smallest_kept:.3g}"
        flag = "  CONFLICT" if self.conflict else ("  FRAGILE" if self.fragile else "")
        if self.superseded:
            flag = "  (superseded: another method decided)"
        elif self.fragile and self.window_outcome:
            flag += f" ({self.window_outcome})"
        elif self.window_outcome == "" and self.margin < FRAGILITY_FACTOR:
            flag = "  (near the tolerance, but the same outcome across the window)"
        return (f"{self.label}: rank {self.rank} of {self.size}; smallest kept {kept}, "
                f"largest dropped {self.largest_dropped:.3g}, tolerance {self.tolerance:.3g}{flag}")


def resolve_tolerance(tol, n: int) -> float:
    """The relative tolerance to use: ``tol`` if given, else the documented default."""
    if tol is None:
        return max(DEFAULT_RELATIVE_TOLERANCE, 20.0 * n * _EPS)
    if isinstance(tol, bool):
        raise ValueError(f"tol must be a positive number, got {tol!r}.")
    try:
        tol = float(tol)
    except (TypeError, ValueError):
        raise ValueError(f"tol must be a positive number, got {tol!r}.") from None
    if not math.isfinite(tol) or tol <= 0.0 or tol >= 1.0:
        raise ValueError(f"tol is relative to the model's scale and must lie in (0, 1), got {tol!r}.")
    return tol


def decide_rank(singular_values, scale: float, tol: float, label: str) -> RankDecision:
    """Decide a rank from singular values (descending) and record the decision.

    Values are divided by ``scale`` and compared with the relative tolerance ``tol``:
    a value is kept when it exceeds ``tol``.
    """
    s = np.asarray(singular_values, dtype=float)
    rel = s / scale if scale > 0 else np.zeros_like(s)
    r = int(np.count_nonzero(rel > tol))
    kept = float(rel[r - 1]) if r > 0 else math.inf
    dropped = float(rel[r]) if r < rel.size else 0.0
    return RankDecision(label, r, int(rel.size), kept, dropped, float(tol))


def any_fragile(decisions) -> bool:
    """True when any decision in the list is fragile."""
    return any(d.fragile for d in decisions)
