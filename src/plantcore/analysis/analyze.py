"""One call that diagnoses a model: :func:`analyze` and its :class:`Analysis` result.

:func:`analyze` runs the Kalman decomposition, the minimal realization, the per-mode
classification, both distance estimates and (when the model has a stable part) the Hankel
singular values, and keeps everything in one frozen result that can render itself as plain
text, markdown, a JSON-safe dictionary or HTML.  Rendering lives in :mod:`plantcore.reports.text`;
this module only computes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from plantcore.core.errors import NumericalBreakdown
from plantcore.core.model import StateSpaceModel
from plantcore.core.rendering import render
from plantcore.core.wording import SAFETY_CAUTION, describe_direction
from plantcore.reduction.balanced import _hankel_values, _split
from plantcore.structure.distance import DistanceEstimate, _distances
from plantcore.structure.kalman import (
    PART_NAMES,
    KalmanDecomposition,
    _prepare,
    kalman_decomposition,
)
from plantcore.structure.minimal import MinimalRealization, _minimal_from_decomposition
from plantcore.structure.modes import NARROW_MARGIN, _mode_table
from plantcore.structure.pbh_measures import PBHMeasures, threads_for_size
from plantcore.structure.removed_modes import removed_from_modes, warn_hidden_modes

__all__ = ["Analysis", "analyze"]


def _safe(x):
    """A JSON-safe float: ``None`` for inf or NaN."""
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass(frozen=True)
class Analysis:
    """Everything plantcore can say about one model.

    Attributes
    ----------
    model : StateSpaceModel
        The model analysed.
    tolerance : float
        The relative rank tolerance used (see :mod:`plantcore.core.rank`).
    decomposition : KalmanDecomposition
        The four-part Kalman decomposition.
    minimal : MinimalRealization
        A minimal realization.
    modes : tuple of Mode
        One entry per eigenvalue (see :func:`plantcore.classify_modes`).
    stabilizable : bool
        Every mode that is not stable (unstable or marginal) lies in a controllable part.
    detectable : bool
        Every mode that is not stable lies in an observable part.
    is_minimal : bool
        The whole model is controllable and observable (part 1 has all ``n`` states).
    distance_to_uncontrollability, distance_to_unobservability : DistanceEstimate
        Estimates (upper bounds) of the distance to the nearest uncontrollable and
        unobservable model, relative to the model's scale.
    hankel_singular_values : (n_stable,) ndarray or None
        Of the stable part; ``None`` when they do not exist (a mode on the stability
        boundary), an empty array when no mode is stable.
    hankel_note : str
        Why the Hankel singular values are missing or partial, or ``""``.
    part_directions : dict
        For each part name, one readable description per basis vector of the part, in the
        original state names (for example ``"1.00 zone2 - 0.45 zone3"``).
    narrow_margin : float
        The threshold under which a passing PBH margin is flagged as narrow.
    removed_unstable_modes : tuple of RemovedMode
        The modes outside part 1 (so removed by the minimal realization) that are unstable
        or on the stability boundary, read from ``modes``; the same tuple as
        ``minimal.removed_unstable_modes``.  Reports show them among the first verdicts.
    """

    model: StateSpaceModel
    tolerance: float
    decomposition: KalmanDecomposition = field(repr=False)
    minimal: MinimalRealization = field(repr=False)
    modes: tuple
    stabilizable: bool
    detectable: bool
    is_minimal: bool
    distance_to_uncontrollability: DistanceEstimate
    distance_to_unobservability: DistanceEstimate
    hankel_singular_values: np.ndarray | None = field(repr=False)
    hankel_note: str
    part_directions: dict = field(repr=False)
    narrow_margin: float = NARROW_MARGIN
    removed_unstable_modes: tuple = ()

    # --- convenient views -----------------------------------------------------------------
    @property
    def sizes(self):
        """The four part sizes (a :class:`plantcore.PartSizes`)."""
        return self.decomposition.sizes

    @property
    def minimal_order(self) -> int:
        """Order of a minimal realization (size of part 1)."""
        return int(self.decomposition.sizes.controllable_observable)

    @property
    def decisions(self) -> tuple:
        """Every rank decision of the decomposition, with its margin."""
        return self.decomposition.decisions

    @property
    def fragile(self) -> bool:
        """True when any rank decision lies within a factor 100 of the tolerance."""
        return bool(self.decomposition.fragile)

    @property
    def narrow_modes(self) -> tuple:
        """The modes that pass a PBH test only narrowly (near pole-zero cancellations)."""
        return tuple(m for m in self.modes if m.narrow)

    # --- renderings -----------------------------------------------------------------------
    def to_text(self) -> str:
        """A plain-text report (ends with the safety caution)."""
        return render(self, "text")

    def to_markdown(self) -> str:
        """A markdown report (ends with the safety caution)."""
        return render(self, "markdown")

    def to_html(self, *, fragment: bool = False) -> str:
        """A self-contained HTML report (the reports layer renders it; nothing is recomputed
        except what the report adds: the certificates and the balanced truncation).

        ``fragment=False`` (default) gives a complete page; ``fragment=True`` one ``<div>``
        to embed in a notebook or another page: no ``<html>`` or ``<body>``, and a style
        sheet scoped to the report, so the host page keeps its own look."""
        return render(self, "html", fragment=fragment)

    def to_dict(self) -> dict:
        """A JSON-safe dictionary: plain Python types only, ``inf`` as ``None``, complex
        numbers as ``[re, im]``.

        Examples
        --------
        >>> import json
        >>> import plantcore as pc
        >>> d = pc.analyze(([[-1.0]], [[1.0]], [[1.0]])).to_dict()
        >>> d["verdicts"]["is_minimal"], d["part_sizes"]["controllable_observable"]
        (True, 1)
        >>> isinstance(json.dumps(d, allow_nan=False), str)
        True
        """
        m = self.model
        kd = self.decomposition
        hsv = self.hankel_singular_values
        return {
            "model": {
                "name": m.name,
                "states": m.n,
                "inputs": m.n_inputs,
                "outputs": m.n_outputs,
                "time_domain": "discrete" if m.is_discrete else "continuous",
                "sample_time": m.dt,
                "state_names": list(m.states),
                "input_names": list(m.inputs),
                "output_names": list(m.outputs),
            },
            "tolerance": float(self.tolerance),
            "part_sizes": {name: int(size) for name, size in zip(PART_NAMES, kd.sizes)},
            "minimal_order": self.minimal_order,
            "removed_uncontrollable": int(self.minimal.removed_uncontrollable),
            "removed_unobservable": int(self.minimal.removed_unobservable),
            "removed_unstable_modes": [r.to_dict() for r in self.removed_unstable_modes],
            "decisions": [d.to_dict() for d in kd.decisions],
            "fragile": self.fragile,
            "condition": _safe(kd.condition),
            "residual": _safe(kd.residual),
            "part_directions": {k: list(v) for k, v in self.part_directions.items()},
            "verdicts": {
                "stabilizable": bool(self.stabilizable),
                "detectable": bool(self.detectable),
                "is_minimal": bool(self.is_minimal),
            },
            "distance_to_uncontrollability": self.distance_to_uncontrollability.to_dict(),
            "distance_to_unobservability": self.distance_to_unobservability.to_dict(),
            "narrow_margin": float(self.narrow_margin),
            "modes": [mode.to_dict() for mode in self.modes],
            "hankel_singular_values": None if hsv is None else [float(v) for v in hsv],
            "hankel_note": self.hankel_note,
            "caution": SAFETY_CAUTION,
        }


def _readable_basis(V: np.ndarray) -> np.ndarray:
    """Another basis of the span of ``V`` that is as close to named states as possible.

    QR with column pivoting of ``V^T`` picks the ``k`` states (rows of ``V``) that are most
    independent within the span; the basis ``V (V[pivots])^{-1}`` then has a unit weight on
    one of those states and zero on the others (a reduced echelon form, well conditioned
    because of the pivoting).  A part that is spanned by a few original states is thus
    described by those states alone.
    """
    k = V.shape[1]
    if k == 0:
        return V
    _, _, piv = scipy.linalg.qr(V.T, pivoting=True, mode="economic")
    rows = np.sort(piv[:k])
    try:
        W = V @ np.linalg.inv(V[rows, :])
    except np.linalg.LinAlgError:  # pragma: no cover - pivoting makes this well posed
        return V
    return W


def _part_directions(kd: KalmanDecomposition, names) -> dict:
    out = {}
    for name in PART_NAMES:
        W = _readable_basis(kd.basis(name))
        out[name] = tuple(describe_direction(W[:, j], names) for j in range(W.shape[1]))
    return out


#: The stages :func:`analyze` announces to its ``progress`` callback, in order.
ANALYSIS_STAGES = ("Kalman decomposition and certificate", "mode table", "distance search",
                   "Hankel singular values")


def analyze(model, tol=None, *, progress=None) -> Analysis:
    """Diagnose a model: Kalman parts, minimal order, modes, verdicts and Hankel values.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    tol : float, optional
        Relative rank tolerance (default and reasoning in :mod:`plantcore.core.rank`).
    progress : callable, optional
        Called with the name of each stage as it starts (:data:`ANALYSIS_STAGES`), so that
        a caller can show where a long analysis is; the numerics never print.

    Returns
    -------
    Analysis

    Warns
    -----
    HiddenModeWarning
        When a mode outside part 1 (removed by the minimal realization) is unstable or on
        the stability boundary; ``removed_unstable_modes`` holds them.  (Not issued to
        plantcore's own callers, such as the reports and the sweep, which show the field.)

    Notes
    -----
    The verdicts follow the definitions: *stabilizable* when every mode that is not
    (strictly) stable is controllable, *detectable* when every such mode is observable
    (Wonham, *Linear Multivariable Control*, 1979).  Both are decided from the Kalman part
    of each mode, so they agree with :func:`plantcore.kalman_decomposition`; marginal modes
    (on the stability boundary, see :mod:`plantcore.structure.modes`) count as not stable.  One
    decomposition and one equilibrated copy of the model serve every part of the analysis.

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.diag([-1.0, 0.5]); B = np.array([[1.0], [1.0]]); C = np.array([[1.0, 0.0]])
    >>> a = pc.analyze((A, B, C))
    >>> a.stabilizable, a.detectable, a.is_minimal
    (True, False, False)
    >>> pc.core.wording.SAFETY_CAUTION in a.to_text()
    True
    """
    p = _prepare(model, tol)
    model = p.model
    # small models: many small BLAS calls, which a second thread only slows down
    announce = progress if progress is not None else (lambda stage: None)
    with threads_for_size(model.n):
        announce(ANALYSIS_STAGES[0])
        kd = kalman_decomposition(model, tol)
        # One real Schur form of the equilibrated A serves the mode table, the boundary test,
        # the distance starts and the Gramians (it is computed on first use).
        whole = PBHMeasures(p.A)
        announce(ANALYSIS_STAGES[1])
        modes = tuple(_mode_table(kd, p, NARROW_MARGIN, whole))
        removed = removed_from_modes(modes)
        mr = _minimal_from_decomposition(kd, p.s, removed)
        stabilizable = all(m.stable or m.controllable for m in modes)
        detectable = all(m.stable or m.observable for m in modes)
        announce(ANALYSIS_STAGES[2])
        to_unc, to_unobs = _distances(p, modes, whole)
        announce(ANALYSIS_STAGES[3])
        note = ""
        try:
            hsv = _hankel_values(_split(model, p, whole.schur), model.is_discrete) if model.n \
                else np.zeros(0)
            n_stable = hsv.size
            if model.n and n_stable == 0:
                note = "no mode is stable, so there are no Hankel singular values."
            elif n_stable < model.n:
                note = (f"{model.n - n_stable} unstable mode(s) have no Hankel singular value; the "
                        "values are those of the stable part.")
        except (ValueError, NumericalBreakdown) as exc:
            # The Hankel stage may give up (e.g. modes on or near the stability boundary); the
            # structural analysis does not depend on it and is still delivered.
            hsv = None
            note = f"Hankel singular values not available: {exc}"
    warn_hidden_modes(removed, "the minimal realization", stacklevel=2)
    return Analysis(
        model=model,
        tolerance=float(p.tol),
        decomposition=kd,
        minimal=mr,
        modes=modes,
        stabilizable=bool(stabilizable),
        detectable=bool(detectable),
        is_minimal=bool(kd.sizes.controllable_observable == model.n),
        distance_to_uncontrollability=to_unc,
        distance_to_unobservability=to_unobs,
        hankel_singular_values=hsv,
        hankel_note=note,
        part_directions=_part_directions(kd, model.states),
        narrow_margin=NARROW_MARGIN,
        removed_unstable_modes=removed,
    )
